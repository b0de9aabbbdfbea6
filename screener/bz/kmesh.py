"""k-meshes: Monkhorst–Pack points, mesh sizes from a k-step, irreducible wedge by symmetry.

k-points are fractions of the reciprocal vectors of the cell they belong to (rows of ``Crystal.reciprocal_A``).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np
import spglib

from screener.errors import ParameterError, SymmetryError
from screener.structure.crystal import Crystal
from screener.structure.symmetry import SYMPREC_A, _cell


def monkhorst_pack(mesh, shift=(0, 0, 0)) -> np.ndarray:
    """(N, 3) points of a Monkhorst–Pack mesh (Monkhorst & Pack, PRB 13, 5188 (1976)), Γ-centred when unshifted.

    ``shift`` holds 0 or 1 per direction; 1 displaces that direction by half a mesh step. Points are wrapped
    into (-1/2, 1/2].
    """
    mesh = _check_mesh(mesh)
    shift = np.asarray(shift, dtype=float)
    axes = [(np.arange(n) + 0.5 * s) / n for n, s in zip(mesh, shift, strict=True)]
    k = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    return k - np.ceil(k - 0.5)


def mesh_from_spacing(crystal: Crystal, k_step_per_A: float, periodic=(True, True, True)) -> tuple[int, int, int]:
    """Mesh sizes with k-point spacing at most ``k_step_per_A`` (Å⁻¹, 2π included) along each reciprocal vector.

    Directions marked non-periodic (no hopping crosses the cell boundary) get a single point.
    """
    if not (k_step_per_A > 0):
        raise ParameterError(f"k_step_per_A (largest step between k-points) must be a positive number in 1/Å, "
                             f"got {k_step_per_A!r}")
    b_len = 2 * np.pi * np.linalg.norm(crystal.reciprocal_A, axis=1)
    n = np.maximum(1, np.ceil(b_len / k_step_per_A - 1e-9)).astype(int)
    n = np.where(np.asarray(periodic, dtype=bool), n, 1)
    return tuple(int(x) for x in n)


#: Largest (orbitals in the cell) × (points of the full k-mesh) a calculation may ask for (common practice, no
#: source). Memory of the eigenvalues, the symmetry reduction and the tetrahedra grows with this product: near the
#: limit one mesh of a 1-atom sp³ cell (62³ points × 4 orbitals) took about 300 MB and 2 s on a 2-core machine.
#: The time also grows with orbitals³ per k-point, so a large cell is slower at the same product.
MAX_ORBITAL_KPOINTS = 1_000_000
#: Largest eigensolver work per mesh, (orbitals)³ × k-points: one complex Hermitian diagonalisation takes about
#: 1-2 ns × n³ on one core (measured on this project's machines: 0.9 ns at n = 512, 2 ns at n = 64), so 1e11 is
#: about two minutes for one mesh — beyond a screen's budget (common practice, no source).
MAX_DIAGONALISATION_WORK = 1e11


def orbital_kpoints(mesh, n_orbitals: int) -> int:
    """(orbitals in the cell) × (points of the full ``mesh``), the size that `check_mesh_size` limits."""
    return int(n_orbitals) * int(np.prod([int(m) for m in mesh], dtype=object))


def check_mesh_size(mesh, n_orbitals: int, what: str = "the cell") -> None:
    """Refuse, before any work, a k-mesh whose points times the cell's orbitals exceed MAX_ORBITAL_KPOINTS.

    ``what`` names the structure the mesh belongs to in the one-line message (e.g. "the parent").
    """
    size = orbital_kpoints(mesh, n_orbitals)
    if size > MAX_ORBITAL_KPOINTS:
        points = int(np.prod([int(m) for m in mesh], dtype=object))
        raise ParameterError(
            f"the {'×'.join(str(int(m)) for m in mesh)} k-mesh of {what} ({points:.3g} points) × {int(n_orbitals)} "
            f"orbitals = {size:.3g}, more than the limit of {MAX_ORBITAL_KPOINTS:.0e} (orbitals × k-points); "
            "use a coarser --k-step or a smaller cell"
        )
    points = int(np.prod([int(m) for m in mesh], dtype=object))
    check_diagonalisation_work(points, n_orbitals, f"the {'×'.join(str(int(m)) for m in mesh)} k-mesh of {what}")


def check_diagonalisation_work(n_kpoints: int, n_orbitals: int, what: str) -> None:
    """Refuse, before any work, n_kpoints diagonalisations of n_orbitals² matrices beyond MAX_DIAGONALISATION_WORK."""
    work = float(n_orbitals) ** 3 * float(n_kpoints)
    if work > MAX_DIAGONALISATION_WORK:
        raise ParameterError(
            f"{what} needs {int(n_kpoints)} diagonalisations of {int(n_orbitals)}-orbital matrices ({work:.2g} × n³ "
            f"work, limit {MAX_DIAGONALISATION_WORK:.0e}, minutes to hours): use a smaller cell (its primitive "
            "cell, or fewer atoms) or a coarser --k-step"
        )


def _check_mesh(mesh) -> tuple[int, int, int]:
    try:
        m = tuple(int(x) for x in mesh)
    except (TypeError, ValueError):
        raise ParameterError(f"k-mesh must be three positive integers, got {mesh!r}") from None
    if len(m) != 3 or min(m) < 1 or any(float(a) != float(b) for a, b in zip(m, mesh, strict=True)):
        raise ParameterError(f"k-mesh must be three positive integers, got {mesh!r}")
    return m


# ================================================================================================ irreducible wedge

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


class RecentItems:
    """The last few items built (most recently used last), found by a test on each; a lock guards the list when
    items are built in threads. Serves the irreducible meshes here and the tetrahedron tables of each mesh."""

    def __init__(self, size: int):
        self._items: list = []
        self._size = int(size)
        self._lock = threading.Lock()

    def find(self, match):
        """The most recent item for which ``match(item)`` is true (marked as just used), or None."""
        with self._lock:
            for i, item in enumerate(self._items):
                if match(item):
                    self._items.append(self._items.pop(i))
                    return item
        return None

    def add(self, item):
        """Keep ``item`` as the most recent one, dropping the oldest beyond the size; returns it."""
        with self._lock:
            self._items.append(item)
            del self._items[:-self._size]
        return item

    def clear(self) -> None:
        with self._lock:
            self._items.clear()


#: Irreducible meshes of the last few (mesh, shift, symmetry) keys: a screen reduces one mesh by one point group for
#: many models, and the reduction (spglib, the grouping of the map) costs more than a small integration. The key
#: holds the exact bytes of what the reduction depends on (the rotations, or the cell and tolerance searched), so a
#: hit returns the mesh the same call would build. The arrays of a cached mesh are read-only.
_MESH_CACHE = RecentItems(8)


def irreducible_mesh(crystal: Crystal, mesh, shift=(0, 0, 0), symprec: float = SYMPREC_A,
                     use_symmetry: bool = True, rotations=None) -> IrreducibleMesh:
    """Irreducible wedge of a Monkhorst–Pack mesh with weights (spglib ``get_ir_reciprocal_mesh``).

    ``rotations`` ((n, 3, 3) int, fractional, of ``crystal``) reuses a symmetry analysis already made: the mesh is
    then reduced by those rotations (spglib ``get_stabilized_reciprocal_mesh``) without a new symmetry search.
    The result's arrays are read-only: an equal request returns the same object from a small cache.
    """
    mesh = tuple(int(m) for m in mesh)
    shift = tuple(int(s) for s in shift)
    if len(mesh) != 3 or min(mesh) < 1:
        raise SymmetryError(f"k-mesh must be three positive integers, got {mesh}")
    rots = None
    if use_symmetry and rotations is not None:
        rots = np.unique(np.asarray(rotations, dtype="intc").reshape(-1, 3, 3), axis=0)
        key = ("rotations", mesh, shift, rots.shape, rots.tobytes())
    elif use_symmetry:
        lat, frac, numbers = _cell(crystal)
        lat, frac, numbers = (np.ascontiguousarray(x, dtype=t) for x, t in ((lat, float), (frac, float),
                                                                             (numbers, np.int64)))
        key = ("cell", mesh, shift, float(symprec), lat.tobytes(), frac.shape, frac.tobytes(), numbers.tobytes())
    else:
        key = ("full", mesh, shift)
    hit = _MESH_CACHE.find(lambda item: item[0] == key)
    if hit is not None:
        return hit[1]
    return _MESH_CACHE.add((key, _reduce_mesh(crystal, mesh, shift, symprec, use_symmetry, rots)))[1]


def _reduce_mesh(crystal: Crystal, mesh: tuple, shift: tuple, symprec: float, use_symmetry: bool,
                 rots) -> IrreducibleMesh:
    """`irreducible_mesh` without the cache; ``rots`` the distinct rotations given, or None."""
    if use_symmetry and rots is not None:
        full_map, grid = spglib.get_stabilized_reciprocal_mesh(mesh, rots, is_shift=shift, is_time_reversal=True)
    elif use_symmetry:
        res = spglib.get_ir_reciprocal_mesh(mesh, _cell(crystal), is_shift=shift, is_time_reversal=True,
                                            symprec=symprec)
        if res is None:
            raise SymmetryError(f"the symmetry search could not reduce the {mesh} k-mesh of {crystal.formula} at a "
                                f"tolerance of {symprec:g} Å; atoms closer together than the tolerance cause this, "
                                "so try a smaller --symprec")
        full_map, grid = res
    else:
        grid = np.stack(np.meshgrid(*(np.arange(m) for m in mesh), indexing="ij"), -1).reshape(-1, 3)
        grid = np.where(grid > np.array(mesh) // 2, grid - np.array(mesh), grid)
        full_map = np.arange(len(grid))
    full_map = np.asarray(full_map).reshape(-1)
    grid = np.asarray(grid)
    kfull = (grid + 0.5 * np.asarray(shift)) / np.asarray(mesh, dtype=float)
    # the map names a mesh point (index < N) for every point: group by counting, as np.unique would by sorting
    # (same ascending representatives, inverse and counts)
    if full_map.size and 0 <= full_map.min() and full_map.max() < len(full_map):
        counts_all = np.bincount(full_map, minlength=len(full_map))
        ir_index = np.flatnonzero(counts_all).astype(full_map.dtype, copy=False)
        counts = counts_all[ir_index]
        slot = np.zeros(len(full_map), dtype=np.intp)
        slot[ir_index] = np.arange(len(ir_index))
        inverse = slot[full_map]
    else:
        ir_index, inverse, counts = np.unique(full_map, return_inverse=True, return_counts=True)
    out = IrreducibleMesh(
        mesh=mesh,
        shift=shift,
        kfrac_full=kfull,
        grid_address=grid,
        mapping=inverse.reshape(-1),
        ir_index=ir_index,
        kfrac=kfull[ir_index],
        weights=counts / counts.sum(),
    )
    for a in (out.kfrac_full, out.grid_address, out.mapping, out.ir_index, out.kfrac, out.weights):
        a.setflags(write=False)
    return out
