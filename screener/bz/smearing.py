"""Smearing: Fermi–Dirac, Gaussian and Methfessel–Paxton occupations, smeared counts and DOS.

Methfessel & Paxton, PRB 40, 3616 (1989); Gillan, J. Phys.: Condens. Matter 1, 689 (1989).
"""

from __future__ import annotations

import numpy as np
from scipy.special import erfc, eval_hermite, expit, factorial, xlogy

from screener.bz.common import (
    _WINDOW_SIGMA,
    SMEARING_METHODS,
    _norm_method,
    _pair_blocks,
)


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



def _smeared_count(e, w, mu, sigma, method, mp_order, g):
    return g * float(np.sum(w[:, None] * occupation((e - mu) / sigma, method, mp_order)))




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
