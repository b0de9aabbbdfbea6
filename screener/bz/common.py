"""Shared pieces of Brillouin-zone integration: method names, input checks, band gap, pair blocks."""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

from screener.errors import ConvergenceError, ParameterError

#: Names accepted for ``method``.
SMEARING_METHODS = ("gaussian", "fermi-dirac", "methfessel-paxton")
METHODS = ("tetrahedron",) + SMEARING_METHODS

#: Rows (band × tetrahedron) processed at once; bounds temporary memory to a few tens of MB.
_CHUNK_ROWS = 1 << 18

#: Half-width of the window outside which a smeared line is treated as a step, in units of σ.
#: erfc(12) ≈ 1e-64 and exp(-46) ≈ 1e-20, so cutting there changes nothing at double precision.
_WINDOW_SIGMA = {"gaussian": 12.0, "methfessel-paxton": 12.0, "fermi-dirac": 46.0}


def _norm_method(method, allowed=METHODS) -> str:
    m = str(method).strip().lower().replace("_", "-").replace(" ", "-")
    if m not in allowed:
        raise ParameterError(
            f"unknown Brillouin-zone integration method {method!r}; allowed: {', '.join(allowed)}"
        )
    return m


def _check_width(width_eV, method: str) -> float:
    w = float(width_eV)
    if method != "tetrahedron" and not (np.isfinite(w) and w > 0):
        raise ParameterError(
            f"smearing width width_eV must be a positive number of eV for method {method!r}, got {width_eV!r}; "
            "typical values are 0.01–0.2 eV"
        )
    return w


def _check_spin(spin_degeneracy) -> int:
    if spin_degeneracy not in (1, 2):
        raise ParameterError(
            f"spin_degeneracy must be 2 (spin-degenerate bands) or 1 (spin–orbit basis), got {spin_degeneracy!r}"
        )
    return int(spin_degeneracy)



# ============================================================================================== checks
def _check_eigs(eigs_eV, weights=None) -> np.ndarray:
    e = np.asarray(eigs_eV, dtype=float)
    if e.ndim == 1:
        e = e[:, None]
    if e.ndim != 2 or e.size == 0:
        raise ParameterError(
            f"eigenvalues must be a non-empty (n_kpoints, n_bands) array, got shape {np.shape(eigs_eV)}"
        )
    e_lo, e_hi = float(e.min()), float(e.max())  # NaN or ±inf anywhere shows in the extremes
    if not (np.isfinite(e_lo) and np.isfinite(e_hi)):
        raise ParameterError("eigenvalues contain NaN or infinite values; check the Hamiltonian parameters")
    drop = np.diff(e, axis=1)
    if drop.size and drop.min() < -1e-9 * max(1.0, -e_lo, e_hi):
        k, b = np.unravel_index(int(np.argmin(drop)), drop.shape)
        raise ParameterError(
            f"eigenvalues must ascend along the band axis, but at k-point index {k} band index {b + 1} lies "
            f"{-drop[k, b]:.3g} eV below band index {b}; sort each k-point's energies in ascending order"
        )
    if weights is not None and np.shape(weights) != (e.shape[0],):
        raise ParameterError(
            f"got {np.shape(weights)} k-point weights for {e.shape[0]} k-points; give one weight per k-point"
        )
    return e


def _check_n_electrons(n_electrons, n_bands: int, spin_degeneracy: int) -> float:
    cap = spin_degeneracy * n_bands
    n = float(n_electrons)
    if not (np.isfinite(n) and -1e-9 <= n <= cap + 1e-9 * max(1.0, cap)):
        raise ParameterError(
            f"n_electrons = {n_electrons!r} is outside the allowed range 0 … {cap} "
            f"({spin_degeneracy} × {n_bands} bands); check the valence electron counts or the orbital basis"
        )
    return min(max(n, 0.0), float(cap))


def _filled_bands(n_electrons: float, spin_degeneracy: int) -> int | None:
    """Number of completely filled bands when the filling is (close to) integer, else None."""
    q = n_electrons / spin_degeneracy
    nq = round(q)
    return int(nq) if abs(q - nq) < 1e-6 else None


def _gap(e: np.ndarray, n_electrons: float, spin_degeneracy: int) -> tuple[float, float, float]:
    """(gap, valence-band top, conduction-band bottom) over the mesh; gap 0 (and NaNs) when not applicable."""
    nf = _filled_bands(n_electrons, spin_degeneracy)
    if nf is None or nf <= 0 or nf >= e.shape[1]:
        return 0.0, np.nan, np.nan
    vbm = float(e[:, nf - 1].max())
    cbm = float(e[:, nf].min())
    gap = cbm - vbm
    # below this the "gap" is rounding at a band crossing (common practice, no source)
    if gap <= 1e-9 * max(1.0, float(e.max() - e.min())):
        return 0.0, np.nan, np.nan
    return gap, vbm, cbm



def _pair_blocks(lo: np.ndarray, hi: np.ndarray, max_pairs: int = 4 * _CHUNK_ROWS):
    """Yield (rows, energy indices) for every pair row r, lo[r] ≤ index < hi[r], in blocks of ≲ max_pairs pairs.

    A line or tetrahedron touches only the energies inside its own range; enumerating those pairs costs
    memory proportional to their number, so they are produced in bounded blocks.
    """
    cnt = np.maximum(hi - lo, 0)
    ends = np.cumsum(cnt)
    start = 0
    while start < len(cnt):  # loop over memory-bounded blocks, not over states
        done = int(ends[start - 1]) if start else 0
        stop = max(start + 1, int(np.searchsorted(ends, done + max_pairs, side="right")))
        c = cnt[start:stop]
        n_pairs = int(c.sum())
        if n_pairs:
            rows = np.repeat(np.arange(start, stop), c)
            first = np.repeat(lo[start:stop] - np.concatenate([[0], np.cumsum(c)[:-1]]), c)
            yield rows, first + np.arange(n_pairs)
        start = stop


def _solve_count(count, n_target, lo, hi, what):
    """Root of count(μ) = n_target on [lo, hi] by Brent's method."""
    f_lo, f_hi = count(lo) - n_target, count(hi) - n_target
    # counts summed in a different order can differ in the last digits: a bracket end within rounding is a root
    rounding = 1e-9 * max(1.0, abs(n_target))
    if abs(f_lo) <= rounding:
        return lo
    if abs(f_hi) <= rounding:
        return hi
    if f_lo > 0 or f_hi < 0:
        raise ConvergenceError(
            f"could not bracket the Fermi level for {what}: electron count {f_lo + n_target:.6g} at {lo:.4f} eV "
            f"and {f_hi + n_target:.6g} at {hi:.4f} eV for a target of {n_target:.6g}"
        )
    if f_lo == 0:
        return lo
    if f_hi == 0:
        return hi
    try:
        return float(brentq(lambda m: count(m) - n_target, lo, hi, xtol=1e-12, rtol=4 * np.finfo(float).eps,
                            maxiter=500))
    except (RuntimeError, ValueError) as exc:
        raise ConvergenceError(f"Fermi level search for {what} did not converge: {exc}") from exc
