"""Symmetry through spglib: space group, Wyckoff letters, primitive/standard cells, irreducible k-meshes."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import spglib

from .elements import ATOMIC_NUMBER
from .errors import SymmetryError
from .structure import Crystal

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
    from .elements import SYMBOLS

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


@dataclass(frozen=True)
class IrreducibleMesh:
    """A Monkhorst–Pack mesh reduced by the crystal's point group (plus time reversal)."""

    mesh: tuple[int, int, int]
    """Mesh sizes along the three reciprocal vectors."""
    shift: tuple[int, int, int]
    """0 or 1 per direction: 1 shifts the mesh by half a mesh step (spglib convention)."""
    kfrac_full: np.ndarray
    """(N, 3) float, every mesh point, fractions of the reciprocal vectors, in spglib's grid order."""
    grid_address: np.ndarray
    """(N, 3) int, spglib grid addresses of the full mesh."""
    mapping: np.ndarray
    """(N,) int, index into ``ir_index`` order: full point k maps to irreducible point ``mapping[k]``."""
    ir_index: np.ndarray
    """(M,) int, full-mesh indices of the irreducible points."""
    kfrac: np.ndarray
    """(M, 3) float, irreducible points, fractions of the reciprocal vectors."""
    weights: np.ndarray
    """(M,) float, weights summing to 1."""


def irreducible_mesh(crystal: Crystal, mesh, shift=(0, 0, 0), symprec: float = SYMPREC_A,
                     use_symmetry: bool = True) -> IrreducibleMesh:
    """Irreducible wedge of a Monkhorst–Pack mesh with weights (spglib ``get_ir_reciprocal_mesh``)."""
    mesh = tuple(int(m) for m in mesh)
    shift = tuple(int(s) for s in shift)
    if len(mesh) != 3 or min(mesh) < 1:
        raise SymmetryError(f"k-mesh must be three positive integers, got {mesh}")
    if use_symmetry:
        res = spglib.get_ir_reciprocal_mesh(mesh, _cell(crystal), is_shift=shift, is_time_reversal=True,
                                            symprec=symprec)
        if res is None:
            raise SymmetryError(f"spglib could not reduce the {mesh} mesh of {crystal.formula}")
        full_map, grid = res
    else:
        grid = np.stack(np.meshgrid(*(np.arange(m) for m in mesh), indexing="ij"), -1).reshape(-1, 3)
        grid = np.where(grid > np.array(mesh) // 2, grid - np.array(mesh), grid)
        full_map = np.arange(len(grid))
    full_map = np.asarray(full_map)
    grid = np.asarray(grid)
    kfull = (grid + 0.5 * np.asarray(shift)) / np.asarray(mesh, dtype=float)
    ir_index, inverse, counts = np.unique(full_map, return_inverse=True, return_counts=True)
    return IrreducibleMesh(
        mesh=mesh,
        shift=shift,
        kfrac_full=kfull,
        grid_address=grid,
        mapping=inverse.reshape(-1),
        ir_index=ir_index,
        kfrac=kfull[ir_index],
        weights=counts / counts.sum(),
    )
