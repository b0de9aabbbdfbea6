"""Which pairs interact: the bond list of a model.

Rule (``find_bonds``): for a pair of elements whose bond entry gives ``cutoff_A``, every pair up
to that length. Otherwise, by default, the first coordination cluster: every contact of atom i up to
``CLUSTER_FACTOR`` = 1.3 times i's shortest contact, which keeps the 3 + 3 bonds of the A7 structure (ratio 1.15–1.24)
and the 8 + 6 of bcc (1.155) but not the second shells of simple cubic, fcc, rocksalt or diamond (≥ 1.41) (the
factor is common practice, no source). A bond entry with ``shells = N`` uses the neighbour-shell rule instead:
the shells of atom i are its neighbour distances grouped from the shortest, shell s holding the distances up to
(1 + tol)·(shortest distance not in shells < s), tol = ``SHELL_TOLERANCE`` = 0.1 (common practice, no source).
Either way a bond i–j is kept when j is in i's set or i in j's. A cut-off that leaves out contacts within
``CLUSTER_FACTOR`` × the shortest gets a warning. Each bond is listed once: i < j, or i == j with the first
non-zero component of the image positive.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from screener.errors import StructureError
from screener.structure.crystal import Crystal
from screener.structure.neighbours import NeighbourList, find_neighbours, union_components
from screener.tb.params import ParameterSet, default_parameters

#: Relative tolerance grouping neighbour distances into one shell (common practice, no source).
SHELL_TOLERANCE = 0.1
#: Contacts up to this multiple of each atom's shortest contact form its first coordination cluster.
CLUSTER_FACTOR = 1.3
#: Longest neighbour search when looking for higher shells, Å.
MAX_SEARCH_A = 30.0


@dataclass(frozen=True)
class BondList:
    """Interacting pairs. Each bond once: i < j, or i == j with the first non-zero image component positive.

    The bond vector in lattice coordinates is ``frac[j] + image − frac[i]``.
    """

    i: np.ndarray
    """(p,) int, first atom."""
    j: np.ndarray
    """(p,) int, second atom."""
    image: np.ndarray
    """(p, 3) int, lattice translation added to atom j."""
    vector_frac: np.ndarray | None = None
    """(p, 3) float, bond vectors (lattice coordinates) when the list was found; used by build_model to re-anchor
    images of atoms that wrapped across the cell boundary. None: images are taken as given."""

    def __post_init__(self):
        i = np.asarray(self.i, dtype=int).reshape(-1)
        j = np.asarray(self.j, dtype=int).reshape(-1)
        img = np.asarray(self.image, dtype=int).reshape(-1, 3)
        if not (len(i) == len(j) == len(img)):
            raise StructureError(f"bond list arrays disagree in length: i {len(i)}, j {len(j)}, image {len(img)}")
        object.__setattr__(self, "i", i)
        object.__setattr__(self, "j", j)
        object.__setattr__(self, "image", img)
        if self.vector_frac is not None:
            v = np.asarray(self.vector_frac, dtype=float).reshape(-1, 3)
            if len(v) != len(i):
                raise StructureError(f"bond list vector_frac has {len(v)} rows for {len(i)} bonds")
            object.__setattr__(self, "vector_frac", v)

    def __len__(self) -> int:
        return len(self.i)


def _canonical(i, j, image) -> np.ndarray:
    """Mask selecting one direction of each bond listed in both directions."""
    idx = np.argmax(image != 0, axis=1)
    first = image[np.arange(len(i)), idx]
    return (i < j) | ((i == j) & (first > 0))


def _bond_rule(params: ParameterSet, a: str, b: str) -> tuple[float | None, int]:
    """(cutoff_A, shells) for a pair without building its hoppings (which may legitimately raise)."""
    bp = params.bond_params.get(tuple(sorted((a, b))))
    if bp is None:
        return None, 0
    return bp.cutoff_A, (0 if bp.shells is None else bp.shells)


def _rules(crystal: Crystal, params: ParameterSet):
    elements = sorted(set(crystal.species))
    return elements, {(a, b): _bond_rule(params, a, b) for a in elements for b in elements}


def bond_search(crystal: Crystal, params: ParameterSet | None = None, *,
                shell_tolerance: float = SHELL_TOLERANCE) -> NeighbourList:
    """The one neighbour search the bond rules need: every pair out to a radius that closes the shells asked for.

    Its result can be handed to `find_bonds` (and to the nearest-neighbour shell of the candidate generators), so
    a parent's neighbours are searched once.
    """
    if params is None:
        params = default_parameters(set(crystal.species))
    _, rules = _rules(crystal, params)
    cutoffs = [c for c, _ in rules.values() if c is not None]
    shells_needed = max((s for c, s in rules.values() if c is None), default=0)
    cluster = any(c is None and s == 0 for c, s in rules.values())
    dmin = crystal._shortest_contact()[0]
    radius = max(cutoffs + [dmin * (1 + shell_tolerance) * 1.5, dmin * CLUSTER_FACTOR * 1.05])
    n = crystal.n_atoms
    while True:
        nl = find_neighbours(crystal.lattice_A, crystal.frac, radius)
        bound = np.zeros(n)
        closed = True
        for _ in range(shells_needed):
            rest = nl.distance_A > bound[nl.i] + 1e-9
            nearest = np.full(n, np.inf)
            np.minimum.at(nearest, nl.i[rest], nl.distance_A[rest])
            # a shell is only known to be complete when its upper edge lies inside the search sphere
            if np.any(~np.isfinite(nearest)) or np.any(nearest * (1 + shell_tolerance) >= radius):
                closed = False
                break
            bound = nearest * (1 + shell_tolerance)
        if closed and cluster:
            nearest = np.full(n, np.inf)
            np.minimum.at(nearest, nl.i, nl.distance_A)
            closed = bool(np.all(np.isfinite(nearest)) and np.all(nearest * CLUSTER_FACTOR < radius))
        if closed or radius >= MAX_SEARCH_A:
            return nl
        radius = min(radius * 1.6, MAX_SEARCH_A)


def find_bonds(crystal: Crystal, params: ParameterSet | None = None, *,
               shell_tolerance: float = SHELL_TOLERANCE, neighbours: NeighbourList | None = None) -> BondList:
    """Pairs that interact under the parameter rules (see module docstring), each listed once.

    ``neighbours`` is the result of `bond_search` for the same crystal and parameters (searched here if None).
    """
    if params is None:
        params = default_parameters(set(crystal.species))
    nl = bond_search(crystal, params, shell_tolerance=shell_tolerance) if neighbours is None else neighbours
    species = crystal.species
    elements, rules = _rules(crystal, params)
    n = crystal.n_atoms

    si = np.array([elements.index(s) for s in species])
    keep = np.zeros(len(nl.i), dtype=bool)
    for (a, b), (cutoff, nshell) in rules.items():
        sel = (si[nl.i] == elements.index(a)) & (si[nl.j] == elements.index(b))
        if cutoff is not None:
            keep |= sel & (nl.distance_A <= cutoff + 1e-9)
    nearest_any = np.full(n, np.inf)
    np.minimum.at(nearest_any, nl.i, nl.distance_A)
    # a user cut-off that leaves out part of the first coordination cluster deserves a word
    for (a, b), (cutoff, _) in rules.items():
        if cutoff is None or a > b:
            continue
        sel = (((si[nl.i] == elements.index(a)) & (si[nl.j] == elements.index(b)))
               | ((si[nl.i] == elements.index(b)) & (si[nl.j] == elements.index(a))))
        missed = sel & (nl.distance_A > cutoff + 1e-9) & (nl.distance_A <= nearest_any[nl.i] * CLUSTER_FACTOR)
        if np.any(missed):
            warnings.warn(
                f"the {a}-{b} cutoff_A = {cutoff} Å leaves out contacts at {nl.distance_A[missed].min():.3f} Å, "
                f"within {CLUSTER_FACTOR} x the shortest contact; raise cutoff_A if they are bonds",
                stacklevel=2,
            )
    # shell rules for pair types without a cutoff: 0 = the coordination cluster, N = the first N shells
    for nshell in sorted({s for c, s in rules.values() if c is None}):
        bound = np.zeros(n)
        if nshell == 0:
            bound = np.where(np.isfinite(nearest_any), nearest_any * CLUSTER_FACTOR, 0.0)
        for _ in range(nshell):
            rest = nl.distance_A > bound[nl.i] + 1e-9
            nearest = np.full(n, np.inf)
            np.minimum.at(nearest, nl.i[rest], nl.distance_A[rest])
            bound = np.where(np.isfinite(nearest), nearest * (1 + shell_tolerance), bound)
        in_shell = (nl.distance_A <= bound[nl.i] + 1e-9) | (nl.distance_A <= bound[nl.j] + 1e-9)
        for (a, b), (cutoff, s) in rules.items():
            if cutoff is None and s == nshell:
                sel = (si[nl.i] == elements.index(a)) & (si[nl.j] == elements.index(b))
                keep |= sel & in_shell
    i, j, image = nl.i[keep], nl.j[keep], nl.image[keep]
    once = _canonical(i, j, image)
    i, j, image = i[once], j[once], image[once]
    vec = crystal.frac[j] + image - crystal.frac[i]
    return BondList(i, j, image, vec)




def bond_orbits(crystal: Crystal, i, j, image, rotations, translations, tol: float = 1e-4) -> np.ndarray:
    """(p,) int orbit label of each bond (i, j, image) under the space-group operations (R, t) of ``crystal``
    (fractional, x → R x + t): two bonds share a label when an operation maps one onto the other or onto its
    reverse. Bonds an operation maps outside the list keep their own label (a list that is not closed)."""
    frac = np.asarray(crystal.frac, dtype=float)
    i, j = np.asarray(i, dtype=int), np.asarray(j, dtype=int)
    image = np.asarray(image, dtype=int).reshape(-1, 3)
    p = len(i)
    vec = frac[j] + image - frac[i]  # bond vectors, lattice coordinates
    # bond lookup: (i, j, image) and the reverse (j, i, -image) both name the same bond
    key = {}
    for k in range(p):
        key[(int(i[k]), int(j[k]), *map(int, image[k]))] = k
        key[(int(j[k]), int(i[k]), *map(int, -image[k]))] = k
    rows, cols = [], []  # pairs of bonds an operation maps onto each other
    for rot, t in zip(np.asarray(rotations), np.asarray(translations), strict=True):
        moved = frac @ rot.T + t
        # atom s goes to the atom at moved[s] (modulo lattice translations)
        diff = moved[:, None, :] - frac[None, :, :]
        match = np.all(np.abs(diff - np.round(diff)) < tol, axis=2)
        if not np.all(match.sum(axis=1) == 1):
            continue  # not an operation of this crystal at this tolerance
        to = np.argmax(match, axis=1)
        new_i = to[i]
        start = moved[i] - frac[new_i]  # integer: where the image of atom i lands
        end = start + vec @ rot.T + frac[new_i]
        d = end[:, None, :] - frac[None, :, :]
        hit = np.all(np.abs(d - np.round(d)) < tol, axis=2)
        new_j = np.argmax(hit, axis=1)
        new_img = np.round(end - frac[new_j] - np.round(start)).astype(int)
        for k in range(p):
            m = key.get((int(new_i[k]), int(new_j[k]), *map(int, new_img[k])))
            if m is not None:
                rows.append(k)
                cols.append(m)
    return union_components(p, rows, cols)
