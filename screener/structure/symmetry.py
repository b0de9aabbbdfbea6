"""Symmetry through spglib: space group, Wyckoff letters, primitive/standard cells."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import spglib

from screener.errors import SymmetryError
from screener.structure.crystal import Crystal
from screener.structure.elements import ATOMIC_NUMBER

#: Default symmetry tolerance, Å (spglib's own default is 1e-5; refined structures need looser).
SYMPREC_A = 1e-3


def _failure_hint(crystal: Crystal, symprec: float) -> str:
    """Why the symmetry search may have failed and what to try, from the shortest contact and the tolerance."""
    d = crystal._shortest_contact()[0]
    if d < 4 * symprec:
        what = (f"its shortest contact, {d:.3g} Å, is within a few tolerances: try a smaller --symprec, e.g. "
                f"{d / 10:.2g}")
    elif symprec < 0.1:
        what = "for a slightly distorted or rounded structure a larger --symprec (up to 0.1 Å) may help"
    else:
        what = ("the tolerance is already large (≥ 0.1 Å); a larger one would merge distinct atoms, so check the "
                "structure instead")
    return f"; {what}"


def _cell(crystal: Crystal):
    return (crystal.lattice_A, crystal.frac, [ATOMIC_NUMBER[s] for s in crystal.species])


def _check_tolerance(crystal: Crystal, symprec: float) -> None:
    """Atoms within the tolerance of each other cannot be told apart: the search would fail or return nonsense."""
    d = crystal._shortest_contact()[0]
    if symprec >= 0.5 * d:
        raise SymmetryError(f"the symmetry tolerance {symprec:g} Å is not below half the shortest contact of "
                            f"{crystal.formula} ({d:.3g} Å): distinct atoms would be confused; use a smaller "
                            f"--symprec, well below {0.5 * d:.3g} Å (default {SYMPREC_A:g})")


def dataset(crystal: Crystal, symprec: float = SYMPREC_A):
    """spglib's symmetry dataset of ``crystal``; SymmetryError if spglib finds none."""
    if not (symprec > 0):
        raise SymmetryError(f"symprec must be a positive length in Å, got {symprec!r}")
    _check_tolerance(crystal, symprec)
    ds = spglib.get_symmetry_dataset(_cell(crystal), symprec=symprec)
    if ds is None:
        raise SymmetryError(
            f"the symmetry search found no space group for {crystal.formula} at a tolerance of {symprec:g} Å"
            f"{_failure_hint(crystal, symprec)}"
        )
    return ds


@dataclass(frozen=True)
class SymmetryInfo:
    """Space group and site symmetry of a crystal."""

    symbol: str
    """Hermann–Mauguin short symbol, e.g. 'R-3m'."""
    number: int
    """International Tables space-group number, 1–230."""
    wyckoff: tuple[str, ...]
    """Wyckoff letter per atom of the input cell."""
    equivalent_atoms: np.ndarray
    """(n,) int, index of the representative of each atom's symmetry orbit."""
    rotations: np.ndarray
    """(n_ops, 3, 3) int, rotations in the fractional basis of the input cell."""
    translations: np.ndarray
    """(n_ops, 3) float, fractional translations."""
    primitive_atoms: int
    """Number of atoms in the primitive cell."""
    symprec_A: float
    """Tolerance used, Å."""
    transformation_matrix: np.ndarray = None
    """(3, 3) float, spglib's P: conventional standard basis (a_s b_s c_s) = (a b c) P⁻¹ (columns)."""
    origin_shift: np.ndarray = None
    """(3,) float, spglib's p: standard fractional coordinates x_s = P x + p."""
    mapping_to_primitive: np.ndarray = None
    """(n,) int, index of the primitive-cell atom each input atom is a copy of."""
    conventional_atoms: int = 0
    """Number of atoms in the standard conventional cell (from the same search)."""


def analyse(crystal: Crystal, symprec: float = SYMPREC_A) -> SymmetryInfo:
    """Space group, Wyckoff letters and operations of ``crystal``."""
    ds = dataset(crystal, symprec)
    # spglib's primitive search is part of the dataset: no second search
    n_prim = len(np.unique(ds.mapping_to_primitive))
    return SymmetryInfo(
        symbol=str(ds.international),
        number=int(ds.number),
        wyckoff=tuple(str(w) for w in ds.wyckoffs),
        equivalent_atoms=np.asarray(ds.equivalent_atoms, dtype=int),
        rotations=np.asarray(ds.rotations, dtype=int),
        translations=np.asarray(ds.translations, dtype=float),
        primitive_atoms=int(n_prim),
        symprec_A=float(symprec),
        transformation_matrix=np.asarray(ds.transformation_matrix, dtype=float),
        origin_shift=np.asarray(ds.origin_shift, dtype=float),
        mapping_to_primitive=np.asarray(ds.mapping_to_primitive, dtype=int),
        conventional_atoms=int(len(ds.std_types)),
    )


#: Centring matrices, rows = primitive vectors as combinations of conventional vectors (row convention).
#: F, I and C match the primitive cells of Setyawan & Curtarolo (2010); R is the obverse hexagonal-to-
#: rhombohedral choice that spglib also uses.
CENTRING = {
    "P": np.eye(3),
    "F": np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]),
    "I": np.array([[-0.5, 0.5, 0.5], [0.5, -0.5, 0.5], [0.5, 0.5, -0.5]]),
    "C": np.array([[0.5, -0.5, 0], [0.5, 0.5, 0], [0, 0, 1]]),
    "A": np.array([[1, 0, 0], [0, 0.5, -0.5], [0, 0.5, 0.5]]),
    "R": np.array([[2, 1, 1], [-1, 1, 1], [-1, -2, 1]]) / 3.0,
}


@dataclass(frozen=True, eq=False)
class StandardPrimitive:
    """A crystal's standardised primitive cell in the input's Cartesian frame, and the map back to the input."""

    crystal: Crystal
    """Primitive cell: standard basis and origin (International Tables), positions not idealised, atoms sorted by
    element and position, lattice in the input's Cartesian frame."""
    supercell_matrix: np.ndarray
    """(3, 3) int M: input lattice = M @ primitive lattice (rows)."""
    origin_shift_A: np.ndarray
    """(3,) float, Cartesian shift added to input positions to reach the primitive cell's origin, Å."""

    def to_input_frame(self, cart_A: np.ndarray) -> np.ndarray:
        """Cartesian positions (Å) of the primitive setting expressed in the input's setting."""
        return np.asarray(cart_A, dtype=float) - self.origin_shift_A


def standard_primitive(crystal: Crystal, info: SymmetryInfo) -> StandardPrimitive:
    """The standardised primitive cell of ``crystal`` from its symmetry analysis (no second spglib search).

    Generating candidates on this cell makes them independent of how the input was written: origin, cell choice
    (conventional, supercell, non-standard basis) and atom order all map onto the same cell.
    """
    return _standardise(crystal, info)[0]


def _orbit_representatives(orbit) -> np.ndarray:
    """(n,) index of the first atom with the same orbit label as each atom."""
    orbit = np.asarray(orbit)
    return np.array([np.flatnonzero(orbit == orbit[k]).min() for k in range(len(orbit))], dtype=int)


def _standardise(crystal: Crystal, info: SymmetryInfo):
    P = info.transformation_matrix
    conv = np.linalg.inv(P).T @ crystal.lattice_A
    centring = CENTRING.get(info.symbol[0], np.eye(3))
    prim = centring @ conv
    x_std = crystal.frac @ P.T + info.origin_shift
    x_prim = x_std @ np.linalg.inv(centring)
    keep = np.unique(info.mapping_to_primitive, return_index=True)[1]
    frac = np.mod(x_prim[keep], 1.0)
    frac[np.isclose(frac, 1.0, atol=1e-9)] = 0.0
    species = [crystal.species[k] for k in keep]
    order = np.lexsort((np.round(frac[:, 2], 6), np.round(frac[:, 1], 6), np.round(frac[:, 0], 6), species))
    source = keep[order]  # input atom behind each primitive atom
    prim_crystal = Crystal(prim, frac[order], [crystal.species[k] for k in source],
                           [crystal.labels[k] for k in source], min_distance_A=crystal.min_distance_A)
    m = crystal.lattice_A @ np.linalg.inv(prim)
    if np.max(np.abs(m - np.round(m))) > 1e-4:
        raise SymmetryError(
            f"internal: the input cell of {crystal.formula} is not an integer multiple of its primitive cell "
            f"(M = {np.round(m, 4).tolist()}); try a different --symprec"
        )
    shift = info.origin_shift @ np.linalg.inv(P).T @ crystal.lattice_A
    std = StandardPrimitive(prim_crystal, np.round(m).astype(int), shift)
    # the same operations in the primitive basis: x_p = Q x + c, so R_p = Q R Q⁻¹ and t_p = Q t + c − R_p c
    q = np.linalg.inv(centring).T @ P
    c = np.linalg.inv(centring).T @ info.origin_shift
    rots = np.einsum("ij,njk,kl->nil", q, info.rotations, np.linalg.inv(q))
    trans = info.translations @ q.T + c - np.einsum("nij,j->ni", rots, c)
    rots_i = np.round(rots).astype(int)
    if np.max(np.abs(rots - rots_i)) > 1e-6:
        raise SymmetryError(f"internal: the operations of {crystal.formula} are not integer in its primitive cell")
    trans = np.mod(trans + 1e-9, 1.0) - 1e-9
    key = np.concatenate([rots_i.reshape(len(rots_i), -1), np.round(trans * 1e6)], axis=1)
    first = np.unique(key, axis=0, return_index=True)[1]
    first.sort()
    spg_index = info.mapping_to_primitive[source]  # spglib's primitive index of each of our atoms
    mine = np.empty(spg_index.max() + 1, dtype=int)
    mine[spg_index] = np.arange(len(source))
    orbit = mine[info.mapping_to_primitive[info.equivalent_atoms[source]]]
    rep = _orbit_representatives(orbit)
    rots_p, trans_p = rots_i[first], trans[first]
    if round(abs(float(np.linalg.det(m)))) > 1:
        # spglib lists only the operations that map the input's own lattice onto itself: for a supercell whose
        # lattice is less symmetric than the crystal (fcc as a 2×1×1 cell keeps 12 of its 48 rotations) the
        # primitive cell would inherit that loss, and with it more candidates, larger meshes and a different
        # answer for the same crystal; the primitive cell's own search lists them all
        full = analyse(prim_crystal, info.symprec_A)
        if len(full.rotations) > len(rots_p):
            rots_p, trans_p = np.asarray(full.rotations, dtype=int), np.asarray(full.translations, dtype=float)
            rep = _orbit_representatives(full.equivalent_atoms)
    prim_info = SymmetryInfo(
        symbol=info.symbol, number=info.number, wyckoff=tuple(info.wyckoff[k] for k in source),
        equivalent_atoms=rep, rotations=rots_p, translations=trans_p,
        primitive_atoms=len(source), symprec_A=info.symprec_A, transformation_matrix=centring.T.copy(),
        origin_shift=np.zeros(3), mapping_to_primitive=np.arange(len(source)),
    )
    return std, prim_info


def standardise(crystal: Crystal, info: SymmetryInfo) -> tuple[StandardPrimitive, SymmetryInfo]:
    """Standardised primitive cell (see `standard_primitive`) and its symmetry, derived from ``info`` alone."""
    return _standardise(crystal, info)


def _from_spglib_cell(cell, like: Crystal) -> Crystal:
    from screener.structure.elements import SYMBOLS

    lat, frac, numbers = cell
    return Crystal(lat, frac, [SYMBOLS[z - 1] for z in numbers], min_distance_A=like.min_distance_A)


def primitive_cell(crystal: Crystal, symprec: float = SYMPREC_A) -> Crystal:
    """Primitive cell (spglib's standardised primitive, which may be rotated with respect to the input)."""
    _check_tolerance(crystal, symprec)
    cell = spglib.standardize_cell(_cell(crystal), to_primitive=True, no_idealize=False, symprec=symprec)
    if cell is None:
        raise SymmetryError(f"the symmetry search found no primitive cell of {crystal.formula} at a tolerance of "
                            f"{symprec:g} Å{_failure_hint(crystal, symprec)}")
    return _from_spglib_cell(cell, crystal)


def standard_cell(crystal: Crystal, symprec: float = SYMPREC_A) -> Crystal:
    """Standardised conventional cell (International Tables setting chosen by spglib)."""
    _check_tolerance(crystal, symprec)
    cell = spglib.standardize_cell(_cell(crystal), to_primitive=False, no_idealize=False, symprec=symprec)
    if cell is None:
        raise SymmetryError(f"the symmetry search could not put {crystal.formula} in its standard setting at a "
                            f"tolerance of {symprec:g} Å{_failure_hint(crystal, symprec)}")
    return _from_spglib_cell(cell, crystal)


