"""`screener bands` end to end, checked against closed-form Slater–Koster bands of the simple cubic lattice."""

import json

import numpy as np
import pytest

from screener.show.cli import main

PO_SC = "tests/data/Po_simple_cubic_number_only.cif"  # a = 3.359 Å, one atom, Pm-3m
A_PO = 3.359

# invented parameters; V given at r0 = a so the "power" law returns exactly V_eV at the nearest-neighbour distance
EPS_S, EPS_P = -8.0, -1.0
V_SS, V_SP, V_PP_SIGMA, V_PP_PI = -0.8, 1.1, 2.0, -0.5


def _params(tmp_path, sp_sigma=V_SP):
    text = f"""
[species.Po]
orbitals = ["s", "p"]
onsite_eV = {{ s = {EPS_S}, p = {EPS_P} }}
[bond."Po-Po"]
law = "power"
r0_A = {A_PO}
exponent = 2
V_eV = {{ ss_sigma = {V_SS}, sp_sigma = {sp_sigma}, pp_sigma = {V_PP_SIGMA}, pp_pi = {V_PP_PI} }}
"""
    p = tmp_path / "po.toml"
    p.write_text(text)
    return str(p)


def _sc_bands(kfrac):
    """Nearest-neighbour simple-cubic s and p bands without s–p mixing, sorted.

    Slater & Koster, Phys. Rev. 94, 1498 (1954): E_s = ε_s + 2V_ssσ (cos k_x a + cos k_y a + cos k_z a);
    E_x = ε_p + 2V_ppσ cos k_x a + 2V_ppπ (cos k_y a + cos k_z a), and cyclically for y, z.
    """
    c = np.cos(2 * np.pi * np.asarray(kfrac))  # k·a = 2π × fraction in the cubic cell
    e_s = EPS_S + 2 * V_SS * c.sum(axis=1)
    e_p = EPS_P + 2 * V_PP_SIGMA * c + 2 * V_PP_PI * (c.sum(axis=1, keepdims=True) - c)
    return np.sort(np.concatenate([e_s[:, None], e_p], axis=1), axis=1)


def _run_json(capsys, argv):
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def test_special_points_match_slater_koster(tmp_path, capsys):
    # at Γ, X, M, R every sin(k_i a) vanishes, so the s–p coupling 2i V_spσ sin(k_i a) drops out
    # (Slater & Koster 1954, Table I with nearest neighbours on the cube axes) and the closed forms hold exactly
    out = _run_json(capsys, ["bands", PO_SC, "--params", _params(tmp_path), "--json"])
    k = np.array(out["kpoints_frac"])
    e = np.array(out["energies_eV"])
    assert e.shape == (len(k), 4)
    assert np.all(np.diff(e, axis=1) >= 0)
    labels = {d["label"]: d["index"] for d in out["labels"]}
    assert set(labels) == {"Γ", "X", "M", "R"}
    # special points of the simple cubic zone, Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010), Table 2
    expected_k = {"Γ": [0, 0, 0], "X": [0, 0.5, 0], "M": [0.5, 0.5, 0], "R": [0.5, 0.5, 0.5]}
    for lab, idx in labels.items():
        assert np.allclose(k[idx], expected_k[lab], atol=1e-12)
        assert np.allclose(e[idx], _sc_bands(k[idx : idx + 1])[0], atol=1e-9, rtol=0), lab
    assert np.isfinite(out["fermi_level_eV"])
    assert out["lattice_type"] == "CUB"
    # 6 electrons in 4 bands: the Fermi level lies inside the p manifold
    assert e[:, 0].max() < out["fermi_level_eV"] < e[:, 3].max()


def test_explicit_kpoints_general_points_without_sp_mixing(tmp_path, capsys):
    # with V_spσ = 0 the closed forms hold at every k (Slater & Koster 1954)
    kp = "0.1,0.2,0.3;0.37,-0.05,0.21"
    out = _run_json(capsys, ["bands", PO_SC, "--params", _params(tmp_path, sp_sigma=0.0), "--kpoints", kp,
                             "--json"])
    k = np.array(out["kpoints_frac"])
    assert [d["label"] for d in out["labels"]] == ["0.1,0.2,0.3", "0.37,-0.05,0.21"]
    assert np.allclose(k[0], [0.1, 0.2, 0.3]) and np.allclose(k[-1], [0.37, -0.05, 0.21])
    assert np.allclose(np.array(out["energies_eV"]), _sc_bands(k), atol=1e-9, rtol=0)


def test_text_output_and_plot(tmp_path, capsys):
    png = tmp_path / "bands.png"
    assert main(["bands", PO_SC, "--params", _params(tmp_path), "--plot", str(png)]) == 0
    text = capsys.readouterr().out
    assert "Fermi level" in text and "band energy" in text and "CUB" in text
    # Γ row: s band at ε_s + 6V_ssσ, p bands at ε_p + 2V_ppσ + 4V_ppπ (Slater & Koster 1954), relative to E_F
    ef = float(text.split("Fermi level")[1].split()[0])
    gamma_row = next(line for line in text.splitlines() if line.strip().startswith("Γ"))
    values = [float(x) for x in gamma_row.split()[4:]]
    assert np.allclose(values, np.array([EPS_S + 6 * V_SS] + [EPS_P + 2 * V_PP_SIGMA + 4 * V_PP_PI] * 3) - ef,
                       atol=2e-3)
    assert png.stat().st_size > 20_000


def test_default_parameters_run(capsys):
    out = _run_json(capsys, ["bands", "tests/data/As_A7_rhombohedral_P1.cif", "--json"])
    assert out["lattice_type"] in ("RHL1", "RHL2")
    assert len(out["energies_eV"]) == len(out["kpoints_frac"]) == len(out["x_inv_A"])
    assert out["orbital_groups"] == ["s", "p"]


@pytest.mark.parametrize("bad", ["0,0", "0,0,0;a,b,c"])
def test_bad_kpoints_is_one_line_error(tmp_path, capsys, bad):
    assert main(["bands", PO_SC, "--params", _params(tmp_path), "--kpoints", bad]) == 2
    err = capsys.readouterr().err
    assert "--kpoints" in err and repr(bad) in err and len(err.strip().splitlines()) == 1


def test_graphene_gap_comes_from_the_band_edges_at_K():
    # Wallace, Phys. Rev. 71, 622 (1947): the π bands of a graphite layer touch at the zone corner K, gap 0;
    # a Γ-centred mesh that misses K shows a spurious gap, the route through K must close it
    from screener.bz.bands import band_structure
    from screener.structure.crystal import Crystal

    a = 2.46  # graphene lattice constant, Å (from memory)
    lat = np.array([[a, 0, 0], [-a / 2, a * np.sqrt(3) / 2, 0], [0, 0, 12.0]])
    graphene = Crystal(lat, [[1 / 3, 2 / 3, 0.5], [2 / 3, 1 / 3, 0.5]], ["C", "C"])
    bs = band_structure(graphene)
    assert bs.gap_eV == pytest.approx(0.0, abs=1e-6)
    assert not bs.all_bands_filled


def test_completely_filled_bands_are_an_insulator_not_a_metal(capsys, tmp_path):
    # solid argon, fcc, a = 5.26 Å (from memory): a closed 3s²3p⁶ shell fills every band of an s,p basis
    from screener.structure.crystal import Crystal
    from screener.structure.formats import write_structure

    fcc = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * 5.26
    path = tmp_path / "Ar_fcc.json"
    write_structure(Crystal(fcc, [[0, 0, 0]], ["Ar"]), path)
    assert main(["bands", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["all_bands_filled"] is True and data["gap_eV"] is None
    assert main(["bands", str(path)]) == 0
    assert "every band is filled (an insulator" in capsys.readouterr().out
