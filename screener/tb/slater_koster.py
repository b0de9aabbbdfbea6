"""Two-centre Slater–Koster matrix elements for s, p and d orbitals, vectorised over bonds.

Convention (Slater & Koster, Phys. Rev. 94, 1498 (1954)): ``E_ab(l, m, n) = <a on atom A | H | b on atom B>``
where ``(l, m, n)`` are the direction cosines of the vector from A to B. Real orbitals, in this order and
spelling: ``s, px, py, pz, dxy, dyz, dzx, dx2-y2, dz2`` (``dz2`` is the 3z²−r² orbital).

Parameter names (eV): ``ss_sigma, sp_sigma, ps_sigma, pp_sigma, pp_pi, sd_sigma, ds_sigma, pd_sigma, pd_pi,
dp_sigma, dp_pi, dd_sigma, dd_pi, dd_delta``. The first letter names the orbital on A (the first atom of the
bond), the second the orbital on B; every mixed parameter is given in the same sign convention as its usual
form, so ``sp_sigma`` > 0 for s on A and p on B bonding in the usual way, and ``ps_sigma`` is *the sp_sigma of the
reversed pair* (p on A, s on B). Hence ``E_{x,s}(l) = -l · ps_sigma``. Missing reversed parameters default to the
forward ones (``ps_sigma`` ← ``sp_sigma``, ``ds_sigma`` ← ``sd_sigma``, ``dp_*`` ← ``pd_*``), which is exact for
like atoms; any other missing parameter is 0.

Implementation: rather than typing Table I entry by entry, each orbital is written as a tensor (s: scalar, p: unit
vector, d: symmetric traceless 3×3 tensor with the normalisation of the real harmonics) and decomposed into its
σ, π, δ parts about the bond axis. The tests check the result against the closed forms of Table I.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from screener.errors import ParameterError

#: Expanded orbital names in their fixed order.
ORBITALS: tuple[str, ...] = ("s", "px", "py", "pz", "dxy", "dyz", "dzx", "dx2-y2", "dz2")
#: Angular momentum of each orbital.
ORBITAL_L: dict[str, int] = {"s": 0, "px": 1, "py": 1, "pz": 1, "dxy": 2, "dyz": 2, "dzx": 2, "dx2-y2": 2, "dz2": 2}
#: Shell name → its orbitals.
SHELLS: dict[str, tuple[str, ...]] = {"s": ("s",), "p": ORBITALS[1:4], "d": ORBITALS[4:9]}

#: Every Slater–Koster parameter name accepted.
SK_PARAMETERS: tuple[str, ...] = (
    "ss_sigma", "sp_sigma", "ps_sigma", "pp_sigma", "pp_pi",
    "sd_sigma", "ds_sigma", "pd_sigma", "pd_pi", "dp_sigma", "dp_pi",
    "dd_sigma", "dd_pi", "dd_delta",
)
#: Reversed-pair partner of each parameter (A↔B swapped).
_REVERSED = {
    "ss_sigma": "ss_sigma", "sp_sigma": "ps_sigma", "ps_sigma": "sp_sigma", "pp_sigma": "pp_sigma",
    "pp_pi": "pp_pi", "sd_sigma": "ds_sigma", "ds_sigma": "sd_sigma", "pd_sigma": "dp_sigma",
    "dp_sigma": "pd_sigma", "pd_pi": "dp_pi", "dp_pi": "pd_pi", "dd_sigma": "dd_sigma", "dd_pi": "dd_pi",
    "dd_delta": "dd_delta",
}

_S3 = np.sqrt(3.0)


def _d_tensors() -> np.ndarray:
    """(5, 3, 3) tensors T with d(r) = rᵀ T r for dxy, dyz, dzx, dx2-y2, dz2 (each with T:T = 3/2)."""
    t = np.zeros((5, 3, 3))
    t[0, 0, 1] = t[0, 1, 0] = _S3 / 2  # √3 xy
    t[1, 1, 2] = t[1, 2, 1] = _S3 / 2  # √3 yz
    t[2, 2, 0] = t[2, 0, 2] = _S3 / 2  # √3 zx
    t[3, 0, 0], t[3, 1, 1] = _S3 / 2, -_S3 / 2  # (√3/2)(x² − y²)
    t[4] = np.diag([-0.5, -0.5, 1.0])  # (3z² − r²)/2
    return t


D_TENSORS = _d_tensors()
D_TENSORS.setflags(write=False)


def expand_orbitals(spec) -> tuple[str, ...]:
    """Expand an orbital specification ("sp", ["s", "p"], ["pz"], "spd", ...) into ordered orbital names.

    Raises ParameterError on unknown or repeated names.
    """
    tokens = [spec] if isinstance(spec, str) else list(spec)
    names: list[str] = []
    for tok in tokens:
        if not isinstance(tok, str):
            raise ParameterError(f"orbital names must be strings, got {tok!r}; use e.g. 's', 'p', 'pz', 'd'")
        t = tok.strip()
        if t in ORBITAL_L:
            names.append(t)
        elif t and all(c in SHELLS for c in t) and len(set(t)) == len(t):
            for c in t:
                names.extend(SHELLS[c])
        else:
            raise ParameterError(
                f"unknown orbital {tok!r}; allowed: shells s, p, d (or combinations such as 'sp', 'spd') "
                f"and single orbitals {', '.join(ORBITALS)}"
            )
    if len(set(names)) != len(names):
        raise ParameterError(f"orbital list {spec!r} names some orbital twice (expanded: {names})")
    return tuple(sorted(names, key=ORBITALS.index))


def complete_parameters(V: Mapping[str, object], n: int | None = None) -> dict[str, np.ndarray]:
    """All SK parameters as arrays: missing reversed ones copy the forward ones, everything else missing is 0."""
    unknown = set(V) - set(SK_PARAMETERS)
    if unknown:
        raise ParameterError(
            f"unknown Slater-Koster parameter(s) {sorted(unknown)}; allowed: {', '.join(SK_PARAMETERS)}"
        )
    arrays = {k: np.asarray(v, dtype=float) for k, v in V.items()}
    shape = np.broadcast_shapes(*(a.shape for a in arrays.values())) if arrays else ()
    if n is not None:
        shape = np.broadcast_shapes(shape, (n,))
    out = {}
    for k in SK_PARAMETERS:
        if k in arrays:
            out[k] = np.broadcast_to(arrays[k], shape)
        elif _REVERSED[k] in arrays and k in ("ps_sigma", "ds_sigma", "dp_sigma", "dp_pi"):
            out[k] = np.broadcast_to(arrays[_REVERSED[k]], shape)
        else:
            out[k] = np.zeros(shape)
    return out


def reverse_parameters(V: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Parameters of the same bond seen from B to A (sp ↔ ps, sd ↔ ds, pd ↔ dp)."""
    full = complete_parameters(V)
    return {k: full[_REVERSED[k]] for k in SK_PARAMETERS}


def full_block(direction, V: Mapping[str, object]) -> np.ndarray:
    """(p, 9, 9) two-centre blocks over all nine orbitals for bonds along ``direction`` (p, 3).

    ``direction`` need not be normalised; ``V`` maps parameter names to scalars or (p,) arrays (eV).
    """
    d = np.asarray(direction, dtype=float)
    if d.ndim == 1:
        d = d[None, :]
    norm = np.linalg.norm(d, axis=1)
    if d.shape[-1] != 3 or np.any(norm == 0):
        raise ParameterError(f"bond directions must be non-zero 3-vectors, got shape {d.shape}")
    u = d / norm[:, None]
    p = len(u)
    P = complete_parameters(V, p)
    E = np.zeros((p, 9, 9))
    eye3 = np.eye(3)

    # σ/π/δ projections of each orbital about the bond axis
    c_d = np.einsum("pa,dab,pb->pd", u, D_TENSORS, u)  # σ weight of each d orbital, (p, 5)
    Tn = np.einsum("dab,pb->pda", D_TENSORS, u)  # (p, 5, 3)
    # π part of d orbital β paired with p_i: (2/√3)[(T n)_i − n_i (nᵀ T n)]
    pi_pd = (2 / _S3) * (Tn - u[:, None, :] * c_d[:, :, None])  # (p, 5, 3)
    # π projector between d orbitals: (4/3)[(T_α n)·(T_β n) − c_α c_β]
    cc = c_d[:, :, None] * c_d[:, None, :]
    pi_dd = (4 / 3) * (np.einsum("pai,pbi->pab", Tn, Tn) - cc)
    delta_dd = np.eye(5)[None] - cc - pi_dd

    def v(name):
        return P[name][:, None, None]

    uu = u[:, :, None] * u[:, None, :]
    E[:, 0, 0] = P["ss_sigma"]
    E[:, 0, 1:4] = u * P["sp_sigma"][:, None]
    # odd total parity: swapping which atom carries the p orbital flips the sign
    E[:, 1:4, 0] = -u * P["ps_sigma"][:, None]
    E[:, 1:4, 1:4] = uu * v("pp_sigma") + (eye3 - uu) * v("pp_pi")
    E[:, 0, 4:9] = c_d * P["sd_sigma"][:, None]
    E[:, 4:9, 0] = c_d * P["ds_sigma"][:, None]
    # p on A, d on B
    E[:, 1:4, 4:9] = (u[:, :, None] * c_d[:, None, :]) * v("pd_sigma") + np.swapaxes(pi_pd, 1, 2) * v("pd_pi")
    # d on A, p on B: same form with the dp parameters, sign flipped (odd parity)
    E[:, 4:9, 1:4] = -((c_d[:, :, None] * u[:, None, :]) * v("dp_sigma") + pi_pd * v("dp_pi"))
    E[:, 4:9, 4:9] = cc * v("dd_sigma") + pi_dd * v("dd_pi") + delta_dd * v("dd_delta")
    return E


def orbital_indices(orbitals) -> np.ndarray:
    """Positions of the given expanded orbital names within ORBITALS."""
    try:
        return np.array([ORBITALS.index(o) for o in orbitals], dtype=int)
    except ValueError:
        raise ParameterError(f"unknown orbital in {list(orbitals)}; allowed: {', '.join(ORBITALS)}") from None


def sk_block(direction, orbitals_a, orbitals_b, V: Mapping[str, object]) -> np.ndarray:
    """(p, len(orbitals_a), len(orbitals_b)) Slater–Koster blocks for bonds from A to B along ``direction``."""
    ia, ib = orbital_indices(orbitals_a), orbital_indices(orbitals_b)
    return full_block(direction, V)[:, ia[:, None], ib[None, :]]


# ------------------------------------------------------------------------------------------- rotations / L
def _levi_civita() -> np.ndarray:
    e = np.zeros((3, 3, 3))
    e[0, 1, 2] = e[1, 2, 0] = e[2, 0, 1] = 1.0
    e[0, 2, 1] = e[2, 1, 0] = e[1, 0, 2] = -1.0
    return e


_EPS = _levi_civita()


def angular_momentum_matrices() -> np.ndarray:
    """(3, 9, 9) complex matrices of L_x, L_y, L_z (ħ = 1) in the real orbital basis ORBITALS.

    Built from L = −i r × ∇ acting on the orbital tensors, so the sign convention matches the orbitals here.
    """
    L = np.zeros((3, 9, 9), dtype=complex)
    for k in range(3):
        E = _EPS[k]  # (E_k)_ab = ε_kab
        # p: L_k p_j = −i ε_kaj r_a  →  <p_i|L_k|p_j> = −i ε_kij
        L[k, 1:4, 1:4] = -1j * E
        # d: L_k (rᵀTr) = −2i rᵀ E_k T r  → tensor −i (E_k T − T E_k); overlap <A,B> = A:B / (3/2)
        new = -1j * (np.einsum("ab,dbc->dac", E, D_TENSORS) - np.einsum("dab,bc->dac", D_TENSORS, E))
        L[k, 4:9, 4:9] = np.einsum("aij,bij->ab", D_TENSORS, new) / 1.5
    return L


def orbital_rotation(R) -> np.ndarray:
    """(9, 9) matrix D with φ_a(Rᵀ r) = Σ_b φ_b(r) D[b, a] for an orthogonal ``R`` (3×3, proper or improper).

    Two-centre blocks then obey E(R n) = D E(n) Dᵀ (restricted to the orbitals present).
    """
    R = np.asarray(R, dtype=float)
    D = np.zeros((9, 9))
    D[0, 0] = 1.0
    # p_i(Rᵀ r) = (Rᵀ r)_i = Σ_j R_ji r_j  → D[j, i] = R[j, i]
    D[1:4, 1:4] = R
    # d: T → R T Rᵀ, expanded back on the d tensors
    rot = np.einsum("ab,dbc,ec->dae", R, D_TENSORS, R)
    D[4:9, 4:9] = np.einsum("bij,aij->ba", D_TENSORS, rot) / 1.5
    return D
