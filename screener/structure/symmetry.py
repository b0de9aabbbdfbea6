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


def _cell(crystal: Crystal):
    return (crystal.lattice_A, crystal.frac, [ATOMIC_NUMBER[s] for s in crystal.species])


def dataset(crystal: Crystal, symprec: float = SYMPREC_A):
    """spglib's symmetry dataset of ``crystal``; SymmetryError if spglib finds none."""
    if not (symprec > 0):
        raise SymmetryError(f"symprec must be a positive length in Å, got {symprec!r}")
    ds = spglib.get_symmetry_dataset(_cell(crystal), symprec=symprec)
    if ds is None:
        raise SymmetryError(
            f"spglib could not find the symmetry of {crystal.formula} at symprec={symprec} Å: "
            f"{spglib.get_error_message()}; try a larger --symprec"
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


def analyse(crystal: Crystal, symprec: float = SYMPREC_A) -> SymmetryInfo:
    """Space group, Wyckoff letters and operations of ``crystal``."""
    ds = dataset(crystal, symprec)
    prim = spglib.find_primitive(_cell(crystal), symprec=symprec)
    n_prim = len(prim[1]) if prim is not None else crystal.n_atoms
    return SymmetryInfo(
        symbol=str(ds.international),
        number=int(ds.number),
        wyckoff=tuple(str(w) for w in ds.wyckoffs),
        equivalent_atoms=np.asarray(ds.equivalent_atoms, dtype=int),
        rotations=np.asarray(ds.rotations, dtype=int),
        translations=np.asarray(ds.translations, dtype=float),
        primitive_atoms=int(n_prim),
        symprec_A=float(symprec),
    )


def _from_spglib_cell(cell, like: Crystal) -> Crystal:
    from screener.structure.elements import SYMBOLS

    lat, frac, numbers = cell
    return Crystal(lat, frac, [SYMBOLS[z - 1] for z in numbers], min_distance_A=like.min_distance_A)


def primitive_cell(crystal: Crystal, symprec: float = SYMPREC_A) -> Crystal:
    """Primitive cell (spglib's standardised primitive, which may be rotated with respect to the input)."""
    cell = spglib.standardize_cell(_cell(crystal), to_primitive=True, no_idealize=False, symprec=symprec)
    if cell is None:
        raise SymmetryError(f"spglib could not find a primitive cell of {crystal.formula} at symprec={symprec} Å")
    return _from_spglib_cell(cell, crystal)


def standard_cell(crystal: Crystal, symprec: float = SYMPREC_A) -> Crystal:
    """Standardised conventional cell (International Tables setting chosen by spglib)."""
    cell = spglib.standardize_cell(_cell(crystal), to_primitive=False, no_idealize=False, symprec=symprec)
    if cell is None:
        raise SymmetryError(f"spglib could not standardise {crystal.formula} at symprec={symprec} Å")
    return _from_spglib_cell(cell, crystal)


