"""Two-centre Slater–Koster blocks against Slater & Koster, Phys. Rev. 94, 1498 (1954), Table I."""

import numpy as np
import pytest
from hypothesis import given, seed, settings
from hypothesis import strategies as st

from screener.errors import ParameterError
from screener.tb.slater_koster import (
    ORBITALS,
    SK_PARAMETERS,
    angular_momentum_matrices,
    expand_orbitals,
    full_block,
    orbital_rotation,
    reverse_parameters,
    sk_block,
)

S3 = np.sqrt(3.0)
IDX = {o: k for k, o in enumerate(ORBITALS)}


def _params(rng):
    return {k: float(rng.normal()) for k in SK_PARAMETERS}


def _direction(rng):
    n = rng.normal(size=3)
    return n / np.linalg.norm(n)


def test_table_one_closed_forms_at_generic_direction():
    rng = np.random.default_rng(7)
    V = _params(rng)
    n = _direction(rng)
    l, m, nz = n
    E = full_block(n, V)[0]
    a = l * l + m * m
    # Slater & Koster, Phys. Rev. 94, 1498 (1954), Table I (entries below, others by cyclic permutation)
    expected = {
        ("s", "s"): V["ss_sigma"],
        ("s", "px"): l * V["sp_sigma"],
        ("px", "px"): l * l * V["pp_sigma"] + (1 - l * l) * V["pp_pi"],
        ("px", "py"): l * m * V["pp_sigma"] - l * m * V["pp_pi"],
        ("px", "pz"): l * nz * V["pp_sigma"] - l * nz * V["pp_pi"],
        ("s", "dxy"): S3 * l * m * V["sd_sigma"],
        ("s", "dx2-y2"): S3 / 2 * (l * l - m * m) * V["sd_sigma"],
        ("s", "dz2"): (nz * nz - a / 2) * V["sd_sigma"],
        ("px", "dxy"): S3 * l * l * m * V["pd_sigma"] + m * (1 - 2 * l * l) * V["pd_pi"],
        ("px", "dyz"): S3 * l * m * nz * V["pd_sigma"] - 2 * l * m * nz * V["pd_pi"],
        ("px", "dzx"): S3 * l * l * nz * V["pd_sigma"] + nz * (1 - 2 * l * l) * V["pd_pi"],
        ("px", "dx2-y2"): S3 / 2 * l * (l * l - m * m) * V["pd_sigma"] + l * (1 - l * l + m * m) * V["pd_pi"],
        ("py", "dx2-y2"): S3 / 2 * m * (l * l - m * m) * V["pd_sigma"] - m * (1 + l * l - m * m) * V["pd_pi"],
        ("pz", "dx2-y2"): S3 / 2 * nz * (l * l - m * m) * V["pd_sigma"] - nz * (l * l - m * m) * V["pd_pi"],
        ("px", "dz2"): l * (nz * nz - a / 2) * V["pd_sigma"] - S3 * l * nz * nz * V["pd_pi"],
        ("pz", "dz2"): nz * (nz * nz - a / 2) * V["pd_sigma"] + S3 * nz * a * V["pd_pi"],
        ("dxy", "dxy"): 3 * l * l * m * m * V["dd_sigma"] + (a - 4 * l * l * m * m) * V["dd_pi"]
        + (nz * nz + l * l * m * m) * V["dd_delta"],
        ("dxy", "dyz"): 3 * l * m * m * nz * V["dd_sigma"] + l * nz * (1 - 4 * m * m) * V["dd_pi"]
        + l * nz * (m * m - 1) * V["dd_delta"],
        ("dxy", "dx2-y2"): 1.5 * l * m * (l * l - m * m) * V["dd_sigma"] + 2 * l * m * (m * m - l * l) * V["dd_pi"]
        + 0.5 * l * m * (l * l - m * m) * V["dd_delta"],
        ("dx2-y2", "dx2-y2"): 0.75 * (l * l - m * m) ** 2 * V["dd_sigma"] + (a - (l * l - m * m) ** 2) * V["dd_pi"]
        + (nz * nz + 0.25 * (l * l - m * m) ** 2) * V["dd_delta"],
        ("dx2-y2", "dz2"): S3 / 2 * (l * l - m * m) * (nz * nz - a / 2) * V["dd_sigma"]
        + S3 * nz * nz * (m * m - l * l) * V["dd_pi"] + S3 / 4 * (1 + nz * nz) * (l * l - m * m) * V["dd_delta"],
        ("dz2", "dz2"): (nz * nz - a / 2) ** 2 * V["dd_sigma"] + 3 * nz * nz * a * V["dd_pi"]
        + 0.75 * a * a * V["dd_delta"],
    }
    for (oa, ob), value in expected.items():
        assert E[IDX[oa], IDX[ob]] == pytest.approx(value, abs=1e-12), (oa, ob)


def test_d_blocks_along_z_are_the_bare_parameters():
    V = {"dd_sigma": -1.3, "dd_pi": 0.7, "dd_delta": -0.2, "pd_sigma": 0.9, "pd_pi": -0.45, "sd_sigma": 0.33}
    E = full_block([0, 0, 2.5], V)[0]
    # bond along z: σ, π, δ pairs are the canonical ones (Slater & Koster 1954, Table I with l = m = 0, n = 1)
    assert E[IDX["dz2"], IDX["dz2"]] == pytest.approx(-1.3)
    assert E[IDX["dzx"], IDX["dzx"]] == pytest.approx(0.7)
    assert E[IDX["dyz"], IDX["dyz"]] == pytest.approx(0.7)
    assert E[IDX["dxy"], IDX["dxy"]] == pytest.approx(-0.2)
    assert E[IDX["dx2-y2"], IDX["dx2-y2"]] == pytest.approx(-0.2)
    assert E[IDX["pz"], IDX["dz2"]] == pytest.approx(0.9)
    assert E[IDX["px"], IDX["dzx"]] == pytest.approx(-0.45)
    assert E[IDX["s"], IDX["dz2"]] == pytest.approx(0.33)
    # nothing else couples the d shells along the axis (common practice, no source: symmetry about the axis)
    dd = E[4:, 4:]
    assert np.count_nonzero(np.abs(dd) > 1e-12) == 5


def test_reversed_pair_uses_ps_sigma_with_flipped_sign():
    n = np.array([0.6, 0.0, 0.8])
    E = full_block(n, {"sp_sigma": 1.5, "ps_sigma": 0.4})[0]
    # Slater & Koster 1954: E_{x,s}(l,m,n) = -l V(p on A, s on B) (odd total parity)
    assert E[IDX["s"], IDX["px"]] == pytest.approx(0.6 * 1.5)
    assert E[IDX["px"], IDX["s"]] == pytest.approx(-0.6 * 0.4)
    # ps_sigma defaults to sp_sigma (like atoms)
    E2 = full_block(n, {"sp_sigma": 1.5})[0]
    assert E2[IDX["pz"], IDX["s"]] == pytest.approx(-0.8 * 1.5)


def test_bond_seen_from_the_other_end_is_the_transpose():
    rng = np.random.default_rng(3)
    V = _params(rng)
    n = rng.normal(size=(4, 3))
    # hermiticity of the two-centre integral: <a_A|H|b_B> = <b_B|H|a_A>, the latter along −n with A, B swapped
    forward = full_block(n, V)
    backward = full_block(-n, reverse_parameters(V))
    assert np.allclose(forward, np.swapaxes(backward, 1, 2), atol=1e-13)


@seed(20240611)
@settings(max_examples=25, deadline=None)
@given(
    st.lists(st.floats(-3, 3, allow_nan=False), min_size=9, max_size=9),
    st.booleans(),
)
def test_blocks_rotate_with_the_orbitals(entries, improper):
    rng = np.random.default_rng(abs(hash(tuple(entries))) % 2**32)
    q, r = np.linalg.qr(np.reshape(entries, (3, 3)) + 4 * np.eye(3))
    R = q * np.sign(np.diag(r))
    if np.linalg.det(R) < 0:
        R[:, 0] *= -1
    if improper:
        R = -R
    V = _params(rng)
    n = _direction(rng)
    D = orbital_rotation(R)
    # rotating the bond rotates the orbitals: E(Rn) = D E(n) D^T (common practice, no source)
    assert np.allclose(full_block(R @ n, V)[0], D @ full_block(n, V)[0] @ D.T, atol=1e-10)
    assert np.allclose(D @ D.T, np.eye(9), atol=1e-12)


def test_sk_block_selects_orbitals_and_vectorises():
    rng = np.random.default_rng(5)
    dirs = rng.normal(size=(6, 3))
    V = {"ss_sigma": rng.normal(size=6), "pp_sigma": 2.0, "pp_pi": -0.5, "sp_sigma": 1.1}
    blk = sk_block(dirs, ("s", "pz"), ("px", "py", "pz"), V)
    assert blk.shape == (6, 2, 3)
    full = full_block(dirs, V)
    assert np.allclose(blk, full[:, [0, 3]][:, :, [1, 2, 3]])


def test_angular_momentum_algebra():
    L = angular_momentum_matrices()
    # [L_x, L_y] = i L_z and L^2 = l(l+1) on each shell (textbook angular momentum, ħ = 1)
    assert np.allclose(L[0] @ L[1] - L[1] @ L[0], 1j * L[2])
    L2 = sum(x @ x for x in L)
    assert np.allclose(L2, np.diag([0, 2, 2, 2, 6, 6, 6, 6, 6]))


def test_expand_orbitals_and_errors():
    assert expand_orbitals("sp") == ("s", "px", "py", "pz")
    assert expand_orbitals(["p", "s"]) == ("s", "px", "py", "pz")
    assert expand_orbitals(["pz"]) == ("pz",)
    assert len(expand_orbitals("spd")) == 9
    with pytest.raises(ParameterError, match="unknown orbital 'f'"):
        expand_orbitals(["s", "f"])
    with pytest.raises(ParameterError, match="names some orbital twice"):
        expand_orbitals(["p", "pz"])
    with pytest.raises(ParameterError, match="unknown Slater-Koster parameter"):
        full_block([0, 0, 1], {"pp_sigmaa": 1.0})
