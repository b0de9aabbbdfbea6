"""Bare susceptibility χ0(q) of a model's bands (Lindhard form) from eigenvectors on one Γ-centred mesh.

    χ0(q) = −g/N_k Σ_k Σ_{n,m} (f_nk − f_m,k+q)/(ε_nk − ε_m,k+q) · W_nm(k, q),

with W = |<m,k+q|n,k>|² (orbital overlap factors, lattice gauge) or W = 1 (the constant-matrix-element form),
and the limit −df/dε for degenerate pairs (Lindhard, Kgl. Danske Vid. Selsk. Mat.-fys. Medd. 28, 8 (1954)).
States per eV per cell, both spins; k + q must lie on the same mesh.
"""

from __future__ import annotations

import numpy as np

from screener.errors import ParameterError

_DEGENERATE_EV = 1e-7


def grid_shift(mesh, q_frac) -> np.ndarray:
    """Integer grid shift of q on ``mesh``; ParameterError when q is not on it."""
    shift = np.asarray(q_frac, dtype=float) * np.asarray(mesh)
    if np.max(np.abs(shift - np.round(shift))) > 1e-6:
        raise ParameterError(f"q = {np.asarray(q_frac).tolist()} is not on the {tuple(mesh)} k-mesh: every mesh "
                             "size must be a multiple of the denominator of q's component along it")
    return np.round(shift).astype(int)


def shifted_index(mesh, shift) -> np.ndarray:
    """(nk,) index of k + shift for every k of a row-major Γ-centred grid (index = (a·m1 + b)·m2 + c)."""
    m = np.asarray(mesh)
    addr = np.stack(np.meshgrid(*(np.arange(n) for n in mesh), indexing="ij"), -1).reshape(-1, 3)
    new = np.mod(addr + np.asarray(shift), m)
    return (new[:, 0] * m[1] + new[:, 1]) * m[2] + new[:, 2]


def pair_factor(e1, e2, f1, f2, d1, d2) -> np.ndarray:
    """(f1 − f2)/(e1 − e2), with the mean df/dε of both ends where the energies (nearly) coincide."""
    de = e1 - e2
    close = np.abs(de) < _DEGENERATE_EV
    return np.where(close, 0.5 * (d1 + d2), (f1 - f2) / np.where(close, 1.0, de))


def lindhard(mesh, energies_eV, vectors, occupations, dfde_per_eV, q_frac, *, overlaps: bool = True,
             spin_degeneracy: int = 2) -> float:
    """χ0(q) in states/eV per cell from (nk, nb) energies, (nk, norb, nb) eigenvectors and occupations on ``mesh``."""
    kq = shifted_index(mesh, grid_shift(mesh, q_frac))
    e = np.asarray(energies_eV)
    fac = pair_factor(e[:, None, :], e[kq][:, :, None], occupations[:, None, :], occupations[kq][:, :, None],
                      dfde_per_eV[:, None, :], dfde_per_eV[kq][:, :, None])  # (nk, m, n)
    if overlaps:
        w = np.abs(np.einsum("kxm,kxn->kmn", np.conj(vectors[kq]), vectors)) ** 2
        total = np.sum(fac * w)
    else:
        total = np.sum(fac)
    return float(-spin_degeneracy * total / len(e))
