"""Electrons on a k-mesh: occupations, Fermi level, band energy, density of states.

Two families of Brillouin-zone integration are offered:

* smearing — each eigenvalue is broadened into a Fermi–Dirac, Gaussian or Methfessel–Paxton line
  (Methfessel & Paxton, PRB 40, 3616 (1989)); the free energy F = E − σS is reported too, and for Fermi–Dirac and
  Gaussian the band energy is the σ→0 estimate (E + F)/2 (Gillan, J. Phys.: Condens. Matter 1, 689 (1989));
* the linear tetrahedron method with Blöchl's corrections (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994)),
  on the full Γ-centred grid unfolded from the irreducible wedge.

Energies are in eV, counts are electrons (or states) per cell including the spin degeneracy factor
(2, or 1 when spin–orbit coupling doubles the basis). Eigenvalues are expected ascending along the band axis.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.optimize import brentq
from scipy.special import erfc, eval_hermite, expit, factorial, xlogy

from .errors import ConvergenceError, ParameterError
from .symmetry import IrreducibleMesh

#: Names accepted for ``method``.
SMEARING_METHODS = ("gaussian", "fermi-dirac", "methfessel-paxton")
METHODS = ("tetrahedron",) + SMEARING_METHODS

#: Rows (band × tetrahedron) processed at once; bounds temporary memory to a few tens of MB.
_CHUNK_ROWS = 1 << 18

#: Half-width of the window outside which a smeared line is treated as a step, in units of σ.
#: erfc(12) ≈ 1e-64 and exp(-46) ≈ 1e-20, so cutting there changes nothing at double precision.
_WINDOW_SIGMA = {"gaussian": 12.0, "methfessel-paxton": 12.0, "fermi-dirac": 46.0}


# ============================================================================================== results
@dataclass(frozen=True, eq=False)
class BandEnergyResult:
    """Fermi level, band energy and gap of a tight-binding model integrated over a k-mesh."""

    fermi_level_eV: float
    """Fermi level, eV (mid-gap for an insulator with the tetrahedron method)."""
    band_energy_eV: float
    """Band energy per cell, eV (Σ occupied ε; for Gaussian/Fermi–Dirac smearing the σ→0 estimate (E+F)/2)."""
    free_energy_eV: float
    """Free energy F = E − σS per cell, eV (equal to the band energy for the tetrahedron method)."""
    n_electrons: float
    """Valence electrons per cell that were placed in the bands."""
    gap_eV: float
    """Band gap on the mesh, eV; 0 for a metal, for a fractional band filling, or with no empty band left."""
    method: str
    """Integration method: 'tetrahedron', 'gaussian', 'fermi-dirac' or 'methfessel-paxton'."""
    width_eV: float
    """Smearing width σ, eV (0 for the tetrahedron method)."""
    mesh: tuple[int, int, int]
    """k-mesh sizes along the three reciprocal vectors."""
    n_kpoints_irreducible: int
    """Number of irreducible k-points the eigenvalues were computed at."""
    smeared_energy_eV: float = float("nan")
    """Raw Σ w f ε per cell, eV, before any σ→0 correction (the band energy itself for the tetrahedron method)."""
    spin_degeneracy: int = 2
    """Electrons per orbital state: 2, or 1 when spin–orbit coupling doubles the basis."""
    occupations: np.ndarray | None = None
    """(M, nb) electrons per cell carried by each irreducible state (k-weight × occupation × spin factor);
    Σ occupations·eigenvalues = smeared_energy_eV (tetrahedron: including Blöchl's corrections)."""
    eigenvalues_eV: np.ndarray | None = None
    """(M, nb) eigenvalues at the irreducible k-points, eV, ascending along the band axis."""
    kmesh: IrreducibleMesh | None = None
    """The irreducible mesh used (mapping, weights), so DOS can be computed without re-diagonalising."""


@dataclass(frozen=True, eq=False)
class DOSResult:
    """Density of states on an energy grid, total and (optionally) projected."""

    energies_eV: np.ndarray
    """(ne,) energy grid, eV."""
    dos_per_eV: np.ndarray
    """(ne,) states per eV per cell, both spins (× spin degeneracy)."""
    states_below: np.ndarray
    """(ne,) integrated DOS: states per cell (both spins) below each energy."""
    projected_per_eV: np.ndarray | None
    """(ne, nproj) projected DOS, states per eV per cell, or None when no projections were given."""
    method: str
    """'tetrahedron', 'gaussian', 'fermi-dirac' or 'methfessel-paxton'."""
    width_eV: float
    """Broadening σ, eV (0 for the tetrahedron method)."""
    spin_degeneracy: int
    """Spin factor included in the DOS (2, or 1 with spin–orbit)."""


# ============================================================================================== smearing
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


def _mp_coefficients(order: int) -> np.ndarray:
    """A_n = (−1)^n / (n! 4^n √π), n = 0..order (Methfessel & Paxton, PRB 40, 3616 (1989), eq. 10)."""
    n = np.arange(order + 1)
    return (-1.0) ** n / (factorial(n) * 4.0**n * np.sqrt(np.pi))


def occupation(x, method: str = "gaussian", mp_order: int = 1) -> np.ndarray:
    """Occupation f(x) of a state at x = (ε − μ)/σ (1 deep below μ, 0 far above).

    Fermi–Dirac: 1/(1+eˣ); Gaussian: erfc(x)/2; Methfessel–Paxton of order N:
    erfc(x)/2 + Σ_{n=1..N} A_n H_{2n−1}(x) e^{−x²} (Methfessel & Paxton, PRB 40, 3616 (1989), eq. 11),
    which can leave [0, 1] slightly.
    """
    method = _norm_method(method, SMEARING_METHODS)
    x = np.asarray(x, dtype=float)
    if method == "fermi-dirac":
        return expit(-x)
    f = 0.5 * erfc(x)
    if method == "methfessel-paxton":
        a = _mp_coefficients(mp_order)
        g = np.exp(-x * x)
        for n in range(1, mp_order + 1):  # loop over the (few) expansion orders, not over states
            f = f + a[n] * eval_hermite(2 * n - 1, x) * g
    return f


def delta(x, method: str = "gaussian", mp_order: int = 1) -> np.ndarray:
    """Broadened δ-function −df/dx, per unit x (divide by σ for per eV)."""
    method = _norm_method(method, SMEARING_METHODS)
    x = np.asarray(x, dtype=float)
    if method == "fermi-dirac":
        f = expit(-x)
        return f * (1.0 - f)
    a = _mp_coefficients(mp_order if method == "methfessel-paxton" else 0)
    g = np.exp(-x * x)
    d = a[0] * g
    for n in range(1, len(a)):
        d = d + a[n] * eval_hermite(2 * n, x) * g
    return d


def entropy_term(x, method: str = "gaussian", mp_order: int = 1) -> np.ndarray:
    """Generalised entropy s(x) per state, so that F = E − σ Σ w s (dimensionless, per spin state).

    Fermi–Dirac: −[f ln f + (1−f) ln(1−f)]; Gaussian: e^{−x²}/(2√π); Methfessel–Paxton of order N:
    ½ A_N H_{2N}(x) e^{−x²} (Methfessel & Paxton, PRB 40, 3616 (1989)).
    """
    method = _norm_method(method, SMEARING_METHODS)
    x = np.asarray(x, dtype=float)
    if method == "fermi-dirac":
        f = expit(-x)
        return -(xlogy(f, f) + xlogy(1.0 - f, 1.0 - f))
    n = mp_order if method == "methfessel-paxton" else 0
    a = _mp_coefficients(n)
    return 0.5 * a[n] * eval_hermite(2 * n, x) * np.exp(-x * x)


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
            f"{-drop[k, b]:.3g} eV below band index {b}; sort them (numpy.linalg.eigvalsh returns them sorted)"
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


# ============================================================================================== Fermi level
def _smeared_count(e, w, mu, sigma, method, mp_order, g):
    return g * float(np.sum(w[:, None] * occupation((e - mu) / sigma, method, mp_order)))


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


# ============================================================================================== tetrahedra
# Corner offsets of one grid parallelepiped; corner c has offset bits (c & 1, c >> 1 & 1, c >> 2 & 1).
_CORNER_BITS = np.array([[c & 1, (c >> 1) & 1, (c >> 2) & 1] for c in range(8)])
# The six tetrahedra sharing the main diagonal 0 → (1,1,1): monotone edge paths through the cube, one per
# permutation of the axes (the Freudenthal/Kuhn split; Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), Fig. 2).
_PATHS = np.array([
    [[0, 0, 0], e1, e1 + e2, [1, 1, 1]]
    for e1, e2 in (
        (np.eye(3, dtype=int)[a], np.eye(3, dtype=int)[b])
        for a, b in ((0, 1), (0, 2), (1, 0), (1, 2), (2, 0), (2, 1))
    )
])  # (6, 4, 3)
# Reflections mapping the 0 → 111 diagonal onto each of the four main diagonals.
_FLIPS = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])


def _tetra_offsets(mesh, reciprocal_A) -> np.ndarray:
    """(6, 4, 3) integer corner offsets of the six tetrahedra, split along the shortest main diagonal.

    Directions with a single mesh point are constant (no dispersion is sampled), so their step is taken as
    zero when comparing diagonals; the split then reduces exactly to the lower-dimensional one.
    """
    if reciprocal_A is None:
        flip = _FLIPS[0]
    else:
        rec = np.asarray(reciprocal_A, dtype=float)
        steps = rec / np.asarray(mesh, dtype=float)[:, None]
        steps[np.asarray(mesh) == 1] = 0.0
        signs = 1 - 2 * _FLIPS  # (4, 3)
        lengths = np.linalg.norm(signs @ steps, axis=1)
        # first diagonal within rounding of the shortest, so equal diagonals give a reproducible choice
        flip = _FLIPS[int(np.flatnonzero(lengths <= lengths.min() * (1 + 1e-9) + 1e-300)[0])]
    return np.bitwise_xor(_PATHS, flip[None, None, :])


def _pieces(e, eps):
    """``eps`` broadcast to the rows of sorted corner energies e (n, 4), and the masks of the three partly
    occupied cases ε1 < ε ≤ ε2, ε2 < ε ≤ ε3, ε3 < ε < ε4 (Blöchl, Jepsen & Andersen 1994, App. B)."""
    eps = np.broadcast_to(np.asarray(eps, dtype=float), (len(e),))
    e1, e2, e3, e4 = e.T
    return eps, (e1 < eps) & (eps <= e2), (e2 < eps) & (eps <= e3), (e3 < eps) & (eps < e4)


def _tet_count(e, eps):
    """Occupied fraction of each tetrahedron, rows of sorted corner energies e (n, 4) (Blöchl 1994, App. B)."""
    eps, c1, c2, c3 = _pieces(e, eps)
    out = np.zeros(len(e))
    out[eps >= e[:, 3]] = 1.0
    if c1.any():
        a1, a2, a3, a4 = e[c1].T
        out[c1] = (eps[c1] - a1) ** 3 / ((a2 - a1) * (a3 - a1) * (a4 - a1))
    if c2.any():
        a1, a2, a3, a4 = e[c2].T
        x = eps[c2] - a2
        d21, d31, d41, d32, d42 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2
        out[c2] = (d21**2 + 3 * d21 * x + 3 * x**2 - (d31 + d42) / (d32 * d42) * x**3) / (d31 * d41)
    if c3.any():
        a1, a2, a3, a4 = e[c3].T
        out[c3] = 1.0 - (a4 - eps[c3]) ** 3 / ((a4 - a1) * (a4 - a2) * (a4 - a3))
    return out


def _tet_dos(e, eps):
    """DOS of each tetrahedron per unit of its volume fraction, states/eV (Blöchl 1994, App. C)."""
    eps, c1, c2, c3 = _pieces(e, eps)
    out = np.zeros(len(e))
    if c1.any():
        a1, a2, a3, a4 = e[c1].T
        out[c1] = 3 * (eps[c1] - a1) ** 2 / ((a2 - a1) * (a3 - a1) * (a4 - a1))
    if c2.any():
        a1, a2, a3, a4 = e[c2].T
        x = eps[c2] - a2
        d21, d31, d41, d32, d42 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2
        out[c2] = (3 * d21 + 6 * x - 3 * (d31 + d42) / (d32 * d42) * x**2) / (d31 * d41)
    if c3.any():
        a1, a2, a3, a4 = e[c3].T
        out[c3] = 3 * (a4 - eps[c3]) ** 2 / ((a4 - a1) * (a4 - a2) * (a4 - a3))
    return out


def _tet_weights(e, eps):
    """(n, 4) integration weights of the sorted corners per unit volume fraction, without Blöchl's correction.

    Σ_i w_i is the occupied fraction and Σ_i w_i ε_i the linearly interpolated occupied energy
    (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), Appendix B).
    """
    eps, c1, c2, c3 = _pieces(e, eps)
    w = np.zeros((len(e), 4))
    w[eps >= e[:, 3]] = 0.25
    if c1.any():
        a1, a2, a3, a4 = e[c1].T
        x = eps[c1] - a1
        d21, d31, d41 = a2 - a1, a3 - a1, a4 - a1
        c = 0.25 * x**3 / (d21 * d31 * d41)
        w[c1] = np.stack([c * (4 - x * (1 / d21 + 1 / d31 + 1 / d41)), c * x / d21, c * x / d31, c * x / d41], 1)
    if c2.any():
        a1, a2, a3, a4 = e[c2].T
        d31, d41, d32, d42 = a3 - a1, a4 - a1, a3 - a2, a4 - a2
        x1, x2, y3, y4 = eps[c2] - a1, eps[c2] - a2, a3 - eps[c2], a4 - eps[c2]
        k1 = 0.25 * x1**2 / (d41 * d31)
        k2 = 0.25 * x1 * x2 * y3 / (d41 * d32 * d31)
        k3 = 0.25 * x2**2 * y4 / (d42 * d32 * d41)
        w[c2] = np.stack([
            k1 + (k1 + k2) * y3 / d31 + (k1 + k2 + k3) * y4 / d41,
            k1 + k2 + k3 + (k2 + k3) * y3 / d32 + k3 * y4 / d42,
            (k1 + k2) * x1 / d31 + (k2 + k3) * x2 / d32,
            (k1 + k2 + k3) * x1 / d41 + k3 * x2 / d42,
        ], 1)
    if c3.any():
        a1, a2, a3, a4 = e[c3].T
        y = a4 - eps[c3]
        d41, d42, d43 = a4 - a1, a4 - a2, a4 - a3
        c = 0.25 * y**3 / (d41 * d42 * d43)
        w[c3] = np.stack([0.25 - c * y / d41, 0.25 - c * y / d42, 0.25 - c * y / d43,
                          0.25 - c * (4 - y * (1 / d41 + 1 / d42 + 1 / d43))], 1)
    return w


def _tet_weights_blochl(e, eps, h):
    """``_tet_weights(e, eps)`` plus Blöchl's correction with D_T(ε_F) the mean of ``_tet_dos`` at eps ∓ h."""
    d_f = 0.5 * (_tet_dos(e, eps - h) + _tet_dos(e, eps + h))
    # Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), eq. 22: dw_i = D_T(ε_F)/40 Σ_j (ε_j − ε_i)
    return _tet_weights(e, eps) + d_f[:, None] / 40.0 * (e.sum(1, keepdims=True) - 4 * e)


def _tet_corner_dos(e, eps):
    """(n, 4) DOS carried by each sorted corner per unit volume fraction (sums to ``_tet_dos``).

    The linear interpolant's constant-energy cross-section is a triangle or a quadrilateral; each corner's share
    is the cross-section average of its barycentric coordinate (affine maps keep area ratios, so areas are
    measured in barycentric space).
    """
    n = len(e)
    out = np.zeros((n, 4))
    dos = _tet_dos(e, eps)
    eps, c1, c2, c3 = _pieces(e, eps)
    if c1.any():
        a = e[c1]
        t = (eps[c1][:, None] - a[:, :1]) / (a[:, 1:] - a[:, :1])  # positions along edges 1→2, 1→3, 1→4
        lam = np.concatenate([(3 - t.sum(1, keepdims=True)), t], 1) / 3
        out[c1] = dos[c1, None] * lam
    if c3.any():
        a = e[c3]
        t = (a[:, 3:] - eps[c3][:, None]) / (a[:, 3:] - a[:, :3])  # positions along edges 4→1, 4→2, 4→3
        lam = np.concatenate([t, (3 - t.sum(1, keepdims=True))], 1) / 3
        out[c3] = dos[c3, None] * lam
    if c2.any():
        a = e[c2]
        eye = np.eye(4)

        def point(i, j):  # barycentric coordinates of the crossing on edge i→j
            t = ((eps[c2] - a[:, i]) / (a[:, j] - a[:, i]))[:, None]
            return (1 - t) * eye[i] + t * eye[j]

        p13, p14, p24, p23 = point(0, 2), point(0, 3), point(1, 3), point(1, 2)

        def area(p, q, r):
            u, v = q - p, r - p
            return 0.5 * np.sqrt(np.maximum((u * u).sum(1) * (v * v).sum(1) - (u * v).sum(1) ** 2, 0.0))

        s1, s2 = area(p13, p14, p24), area(p13, p24, p23)
        tot = s1 + s2
        tot = np.where(tot > 0, tot, 1.0)
        lam = (s1[:, None] * (p13 + p14 + p24) + s2[:, None] * (p13 + p24 + p23)) / (3 * tot[:, None])
        # a zero-area cross-section (degenerate corners) carries no DOS anyway; fall back to equal shares
        lam = np.where((s1 + s2)[:, None] > 0, lam, 0.25)
        out[c2] = dos[c2, None] * lam
    return out


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


@lru_cache(maxsize=8)
def _corner_table(mesh: tuple[int, int, int], flip: tuple[int, int, int]) -> np.ndarray:
    """(6N, 4) row-major grid index of every tetrahedron corner; tetrahedron jN + p is path j from point p.

    Depends only on the mesh and the chosen diagonal, so it is kept between calls (read-only).
    """
    offsets = np.bitwise_xor(_PATHS, np.asarray(flip, dtype=int)[None, None, :])  # (6, 4, 3)
    n_full = int(np.prod(mesh))
    base = np.unravel_index(np.arange(n_full), mesh)
    table = np.zeros((6, n_full, 4), dtype=np.int64)
    for axis in range(3):  # three axes, not k-points
        coord = np.mod(base[axis][None, :, None] + offsets[:, None, :, axis], mesh[axis])
        table *= mesh[axis]
        table += coord
    table = table.reshape(-1, 4)
    table.setflags(write=False)
    return table


def _row_extremes(bands: np.ndarray, mesh, flip) -> tuple[np.ndarray, np.ndarray]:
    """Lowest and highest corner energy of every tetrahedron for each band of ``bands`` (nb, N) on the full grid;
    each (nb, T), tetrahedron jN + p.

    All six tetrahedra of a grid cube share the flipped main diagonal, so the grid is padded periodically once,
    each cube corner is a shifted view of it, and the diagonal's extremes are shared by the six.
    """
    nb = bands.shape[0]
    m = tuple(int(x) for x in mesh)
    grid = bands.reshape((nb,) + m)
    pad = np.empty((nb, m[0] + 1, m[1] + 1, m[2] + 1))
    pad[:, :-1, :-1, :-1] = grid
    pad[:, -1, :-1, :-1] = grid[:, 0]
    pad[:, :, -1, :-1] = pad[:, :, 0, :-1]
    pad[:, :, :, -1] = pad[:, :, :, 0]
    f = int(flip[0]) | int(flip[1]) << 1 | int(flip[2]) << 2  # cube-corner number of the diagonal's start

    def corner(c):  # view: energies at cube corner c of every grid point, (nb, m0, m1, m2)
        x, y, z = (int(v) for v in _CORNER_BITS[c])
        return pad[:, x:x + m[0], y:y + m[1], z:z + m[2]]

    dmin = np.minimum(corner(f), corner(7 ^ f))
    dmax = np.maximum(corner(f), corner(7 ^ f))
    row_min = np.empty((nb, 6) + m)
    row_max = np.empty((nb, 6) + m)
    bits = (_PATHS ^ np.asarray(flip)[None, None, :]) @ np.array([1, 2, 4])  # (6, 4) cube-corner numbers
    # each path's second corner is one of three, shared by two paths: fold the diagonal into those once
    with_diag = {int(c1): (np.minimum(corner(c1), dmin), np.maximum(corner(c1), dmax)) for c1 in set(bits[:, 1])}
    for j, (_, c1, c2, _) in enumerate(bits):  # the six tetrahedra of a cube
        np.minimum(with_diag[int(c1)][0], corner(c2), out=row_min[:, j])
        np.maximum(with_diag[int(c1)][1], corner(c2), out=row_max[:, j])
    return row_min.reshape(nb, -1), row_max.reshape(nb, -1)


def _sort4(e: np.ndarray) -> list[np.ndarray]:
    """Columns of the rows of ``e`` (n, 4) sorted ascending (values only; a five-comparator network, which beats
    a per-row argsort by an order of magnitude)."""
    c = [e[:, i] for i in range(4)]
    for i, j in ((0, 1), (2, 3), (0, 2), (1, 3), (1, 2)):
        c[i], c[j] = np.minimum(c[i], c[j]), np.maximum(c[i], c[j])
    return c


def _sort4_stable(e: np.ndarray, corner: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows of ``e`` (n, 4) sorted ascending, ``corner`` permuted alike; tied corners keep their order.

    Odd–even transposition (four rounds of adjacent comparators) swaps only strictly greater neighbours, so the
    result equals ``argsort(kind="stable")`` exactly.
    """
    ec = [e[:, i] for i in range(4)]
    cc = [corner[:, i] for i in range(4)]
    for i in (0, 2, 1, 0, 2, 1):
        j = i + 1
        swap = ec[i] > ec[j]
        ec[i], ec[j] = np.where(swap, ec[j], ec[i]), np.where(swap, ec[i], ec[j])
        cc[i], cc[j] = np.where(swap, cc[j], cc[i]), np.where(swap, cc[i], cc[j])
    return np.stack(ec, 1), np.stack(cc, 1)


class _RowWindow:
    """Sorted corner energies of the rows overlapping a bracket (lo, hi], set up for repeated count and DOS.

    Per row the count is a cubic in ε on each of its three pieces (Blöchl, Jepsen & Andersen, PRB 49, 16223
    (1994), App. B); the piece coefficients are formed once, so each evaluation is a few passes over the rows.
    """

    def __init__(self, cols: list[np.ndarray], below: int):
        self.below = below  # rows wholly at or below the bracket's lower end
        a1, a2, a3, a4 = cols
        with np.errstate(divide="ignore", invalid="ignore"):  # coefficients of pieces a row never enters
            d21, d31, d41, d32, d42, d43 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2, a4 - a3
            q = 1.0 / (d31 * d41)
            self.arrays = [a1, a2, a3, a4, 1.0 / (d21 * d31 * d41), 1.0 / (d41 * d42 * d43),
                           d21 * d21 * q, 3 * d21 * q, 3 * q, (d31 + d42) / (d32 * d42) * q]

    def __len__(self) -> int:
        return len(self.arrays[0])

    def restrict(self, lo: float, hi: float) -> _RowWindow:
        """Drop rows that no longer overlap (lo, hi]; those wholly at or below lo join ``below``."""
        a1, a4 = self.arrays[0], self.arrays[3]
        keep = (a4 > lo) & (a1 <= hi)
        n_keep = int(np.count_nonzero(keep))
        if n_keep > 0.7 * len(self):  # not worth the copies yet
            return self
        new = object.__new__(_RowWindow)
        new.below = self.below + int(np.count_nonzero(a4 <= lo))
        new.arrays = [x[keep] for x in self.arrays]
        return new

    def count_slope(self, eps: float) -> tuple[float, float]:
        """(rows below eps counting partial ones fractionally, d/dε of that), rows per eV."""
        a1, a2, a3, a4, i1, i3, p0, p1, p2, p3 = self.arrays
        # the pieces exclude rows wholly at or below eps (a row whose top corners all sit at eps is one of them)
        inside = a4 > eps
        n = self.below + float(len(a4) - np.count_nonzero(inside))
        s = 0.0
        m = (a1 < eps) & (a2 >= eps) & inside
        if m.any():
            x = eps - a1[m]
            x2i = x * x * i1[m]
            n += float(x2i @ x)
            s += 3.0 * float(x2i.sum())
        m = (a2 < eps) & (a3 >= eps) & inside
        if m.any():
            x = eps - a2[m]
            n += float(np.sum(p0[m] + x * (p1[m] + x * (p2[m] - x * p3[m]))))
            s += float(np.sum(p1[m] + x * (2.0 * p2[m] - 3.0 * x * p3[m])))
        m = (a3 < eps) & inside
        if m.any():
            y = a4[m] - eps
            y2i = y * y * i3[m]
            n += float(np.count_nonzero(m)) - float(y2i @ y)
            s += 3.0 * float(y2i.sum())
        return n, s


class _TetrahedronGrid:
    """Band × tetrahedron rows of the full mesh, ready for repeated integration.

    Row r = b * T + t is band b on tetrahedron t. For every row only its lowest and highest corner energy is
    needed to classify it: at any energy ε almost all rows lie wholly below (count 1, weight ¼ per corner) or
    wholly above (nothing), and only the few straddling ε need their four corners gathered, sorted and put through
    Blöchl's formulas. Whole bands are classified first from their extremes, and the row extremes of a band are
    computed only when it crosses the energies asked about.
    """

    def __init__(self, eigs_ir: np.ndarray, kmesh: IrreducibleMesh, reciprocal_A=None):
        mesh = np.asarray(kmesh.mesh, dtype=int)
        n_full = int(np.prod(mesh))
        nb = eigs_ir.shape[1]
        if len(kmesh.mapping) != n_full or len(kmesh.grid_address) != n_full:
            raise ParameterError(
                f"the tetrahedron method needs the full {tuple(mesh)} grid ({n_full} points), but the k-mesh holds "
                f"{len(kmesh.mapping)}; build it with screener.symmetry.irreducible_mesh"
            )
        if eigs_ir.shape[0] != len(kmesh.ir_index):
            raise ParameterError(
                f"got eigenvalues at {eigs_ir.shape[0]} k-points but the mesh has {len(kmesh.ir_index)} irreducible "
                "points; compute them at kmesh.kfrac"
            )
        addr = np.asarray(kmesh.grid_address, dtype=np.int64)
        if addr.size and addr.min() >= -mesh.min() and addr.max() < mesh.min():  # usual addresses: one wrap
            addr = addr + mesh * (addr < 0)
        else:
            addr = np.mod(addr, mesh)
        flat = (addr[:, 0] * mesh[1] + addr[:, 1]) * mesh[2] + addr[:, 2]
        if np.any(np.bincount(flat, minlength=n_full) != 1):
            raise ParameterError(f"k-mesh grid addresses do not cover the {tuple(mesh)} grid once each")
        # grid point (row-major index) -> irreducible point
        grid_to_ir = np.empty(n_full, dtype=np.int64)
        grid_to_ir[flat] = np.asarray(kmesh.mapping, dtype=np.int64)
        self._flip = tuple(int(x) for x in _tetra_offsets(mesh, reciprocal_A)[0, 0])  # path 0 starts at the flip
        self._mesh = tuple(int(m) for m in mesh)
        table = _corner_table(self._mesh, self._flip)
        identity = len(grid_to_ir) == eigs_ir.shape[0] and np.array_equal(grid_to_ir, np.arange(n_full))
        self._grid_to_ir = None if identity else grid_to_ir
        self.corner_ir = table if identity else grid_to_ir[table]  # (T, 4) irreducible index of each corner
        self.n_tet = len(self.corner_ir)
        self.n_bands = nb
        self.n_ir = eigs_ir.shape[0]
        self.n_rows = self.n_tet * nb
        self.volume = 1.0 / self.n_tet  # volume fraction of one tetrahedron
        self.eigs_ir = eigs_ir
        self._bands = np.ascontiguousarray(eigs_ir.T)  # (nb, M): one band's energies, contiguous
        self.k_count = np.bincount(grid_to_ir, minlength=self.n_ir)  # grid points per irreducible point
        # every irreducible point is the image of some grid point, so band extremes equal row extremes
        self.band_min = self._bands.min(axis=1)
        self.band_max = self._bands.max(axis=1)
        self.emin = float(self.band_min.min())
        self.emax = float(self.band_max.max())
        self._rows_of_band: list = [None] * nb

    # ------------------------------------------------------------------------------------------ row access
    def band_rows(self, b: int) -> tuple[np.ndarray, np.ndarray]:
        """(T,) lowest and (T,) highest corner energy of band ``b`` on every tetrahedron (computed once)."""
        if self._rows_of_band[b] is None:
            self._prepare_rows([b])
        return self._rows_of_band[b]

    def _prepare_rows(self, bands) -> None:
        """Compute the row extremes of those of ``bands`` not done yet, in one pass."""
        todo = [b for b in bands if self._rows_of_band[b] is None]
        if todo:
            e = self._bands[todo] if self._grid_to_ir is None else self._bands[todo][:, self._grid_to_ir]
            rmin, rmax = _row_extremes(e, self._mesh, self._flip)
            for i, b in enumerate(todo):
                self._rows_of_band[b] = (rmin[i], rmax[i])

    @property
    def row_min(self) -> np.ndarray:
        """(T·nb,) lowest corner energy of every row, row b·T + t."""
        self._prepare_rows(range(self.n_bands))
        return np.concatenate([self.band_rows(b)[0] for b in range(self.n_bands)])

    @property
    def row_max(self) -> np.ndarray:
        """(T·nb,) highest corner energy of every row, row b·T + t."""
        return np.concatenate([self.band_rows(b)[1] for b in range(self.n_bands)])

    def _sorted_rows(self, rows: np.ndarray):
        """(n, 4) ascending corner energies of ``rows``, the irreducible point of each sorted slot, the band."""
        band, tet = np.divmod(rows, self.n_tet)
        corner = self.corner_ir[tet]
        e = self.eigs_ir[corner, band[:, None]]
        # stable, so tied corners keep their path order (which corner gets which weight at a tie)
        e, corner = _sort4_stable(e, corner)
        return e, corner, band

    def _window(self, lo: float, hi: float) -> _RowWindow:
        """Rows overlapping (lo, hi], sorted; rows wholly at or below lo are only counted.

        A row starting exactly at hi counts nothing there unless all its corners sit at hi, so it is kept.
        """
        below, parts = 0, []
        cross = [b for b in range(self.n_bands) if self.band_max[b] > lo and self.band_min[b] <= hi]
        self._prepare_rows(cross)
        below = self.n_tet * int(np.count_nonzero(self.band_max <= lo))
        for b in cross:  # loop over bands only
            rmin, rmax = self.band_rows(b)
            tets = np.flatnonzero((rmax > lo) & (rmin <= hi))
            below += int(np.count_nonzero(rmax <= lo))
            parts.append(self._bands[b][self.corner_ir[tets]])
        e = np.concatenate(parts) if parts else np.empty((0, 4))
        return _RowWindow(_sort4(e), below)

    def count(self, eps: float) -> float:
        """States per cell (one spin) below eps."""
        return self.volume * self._window(eps, eps).count_slope(eps)[0]

    # ------------------------------------------------------------------------------------------ Fermi level
    def _sampled_level(self, states: float) -> tuple[float, float]:
        """Rough level holding ``states`` (one spin) when each grid point's levels are counted as steps, and a
        typical energy spread of one tetrahedron near it.

        Only a starting guess for the window search, so a strided subsample of the points is enough, and only
        bands that can hold the level are looked at: a band lies wholly below the level if at least ``states``
        bands start below its top, wholly above if fewer than ``states`` bands end below its bottom.
        """
        nb = self.n_bands
        low = np.sort(self.band_min)[min(max(int(np.ceil(states)) - 1, 0), nb - 1)]
        high = np.sort(self.band_max)[min(int(np.floor(states)), nb - 1)]
        cand = np.flatnonzero((self.band_max > low) & (self.band_min < high))
        if len(cand) == 0:
            return float(0.5 * (low + high)), 0.0
        n_low = int(np.count_nonzero(self.band_max <= low))
        step = max(1, -(-self.n_ir * len(cand) // 20000))
        e = self._bands[cand, ::step].reshape(-1)
        kc = self.k_count[::step]
        frac = min(max((states - n_low) / len(cand), 0.0), 1.0)
        if self._grid_to_ir is None:  # equal weights: a selection, no sort
            i = min(int(frac * len(e)), len(e) - 1)
            level = float(np.partition(e, i)[i])
        else:
            w = np.tile(kc.astype(float), len(cand))
            order = np.argsort(e)
            cum = np.cumsum(w[order])
            i = int(np.searchsorted(cum, frac * cum[-1]))
            level = float(e[order[min(i, len(e) - 1)]])
        # energy change along the (flipped) main diagonal of a grid cube at the sampled points, candidate bands
        m = np.asarray(self._mesh)
        pts = np.arange(0, len(self.k_count) if self._grid_to_ir is None else len(self._grid_to_ir), step)
        idx = np.unravel_index(pts, self._mesh)
        sign = 1 - 2 * np.asarray(self._flip)
        nxt = np.ravel_multi_index(tuple(np.mod(idx[a] + sign[a] * (m[a] > 1), m[a]) for a in range(3)),
                                   self._mesh)
        g2i = self._grid_to_ir
        here, there = (pts, nxt) if g2i is None else (g2i[pts], g2i[nxt])
        spread = float(np.mean(np.abs(self._bands[np.ix_(cand, there)] - self._bands[np.ix_(cand, here)])))
        return level, spread

    def fermi_level(self, n_electrons: float, g: int) -> float:
        if n_electrons <= 0:
            return self.emin
        if n_electrons >= g * self.n_bands:
            return self.emax
        gap, vbm, cbm = _gap(self.eigs_ir, n_electrons, g)
        if gap > 0:
            # the linear-tetrahedron count is exactly flat between the band extremes of the mesh
            return float(0.5 * (vbm + cbm))
        floor, ceil = self.emin - 1e-6, self.emax + 1e-6
        target = n_electrons / (g * self.volume)  # in rows: one row holds one state per spin per tetrahedron
        # the count is 0 at floor and every row at ceil: a bracket to start from
        lo, hi, f_lo, f_hi = floor, ceil, -target, float(self.n_rows) - target
        # Safeguarded Newton on the exact count, whose slope is the tetrahedron DOS from the same rows, started
        # from the grid-point estimate; a step leaving the bracket, or a zero slope, falls back to bisection.
        # Only rows overlapping a window around the iterate are held (the typical energy spread of one
        # tetrahedron sets its starting width); the window is rebuilt, wider, when a step leaves it, and shrinks
        # with the bracket down to about the rows straddling the level itself.
        mu, spread = self._sampled_level(n_electrons / g)
        half = max(0.5 * spread, 1e-6 * (ceil - floor))
        w_lo, w_hi = max(mu - half, lo), min(mu + half, hi)
        win = self._window(w_lo, w_hi)
        last_step = None
        for _ in range(200):
            if not w_lo <= mu <= w_hi:
                half *= 4
                w_lo, w_hi = max(mu - half, lo), min(mu + half, hi)
                win = self._window(w_lo, w_hi)
            f, slope = win.count_slope(mu)
            f -= target
            if f == 0:
                return float(mu)
            if f < 0:
                lo, f_lo = mu, f
            else:
                hi, f_hi = mu, f
            new = mu - f / slope if slope > 0 else lo
            newton = lo < new < hi
            if not newton:
                new = 0.5 * (lo + hi)
            tol = 1e-13 * max(1.0, abs(new))
            if hi - lo <= 2 * tol:
                # the count jumps here (tetrahedra flattened along a single-point mesh direction, all corners
                # equal): take the bracket end whose count is nearer the target, as Brent's method would
                return float(lo if -f_lo <= f_hi else hi)
            step = abs(new - mu)
            if newton and step <= tol:
                return float(new)
            # after two Newton steps in a row the step ratio r bounds what is left after this one by
            # step·r/(1 − r) (Newton converges at least that fast once in reach); if that is below the tolerance,
            # confirming with one more count would not change the answer
            if newton and last_step is not None and step < 0.5 * last_step:
                r = step / last_step
                if step * r / (1 - r) <= 0.1 * tol:
                    return float(new)
            last_step = step if newton else None
            mu = new
            if w_lo <= lo and hi <= w_hi:
                smaller = win.restrict(lo, hi)
                if smaller is not win:
                    win, w_lo, w_hi = smaller, lo, hi
        win = self._window(lo, hi)
        return _solve_count(lambda x: g * self.volume * win.count_slope(x)[0], n_electrons, lo, hi,
                            "the tetrahedron method")

    # ------------------------------------------------------------------------------------------ occupations
    def occupations(self, eps: float, blochl: bool = True) -> np.ndarray:
        """(M, nb) one-spin occupation weights folded onto the irreducible points (Σ = count(eps))."""
        nb, T = self.n_bands, self.n_tet
        # Tetrahedra flattened along a single-point mesh direction have a DOS that jumps at a corner energy, and
        # E_F often sits exactly on one (e.g. at a folded band crossing on an even mesh): take the mean of the
        # two one-sided limits there. Elsewhere D_T is continuous and the mean equals the value.
        h = 1e-9 * max(1.0, self.emax - self.emin)
        # every grid point is a corner of 24 tetrahedra (6 per cube × 4 corners, all translates)
        corner_count = 24.0 * self.k_count
        acc = np.zeros((self.n_ir, nb))
        cross = [b for b in range(nb) if eps - h < self.band_max[b] and self.band_min[b] < eps + h]
        self._prepare_rows(cross)
        for b in np.flatnonzero(self.band_max <= eps - h):  # rows wholly below eps − h: ¼ per corner, no Blöchl
            acc[:, b] = 0.25 * corner_count
        tets = []
        for b in cross:  # loop over bands only; a band is usually wholly full or empty
            rmin, rmax = self.band_rows(b)
            full = rmax <= eps - h
            n_full = int(np.count_nonzero(full))
            if n_full == T:
                acc[:, b] = 0.25 * corner_count
            elif 2 * n_full >= T:
                acc[:, b] = 0.25 * (corner_count - np.bincount(self.corner_ir[~full].ravel(), minlength=self.n_ir))
            elif n_full:
                acc[:, b] = 0.25 * np.bincount(self.corner_ir[full].ravel(), minlength=self.n_ir)
            tets.append(np.flatnonzero(~full & (rmin < eps + h)))
        # the straddling rows of all crossing bands go through the formulas together, in memory-bounded blocks
        sizes = [len(t) for t in tets]
        ends = np.cumsum(sizes, dtype=np.int64)
        tets = np.concatenate(tets) if tets else np.empty(0, dtype=np.int64)
        bands = np.repeat(np.asarray(cross, dtype=np.int64), sizes)
        for s in range(0, len(tets), _CHUNK_ROWS):
            t, band = tets[s:s + _CHUNK_ROWS], bands[s:s + _CHUNK_ROWS]
            corner = self.corner_ir[t]
            e, corner = _sort4_stable(self._bands[band[:, None], corner], corner)
            w = _tet_weights_blochl(e, eps, h) if blochl else _tet_weights(e, eps)
            for b, first, end in zip(cross, ends - sizes, ends):  # bands only: each band's rows are contiguous
                sl = slice(max(first, s) - s, min(end, s + len(t)) - s)
                if sl.stop > sl.start:
                    acc[:, b] += np.bincount(corner[sl].ravel(), weights=w[sl].ravel(), minlength=self.n_ir)
        return self.volume * acc

    # ------------------------------------------------------------------------------------------ DOS
    def dos_on_grid(self, energies: np.ndarray, proj_ir: np.ndarray | None):
        """(ne,) one-spin DOS, (ne,) count and (ne, nproj) projected DOS on an energy grid."""
        energies = np.asarray(energies, dtype=float)
        ne = len(energies)
        order_e = np.argsort(energies)
        es = energies[order_e]
        nproj = 0 if proj_ir is None else proj_ir.shape[2]
        pdos = np.zeros((ne, nproj))
        # a row counts fully at energies ≥ its top corner; energies strictly inside (e1, e4) are evaluated as
        # (row, energy) pairs, processed in blocks of bounded pair count so memory stays bounded
        lo = np.searchsorted(es, self.row_min, side="right")
        hi = np.searchsorted(es, self.row_max, side="left")
        below = np.bincount(hi, minlength=ne + 1)[:ne].cumsum().astype(float)
        dos = np.zeros(ne)
        active = np.flatnonzero(hi > lo)
        for sub, eidx in _pair_blocks(lo[active], hi[active]):
            # pairs come ordered by row: sort each block's rows once, then spread them over their pairs
            first = int(sub[0])
            e_blk, corner_blk, band_blk = self._sorted_rows(active[first:int(sub[-1]) + 1])
            loc = sub - first
            er, x = e_blk[loc], es[eidx]
            below += np.bincount(eidx, weights=_tet_count(er, x), minlength=ne)
            if nproj:
                cw = _tet_corner_dos(er, x)  # (p, 4)
                dos += np.bincount(eidx, weights=cw.sum(1), minlength=ne)
                contrib = np.einsum("pc,pcj->pj", cw, proj_ir[corner_blk[loc], band_blk[loc][:, None], :])
                for j in range(nproj):  # loop over projection channels only
                    pdos[:, j] += np.bincount(eidx, weights=contrib[:, j], minlength=ne)
            else:
                dos += np.bincount(eidx, weights=_tet_dos(er, x), minlength=ne)
        inv = np.empty(ne, dtype=int)
        inv[order_e] = np.arange(ne)
        v = self.volume
        return v * dos[inv], v * below[inv], v * pdos[inv]


# ============================================================================================== integration
def integrate(eigs_ir_eV, kmesh: IrreducibleMesh, n_electrons, *, method="tetrahedron", width_eV=0.05,
              spin_degeneracy=2, reciprocal_A=None, mp_order: int = 1, blochl: bool = True) -> BandEnergyResult:
    """Fermi level and band energy from eigenvalues at the irreducible points of ``kmesh``.

    Parameters
    ----------
    eigs_ir_eV : (M, nb) eigenvalues at ``kmesh.kfrac``, eV, ascending along the band axis.
    kmesh : the irreducible mesh (weights; mapping and grid addresses for the tetrahedron method).
    n_electrons : electrons per cell, 0 … spin_degeneracy × nb.
    method : 'tetrahedron' (default), 'gaussian', 'fermi-dirac' or 'methfessel-paxton'.
    width_eV : smearing width σ, eV (ignored by the tetrahedron method).
    spin_degeneracy : 2, or 1 when spin–orbit coupling doubles the basis.
    reciprocal_A : (3, 3) reciprocal vectors as rows (no 2π); picks the shortest main diagonal for the tetrahedra.
        Without it the (0,0,0)→(1,1,1) diagonal is used.
    mp_order : order N of the Methfessel–Paxton expansion (default 1).
    blochl : apply Blöchl's correction to the tetrahedron weights (default True).
    """
    method = _norm_method(method)
    g = _check_spin(spin_degeneracy)
    width = _check_width(width_eV, method)
    if int(mp_order) != mp_order or mp_order < 0:
        raise ParameterError(f"mp_order must be a non-negative integer (1 is usual), got {mp_order!r}")
    e = _check_eigs(eigs_ir_eV, kmesh.weights)
    n = _check_n_electrons(n_electrons, e.shape[1], g)
    w = np.asarray(kmesh.weights, dtype=float)
    gap, _, _ = _gap(e, n, g)
    common = dict(n_electrons=n, gap_eV=gap, method=method, mesh=tuple(int(m) for m in kmesh.mesh),
                  n_kpoints_irreducible=int(e.shape[0]), spin_degeneracy=g, eigenvalues_eV=e, kmesh=kmesh)
    if method == "tetrahedron":
        grid = _TetrahedronGrid(e, kmesh, reciprocal_A)
        mu = grid.fermi_level(n, g)
        if n >= g * e.shape[1]:
            occ = g * np.broadcast_to(w[:, None], e.shape).copy()
        elif n <= 0:
            occ = np.zeros_like(e)
        else:
            occ = g * grid.occupations(mu, blochl=blochl)
        energy = float(np.sum(occ * e))
        return BandEnergyResult(fermi_level_eV=mu, band_energy_eV=energy, free_energy_eV=energy, width_eV=0.0,
                                smeared_energy_eV=energy, occupations=occ, **common)
    mu = _smeared_fermi_level(e, w, n, method, width, g, mp_order)
    if n >= g * e.shape[1]:
        f, s = np.ones_like(e), np.zeros_like(e)
    elif n <= 0:
        f, s = np.zeros_like(e), np.zeros_like(e)
    else:
        x = (e - mu) / width
        f, s = occupation(x, method, mp_order), entropy_term(x, method, mp_order)
    occ = g * w[:, None] * f
    energy = float(np.sum(occ * e))
    free = energy - width * g * float(np.sum(w[:, None] * s))
    # Fermi–Dirac and Gaussian: E(σ) and F(σ) deviate from E(0) by equal and opposite O(σ²) terms, so their mean
    # is the σ→0 estimate (Gillan, J. Phys.: Condens. Matter 1, 689 (1989)). Methfessel–Paxton's E is already
    # accurate to high order in σ (Methfessel & Paxton, PRB 40, 3616 (1989)).
    e0 = energy if method == "methfessel-paxton" else 0.5 * (energy + free)
    return BandEnergyResult(fermi_level_eV=mu, band_energy_eV=e0, free_energy_eV=free, width_eV=width,
                            smeared_energy_eV=energy, occupations=occ, **common)


def solve_on_mesh(model, mesh=None, *, kspacing_per_A=0.15, method="tetrahedron", width_eV=0.05,
                  use_symmetry=True, symprec=1e-3, mp_order: int = 1, blochl: bool = True) -> BandEnergyResult:
    """Band energy of a tight-binding model in one call: mesh → irreducible wedge → eigenvalues → integration.

    ``mesh`` defaults to ``kspace.mesh_from_spacing(model.crystal, kspacing_per_A, model.periodic)``; a given
    mesh is forced to 1 along directions the model marks non-periodic. Symmetry reduction uses
    ``symmetry.irreducible_mesh``; the tetrahedra are split along the crystal's shortest reciprocal diagonal.
    """
    from .kspace import _check_mesh, mesh_from_spacing
    from .symmetry import irreducible_mesh

    method = _norm_method(method)
    periodic = tuple(bool(p) for p in getattr(model, "periodic", (True, True, True)))
    if mesh is None:
        mesh = mesh_from_spacing(model.crystal, kspacing_per_A, periodic)
    else:
        mesh = tuple(m if p else 1 for m, p in zip(_check_mesh(mesh), periodic, strict=True))
    kmesh = irreducible_mesh(model.crystal, mesh, symprec=symprec, use_symmetry=use_symmetry)
    eigs = np.asarray(model.eigenvalues(kmesh.kfrac))
    return integrate(eigs, kmesh, model.n_electrons, method=method, width_eV=width_eV,
                     spin_degeneracy=model.spin_degeneracy, reciprocal_A=model.crystal.reciprocal_A,
                     mp_order=mp_order, blochl=blochl)


# ============================================================================================== DOS
def density_of_states(eigs_ir_eV, kmesh: IrreducibleMesh, energies_eV, *, method="gaussian", width_eV=0.05,
                      weights_projected=None, spin_degeneracy=2, reciprocal_A=None,
                      mp_order: int = 1) -> DOSResult:
    """Total and projected density of states (states per eV per cell, both spins) on an energy grid.

    ``weights_projected`` (M, nb, nproj) holds |ψ|² weights of each irreducible state on each projection
    (orbital, site, …). With a symmetry-reduced mesh a projection must be invariant under the point group
    (e.g. summed over an l-shell and over symmetry-equivalent sites); otherwise pass a mesh built with
    ``use_symmetry=False``.
    """
    method = _norm_method(method)
    g = _check_spin(spin_degeneracy)
    width = _check_width(width_eV, method)
    e = _check_eigs(eigs_ir_eV, kmesh.weights)
    en = np.asarray(energies_eV, dtype=float).reshape(-1)
    if en.size == 0 or not np.all(np.isfinite(en)):
        raise ParameterError("energies_eV must be a non-empty array of finite energies in eV")
    proj = None
    if weights_projected is not None:
        proj = np.asarray(weights_projected, dtype=float)
        if proj.ndim == 2:
            proj = proj[:, :, None]
        if proj.ndim != 3 or proj.shape[:2] != e.shape:
            raise ParameterError(
                f"weights_projected must have shape (n_kpoints, n_bands, n_proj) = ({e.shape[0]}, {e.shape[1]}, …), "
                f"got {np.shape(weights_projected)}"
            )
    if method == "tetrahedron":
        grid = _TetrahedronGrid(e, kmesh, reciprocal_A)
        dos, below, pdos = grid.dos_on_grid(en, proj)
        width = 0.0
    else:
        dos, below, pdos = _smeared_dos(e, np.asarray(kmesh.weights, dtype=float), en, method, width, mp_order,
                                        proj)
    return DOSResult(energies_eV=en, dos_per_eV=g * dos, states_below=g * below,
                     projected_per_eV=None if proj is None else g * pdos, method=method, width_eV=width,
                     spin_degeneracy=g)


def _smeared_dos(e, w, energies, method, sigma, mp_order, proj):
    """One-spin smeared DOS, count and projected DOS; each line evaluated only inside its window."""
    ne = len(energies)
    order_e = np.argsort(energies)
    es = energies[order_e]
    states = e.reshape(-1)
    sw = np.repeat(w, e.shape[1])
    pr = None if proj is None else proj.reshape(-1, proj.shape[2])
    half = _WINDOW_SIGMA[method] * sigma
    dos = np.zeros(ne)
    below = np.zeros(ne)
    pdos = np.zeros((ne, 0 if pr is None else pr.shape[1]))
    lo = np.searchsorted(es, states - half, side="left")
    hi = np.searchsorted(es, states + half, side="right")
    # beyond its window a line has become a step: it counts fully from there on
    below += np.bincount(hi, weights=sw, minlength=ne + 1)[:ne].cumsum()
    for rows, eidx in _pair_blocks(lo, hi):
        x = (states[rows] - es[eidx]) / sigma
        d = sw[rows] * delta(x, method, mp_order) / sigma
        dos += np.bincount(eidx, weights=d, minlength=ne)
        below += np.bincount(eidx, weights=sw[rows] * occupation(x, method, mp_order), minlength=ne)
        if pr is not None:
            prow = pr[rows]
            for j in range(pr.shape[1]):  # loop over projection channels only
                pdos[:, j] += np.bincount(eidx, weights=d * prow[:, j], minlength=ne)
    inv = np.empty(ne, dtype=int)
    inv[order_e] = np.arange(ne)
    return dos[inv], below[inv], pdos[inv]
