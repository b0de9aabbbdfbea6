"""Each bond's share of the band energy (bond-resolved Hamilton population)."""

from pathlib import Path

import numpy as np
import pytest

from screener import read_structure
from screener.bz.integrate import solve_on_mesh
from screener.structure.crystal import Crystal
from screener.tb.bond_energy import bond_energies
from screener.tb.model import build_model
from screener.tb.param_file import load_parameters

# Su, Schrieffer & Heeger, PRB 22, 2099 (1980): polyacetylene chain parameters (t0 = 2.5 eV at 1.22 A)
CHAIN_TOML = (Path(__file__).parents[1] / "data" / "params" / "ssh_polyacetylene.toml").read_text()


def chain_model(tmp_path, u_A=0.0):
    p = tmp_path / "chain.toml"
    p.write_text(CHAIN_TOML)
    params = load_parameters(p, ["C"])
    # two sites per cell along x, 10 A of vacuum across; u = dimerisation (bond lengths a ± 2u)
    a = 1.22
    c = Crystal(np.diag([2 * a, 10.0, 10.0]), [[0, 0, 0], [(a + 2 * u_A) / (2 * a), 0, 0]], ["C", "C"])
    return build_model(c, params)


def test_half_filled_chain_bond_share_is_huckel_value(tmp_path):
    model = chain_model(tmp_path)
    res = bond_energies(model, (400, 1, 1))
    t = 2.5
    # Coulson, Proc. R. Soc. A 169, 413 (1939): infinite half-filled Hückel chain, band energy per site
    # -4|t|/pi; one bond per site, so each bond carries the same share
    expected = -4 * t / np.pi
    assert len(res.bond_energy_eV) == 2
    assert res.bond_energy_eV == pytest.approx([expected, expected], rel=1e-3)
    assert res.band_energy_eV / 2 == pytest.approx(expected, rel=1e-3)
    assert res.onsite_energy_eV == pytest.approx(0.0, abs=1e-9)


def test_bonds_plus_onsite_sum_to_band_energy(tmp_path):
    # exact identity of the split (Dronskowski & Blöchl, J. Phys. Chem. 97, 8617 (1993)), on A7 As with sp3 orbitals
    # (Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969))
    model = build_model(read_structure("tests/data/As_A7_rhombohedral.cif"))
    res = bond_energies(model, (8, 8, 8))
    assert res.bond_energy_eV.sum() + res.onsite_energy_eV == pytest.approx(res.band_energy_eV, abs=1e-8)
    ref = solve_on_mesh(model, (8, 8, 8))
    assert res.band_energy_eV == pytest.approx(ref.band_energy_eV, abs=1e-6)
    # 3 short + 3 long bonds per atom pair (A7): the short ones carry more of the band energy
    short = res.bond_length_A < res.bond_length_A.min() + 0.1
    assert np.count_nonzero(short) == 3
    assert res.bond_energy_eV[short].mean() < res.bond_energy_eV[~short].mean() < 0


def test_dimerised_chain_short_bond_bonding_long_bond_weaker(tmp_path):
    model = chain_model(tmp_path, u_A=0.04)
    res = bond_energies(model, (200, 1, 1), energies_eV=np.linspace(-6, 6, 61))
    short = int(np.argmin(res.bond_length_A))
    long_ = 1 - short
    # Su, Schrieffer & Heeger (1980): the short bond gains, the long bond loses, against the uniform chain
    uniform = -4 * 2.5 / np.pi  # Coulson (1939)
    assert res.bond_energy_eV[short] < uniform < res.bond_energy_eV[long_]
    assert res.bond_population_per_eV.shape == (61, 2)
    assert res.bond_energy_eV.sum() + res.onsite_energy_eV == pytest.approx(res.band_energy_eV, abs=1e-9)
