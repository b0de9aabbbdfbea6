"""Which pairs interact: the bond list of a model.

Rule (``find_bonds``): for a pair of elements whose bond entry gives ``cutoff_A``, every pair up
to that length. Otherwise the neighbour-shell rule: the shells of atom i are its neighbour distances grouped from
the shortest, shell s holding the distances up to (1 + tol)·(shortest distance not in shells < s); a bond i–j is
kept when j lies in one of the first ``shells`` (default 1) shells of i, or i in those of j. tol =
``SHELL_TOLERANCE`` = 0.1 (common practice, no source). Each bond is listed once: i < j, or i == j with the first
non-zero component of the image positive.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.errors import StructureError
from screener.structure.crystal import Crystal
from screener.structure.neighbours import NeighbourList, find_neighbours
from screener.tb.params import ParameterSet, default_parameters

#: Relative tolerance grouping neighbour distances into one shell (common practice, no source).
SHELL_TOLERANCE = 0.1
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
        return None, 1
    return bp.cutoff_A, bp.shells


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
    dmin = crystal._shortest_contact()[0]
    radius = max(cutoffs + [dmin * (1 + shell_tolerance) * 1.5])
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
    # shell rule for pair types without a cutoff; recompute the bound per shell count in use
    for nshell in sorted({s for c, s in rules.values() if c is None}):
        bound = np.zeros(n)
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


