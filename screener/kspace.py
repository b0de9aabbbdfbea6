"""k-space: Monkhorst–Pack meshes, mesh sizes from a k-spacing, band paths through special points.

k-points are fractions of the reciprocal vectors of the cell they belong to (rows of ``Crystal.reciprocal_A``).
"""

from __future__ import annotations

import numpy as np

from .errors import ParameterError
from .structure import Crystal


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


def mesh_from_spacing(crystal: Crystal, kspacing_per_A: float, periodic=(True, True, True)) -> tuple[int, int, int]:
    """Mesh sizes with k-point spacing at most ``kspacing_per_A`` (Å⁻¹, 2π included) along each reciprocal vector.

    Directions marked non-periodic (no hopping crosses the cell boundary) get a single point.
    """
    if not (kspacing_per_A > 0):
        raise ParameterError(f"k-point spacing must be a positive number in 1/Å, got {kspacing_per_A!r}")
    b_len = 2 * np.pi * np.linalg.norm(crystal.reciprocal_A, axis=1)
    n = np.maximum(1, np.ceil(b_len / kspacing_per_A - 1e-9)).astype(int)
    n = np.where(np.asarray(periodic, dtype=bool), n, 1)
    return tuple(int(x) for x in n)


def _check_mesh(mesh) -> tuple[int, int, int]:
    try:
        m = tuple(int(x) for x in mesh)
    except (TypeError, ValueError):
        raise ParameterError(f"k-mesh must be three positive integers, got {mesh!r}") from None
    if len(m) != 3 or min(m) < 1 or any(float(a) != float(b) for a, b in zip(m, mesh, strict=True)):
        raise ParameterError(f"k-mesh must be three positive integers, got {mesh!r}")
    return m
