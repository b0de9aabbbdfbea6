"""Fermi level: bracketed root of the electron count (smearing) or the tetrahedron grid's Newton solve."""

from __future__ import annotations

import numpy as np

from screener.bz.common import (
    _WINDOW_SIGMA,
    _check_eigs,
    _check_n_electrons,
    _check_spin,
    _check_width,
    _gap,
    _norm_method,
    _solve_count,
)
from screener.bz.kmesh import IrreducibleMesh
from screener.bz.smearing import _smeared_count
from screener.bz.tetra_grid import _TetrahedronGrid
from screener.errors import ParameterError


def find_fermi_level(eigs_eV, weights, n_electrons, method="gaussian", width_eV=0.05, spin_degeneracy=2, *,
                     mp_order: int = 1, kmesh: IrreducibleMesh | None = None, reciprocal_A=None) -> float:
    """Fermi level (eV) that places ``n_electrons`` per cell in bands ``eigs_eV`` (n_k, nb) with k-weights.

    Smearing methods bracket the level between the band extremes (widened by the smearing window) and solve
    the electron count with Brent's method. ``method="tetrahedron"`` needs ``kmesh`` (the weights are then
    taken from it). An insulator with integer filling gets the level at mid-gap when the count is flat there.
    """
    method = _norm_method(method)
    g = _check_spin(spin_degeneracy)
    width = _check_width(width_eV, method)
    if method == "tetrahedron":
        if kmesh is None:
            raise ParameterError(
                "find_fermi_level(method='tetrahedron') needs the k-mesh (kmesh=IrreducibleMesh) to build the "
                "tetrahedra; pass it, or use a smearing method"
            )
        e = _check_eigs(eigs_eV, kmesh.weights)
        n = _check_n_electrons(n_electrons, e.shape[1], g)
        return _TetrahedronGrid(e, kmesh, reciprocal_A).fermi_level(n, g)
    e = _check_eigs(eigs_eV, weights)
    w = np.asarray(weights, dtype=float)
    n = _check_n_electrons(n_electrons, e.shape[1], g)
    return _smeared_fermi_level(e, w, n, method, width, g, mp_order)


def _smeared_fermi_level(e, w, n, method, sigma, g, mp_order) -> float:
    cap = g * e.shape[1] * float(w.sum())
    emin, emax = float(e.min()), float(e.max())
    if n <= 0:
        return emin
    if n >= cap:
        return emax
    pad = _WINDOW_SIGMA[method] * sigma + 1e-6
    mu = _solve_count(lambda m: _smeared_count(e, w, m, sigma, method, mp_order, g), n, emin - pad, emax + pad,
                      f"{method} smearing (σ = {sigma} eV)")
    gap, vbm, cbm = _gap(e, n, g)
    if gap > 0 and vbm < mu < cbm:
        mid = 0.5 * (vbm + cbm)
        # in a wide gap the count is flat to machine precision: any root is as good, pick the reproducible one
        if abs(_smeared_count(e, w, mid, sigma, method, mp_order, g) - n) <= 1e-10 * max(1.0, n):
            mu = mid
    return float(mu)


