"""The higher-symmetry parent of an observed (refined) structure.

Two steps, each within its own tolerance:

1. the lattice: integer basis changes W (entries −1, 0, 1 on the reduced basis) whose metric W G Wᵀ matches G
   within the strain limit are near-symmetries of the lattice; each set of them that closes into a group gives a
   symmetrised metric (the group average of W G Wᵀ), i.e. a candidate idealised cell;
2. the positions: on each candidate cell the space group is searched with a tolerance rising from the default up
   to the displacement limit, and the idealised positions are taken from the standardised cell of each group found.

Every parent is expressed in the observed cell with the observed atom order (`ParentCandidate.in_observed_cell`),
so the straight path parent → observed is defined atom by atom. The group–subgroup index is
(|point group of the parent| / |point group of the observed|) × (atoms in the observed primitive cell / atoms in
the parent's primitive cell), the ratio of the numbers of operations per unit volume.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import spglib
from scipy.linalg import polar

from screener.errors import StructureError
from screener.structure.crystal import Crystal
from screener.structure.symmetry import SYMPREC_A, _cell

#: Default largest atomic displacement between observed structure and parent, Å (issue 11).
MAX_DISPLACEMENT_A = 0.4
#: Default largest lattice strain between observed structure and parent (issue 11).
MAX_STRAIN = 0.08


@dataclass(frozen=True, eq=False)
class ParentCandidate:
    """One higher-symmetry structure the observed one lies close to."""

    space_group_symbol: str
    """Hermann–Mauguin symbol of the parent."""
    space_group_number: int
    """International Tables number of the parent."""
    point_group_order: int
    """Number of point-group operations of the parent."""
    primitive_atoms: int
    """Atoms in the parent's primitive cell."""
    index: int
    """Group–subgroup index of the observed structure's space group in the parent's."""
    max_displacement_A: float
    """Largest atomic displacement observed − parent, Å."""
    max_strain: float
    """Largest principal lattice strain observed relative to parent (|eigenvalue of U − 1|)."""
    symprec_A: float
    """Position tolerance at which the group was found, Å."""
    in_observed_cell: Crystal = field(repr=False)
    """The parent in the observed cell and atom order (lattice rotated onto the observed one)."""
    displacement_A: np.ndarray = field(repr=False)
    """(n, 3) Cartesian displacement observed − parent per observed atom, Å (in the parent's lattice)."""


@dataclass(frozen=True, eq=False)
class ParentSearch:
    """The chain of parents found for an observed structure, lowest to highest symmetry."""

    observed_symbol: str
    """Space group of the observed structure at the default tolerance."""
    observed_number: int
    """Its number."""
    chain: tuple[ParentCandidate, ...]
    """Distinct parents, by increasing index (the observed group itself excluded)."""
    observed_primitive: Crystal = field(repr=False, default=None)
    """The observed structure's standardised primitive cell: the cell of every ``in_observed_cell``."""

    @property
    def highest(self) -> ParentCandidate:
        """The parent of highest symmetry (largest index)."""
        if not self.chain:
            raise StructureError(f"no structure of higher symmetry than {self.observed_symbol} lies within the "
                                 "displacement and strain limits; raise them or give the parent as a file")
        return self.chain[-1]


def _point_group_order(ds) -> int:
    return len(np.unique(np.asarray(ds.rotations).reshape(len(ds.rotations), -1), axis=0))


def _n_primitive(ds) -> int:
    return len(np.unique(ds.mapping_to_primitive))


def _lattice_groups(lattice_A: np.ndarray, max_strain: float) -> list[tuple[int, np.ndarray]]:
    """Symmetrised lattices (input basis) for each group of near-symmetries within ``max_strain``.

    Returns (operations W on the input's lattice rows, lattice) by increasing order; the lattices keep the input's
    orientation (polar part).
    """
    red = spglib.niggli_reduce(lattice_A, eps=1e-5)
    if red is None:
        raise StructureError("the cell could not be reduced to its shortest basis; check the lattice parameters")
    red = np.asarray(red, dtype=float)
    t = np.rint(lattice_A @ np.linalg.inv(red))
    g = red @ red.T
    mats = np.array(list(itertools.product((-1, 0, 1), repeat=9)), dtype=float).reshape(-1, 3, 3)
    det = np.rint(np.linalg.det(mats))
    mats = mats[np.abs(det) == 1]
    gw = np.einsum("nij,jk,nlk->nil", mats, g, mats)
    w, v = np.linalg.eigh(g)
    ginv_half = v @ np.diag(w ** -0.5) @ v.T
    s = np.einsum("ij,njk,kl->nil", ginv_half, gw, ginv_half)
    strain = np.max(np.abs(np.sqrt(np.clip(np.linalg.eigvalsh(s), 1e-12, None)) - 1), axis=1)
    # an operation maps the lattice onto a copy strained twice as far as the lattice is from the symmetrised one
    ok = strain <= 2 * max_strain
    mats, strain = mats[ok], strain[ok]
    out, seen = [], set()
    for level in np.unique(np.round(strain, 3)):
        group = mats[strain <= level + 5e-4]
        keys = {tuple(np.rint(m).astype(int).ravel()) for m in group}
        prods = np.rint(np.einsum("aij,bjk->abik", group, group)).astype(int).reshape(-1, 9)
        if not all(tuple(p) in keys for p in prods) or len(group) in seen:
            continue
        seen.add(len(group))
        gsym = np.mean(np.einsum("nij,jk,nlk->nil", group, g, group), axis=0)
        red_sym = np.linalg.cholesky(gsym)  # rows: a lattice with the symmetrised metric
        lat = t @ red_sym
        q, _ = polar(np.linalg.solve(lat, lattice_A))  # lattice_A = lat @ q @ u
        in_input = np.einsum("ij,njk,kl->nil", t, group, np.linalg.inv(t))  # the same operations on the input rows
        out.append((np.rint(in_input).astype(int), lat @ q))
    return out


#: Tolerance of the symmetry search on positions already symmetrised, Å.
IDEAL_SYMPREC_A = 1e-3


def _symmetrised_positions(crystal: Crystal, lattice_ops: np.ndarray, max_move_A: float):
    """Positions averaged over growing sets of near-symmetries (W, τ) of ``crystal`` (exact lattice symmetry W).

    A lattice operation W (new rows W @ L) acts on fractional rows as x → x W. For each W and each translation
    τ = x_j − x_0 W taking atom 0 onto an atom of its element, the largest distance between the images of the atoms
    and their nearest like atoms measures how far the operation is from a symmetry; the operations within each
    distinct level up to ``max_move_A`` are averaged, x̄_i = mean_g (x_π(i) − τ) W⁻¹ (nearest images).
    """
    frac, lat = crystal.frac, crystal.lattice_A
    species = np.array(crystal.species)
    same = species[:, None] == species[None, :]
    cands = np.flatnonzero(species == species[0])
    ops, dists, perms = [], [], []
    for w in lattice_ops:
        xw = frac @ w
        for j in cands:
            tau = frac[j] - xw[0]
            diff = frac[None, :, :] - (xw + tau)[:, None, :]
            diff -= np.rint(diff)
            d = np.linalg.norm(diff @ lat, axis=2)
            d[~same] = np.inf
            perm = np.argmin(d, axis=1)
            if len(np.unique(perm)) != len(perm):
                continue
            # best-fitting translation: the one that moves the atoms least on average (origin free)
            resid = diff[np.arange(len(perm)), perm]
            tau = tau + resid.mean(axis=0)
            miss = frac[perm] - (xw + tau)
            miss -= np.rint(miss)
            ops.append((w, tau))
            dists.append(float(np.linalg.norm(miss @ lat, axis=1).max()))
            perms.append(perm)
    dists = np.array(dists)
    out = []
    for level in np.unique(np.round(dists[dists <= max_move_A], 4)):
        use = np.flatnonzero(dists <= level + 1e-4)
        acc = np.zeros_like(frac)
        for k in use:
            w, tau = ops[k]
            back = (frac[perms[k]] - tau) @ np.linalg.inv(w)
            acc += back - np.rint(back - frac)
        out.append(acc / len(use))
    return out


def _idealised(crystal: Crystal, strained: Crystal, symprec: float):
    """(dataset, parent in the observed cell, displacements in Å) of ``strained`` at ``symprec``, or None."""
    ds = spglib.get_symmetry_dataset(_cell(strained), symprec=symprec)
    if ds is None:
        return None
    p_mat = np.asarray(ds.transformation_matrix, dtype=float)
    shift = np.asarray(ds.origin_shift, dtype=float)
    std_pos = np.asarray(ds.std_positions, dtype=float)
    std_types = np.asarray(ds.std_types)
    numbers = np.asarray(_cell(crystal)[2])
    x_std = crystal.frac @ p_mat.T + shift
    diff = x_std[:, None, :] - std_pos[None, :, :]
    diff -= np.rint(diff)
    std_lat = np.asarray(ds.std_lattice, dtype=float)
    dist = np.linalg.norm(diff @ std_lat, axis=2)
    dist[numbers[:, None] != std_types[None, :]] = np.inf
    nearest = np.argmin(dist, axis=1)
    y = x_std - diff[np.arange(len(nearest)), nearest]
    frac_par = (y - shift) @ np.linalg.inv(p_mat).T
    lat0 = p_mat.T @ std_lat  # parent lattice in the observed basis, standard orientation
    q, u = polar(np.linalg.solve(lat0, crystal.lattice_A))
    # any uniform scale of the parent has its symmetry: pick the one that balances the principal strains
    stretch = np.linalg.eigvalsh(u)
    scale = 0.5 * (stretch.min() + stretch.max())
    lat_par = lat0 @ q * scale
    u = u / scale
    disp = (crystal.frac - frac_par) @ lat_par
    strain = float(np.max(np.abs(np.linalg.eigvalsh(u) - 1)))
    parent = Crystal(lat_par, frac_par, crystal.species, crystal.labels, min_distance_A=crystal.min_distance_A)
    return ds, parent, disp, strain


def find_parents(crystal: Crystal, max_displacement_A: float = MAX_DISPLACEMENT_A, max_strain: float = MAX_STRAIN,
                 symprec: float = SYMPREC_A, n_steps: int = 14) -> ParentSearch:
    """The chain of higher-symmetry structures within the displacement and strain limits (see module docstring).

    The search starts from the observed structure's standardised primitive cell, which is also the cell of
    ``in_observed_cell``. Limitation: only lattice symmetries of that cell are tried, so a parent whose point
    group is not a lattice symmetry of the observed primitive cell (e.g. a cubic parent of a tetragonal 2×1×1
    supercell) is not found; give it with a parent file instead.
    """
    if not (max_displacement_A > symprec):
        raise StructureError(f"the displacement limit must exceed the symmetry tolerance {symprec} Å, got "
                             f"{max_displacement_A!r} Å")
    if not (0 <= max_strain < 0.5):
        raise StructureError(f"the strain limit must lie between 0 and 0.5, got {max_strain!r}")
    from screener.structure.symmetry import analyse, standard_primitive

    # the observed structure's standardised primitive cell: the same start whatever origin, setting or atom order
    crystal = standard_primitive(crystal, analyse(crystal, symprec)).crystal
    obs = spglib.get_symmetry_dataset(_cell(crystal), symprec=symprec)
    obs_order, obs_prim = _point_group_order(obs), _n_primitive(obs)
    found: dict[tuple[int, int], ParentCandidate] = {}
    for ops, lat in _lattice_groups(crystal.lattice_A, max_strain):
        strained = Crystal(lat, crystal.frac, crystal.species, crystal.labels, min_distance_A=0.1)
        for sym_frac in _symmetrised_positions(strained, ops, 2 * max_displacement_A):
            try:
                ideal = Crystal(lat, sym_frac, crystal.species, crystal.labels, min_distance_A=0.1)
            except StructureError:
                continue
            res = _idealised(crystal, ideal, IDEAL_SYMPREC_A)
            if res is None:
                continue
            ds, parent, disp, strain = res
            dmax = float(np.max(np.linalg.norm(disp, axis=1)))
            if dmax > max_displacement_A + 1e-9 or strain > max_strain + 1e-9:
                continue
            order, nprim = _point_group_order(ds), _n_primitive(ds)
            ratio = order / obs_order * obs_prim / nprim
            index = int(round(ratio))
            if index <= 1 or abs(ratio - index) > 1e-6:
                continue
            key = (int(ds.number), nprim)
            old = found.get(key)
            if old is None or dmax < old.max_displacement_A - 1e-9:
                found[key] = ParentCandidate(str(ds.international), int(ds.number), order, nprim, index, dmax,
                                             strain, IDEAL_SYMPREC_A, parent, disp)
    chain = tuple(sorted(found.values(), key=lambda c: (c.index, c.max_displacement_A)))
    return ParentSearch(str(obs.international), int(obs.number), chain, crystal)


def parent_primitive(candidate: ParentCandidate) -> Crystal:
    """The parent's idealised primitive cell (standard setting), e.g. for writing it as a file."""
    from screener.structure.symmetry import primitive_cell

    return primitive_cell(candidate.in_observed_cell, symprec=1e-4)
