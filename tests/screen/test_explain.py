"""`explain`: is an observed distortion driven by the bands?"""

from pathlib import Path

import numpy as np
import pytest

from screener import read_structure
from screener.screen.explain import explain
from screener.structure.crystal import Crystal
from screener.tb.param_file import load_parameters

# Su, Schrieffer & Heeger, PRB 22, 2099 (1980): polyacetylene chain parameters (shared test data file)
SSH_TOML = (Path(__file__).parents[1] / "data" / "params" / "ssh_polyacetylene.toml").read_text()


def test_a7_arsenic_explained():
    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969)
    r = explain(read_structure("tests/data/As_A7_rhombohedral.cif"))
    assert r.parent_symbol == "Pm-3m"
    assert r.index == 8  # International Tables A1: Pm-3m > R-3m (t4) with the cell halved (k2)
    assert r.path.lambda_[0] == 0 and r.path.lambda_[-1] == 1.5
    # 3 short + 3 long bonds kept (parent's six bonds followed)
    assert [b["count_per_cell"] for b in r.bonds] == [3, 3]
    short, long_ = r.bonds
    assert short["bond_energy_eV"]["observed"] < short["bond_energy_eV"]["parent"]
    assert long_["bond_energy_eV"]["observed"] > long_["bond_energy_eV"]["parent"]
    # in the cubic parent all six bonds are one orbit: the same share and character, whatever the k-mesh
    assert short["bond_energy_eV"]["parent"] == pytest.approx(long_["bond_energy_eV"]["parent"], abs=1e-12)
    assert short["length_parent_A"] == long_["length_parent_A"]
    assert short["bond_character_at_EF"]["parent"] == long_["bond_character_at_EF"]["parent"]
    # the model (not tuned) puts the optimum within 0.5-1.5 of the observed distortion: band-driven
    assert 0.5 <= r.path.optimum_lambda <= 1.5
    assert r.attribution == "band-driven"
    d = r.as_dict()
    assert set(d) >= {"parent", "index", "modes", "path", "optimum_lambda", "bonds", "attribution", "reasons"}
    assert d["modes"][0]["amplitude_A"] > 0


def test_ssh_chain_is_band_driven(tmp_path):
    p = tmp_path / "ssh.toml"
    p.write_text(SSH_TOML)
    params = load_parameters(p, ["C"])
    a, u = 1.22, 0.04  # Su, Schrieffer & Heeger (1980): u0 ≈ 0.04 Å
    chain = Crystal(np.diag([2 * a, 10.0, 10.0]), [[0, 0, 0], [(a + 2 * u) / (2 * a), 0, 0]], ["C", "C"])
    r = explain(chain, params=params)
    assert r.index == 2  # uniform chain: the cell halves
    assert r.attribution == "band-driven"
    # optimum near u0 = 0.04 Å, i.e. near λ = 1 (SSH 1980)
    assert r.path.optimum_lambda == pytest.approx(1.0, abs=0.3)


def test_off_centre_ion_in_rocksalt_halide_is_not_band_driven():
    # invented: NaCl rocksalt (tests/data/known_phases) with Cl pushed 0.15 Å along [111]
    c = read_structure("tests/data/known_phases/NaCl_rocksalt.cif")
    from screener.structure.symmetry import analyse, standard_primitive

    prim = standard_primitive(c, analyse(c)).crystal
    k = prim.species.index("Cl")
    shift = np.array([1, 1, 1]) / np.sqrt(3) * 0.15 @ np.linalg.inv(prim.lattice_A)
    frac = prim.frac.copy()
    frac[k] += shift
    pushed = Crystal(prim.lattice_A, frac, prim.species)
    r = explain(pushed)
    assert r.parent_symbol == "Fm-3m"
    assert r.attribution == "not band-driven"


def test_cli_explain_json_and_figures(tmp_path, capsys):
    import json

    from screener.show.cli import main

    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969)
    code = main(["explain", "tests/data/As_A7_hexagonal.cif", "--json", "--plot", str(tmp_path / "figs")])
    assert code == 0
    d = json.loads(capsys.readouterr().out)
    assert d["parent"]["space_group"] == "Pm-3m" and d["index"] == 8
    assert set(d["path"]) >= {"lambda", "delta_E_band_meV_per_atom", "delta_E_elastic_meV_per_atom",
                              "delta_E_meV_per_atom"}
    assert len(d["path"]["lambda"]) == len(d["path"]["delta_E_meV_per_atom"])
    assert (tmp_path / "figs" / "path_energy.png").stat().st_size > 1000
    assert (tmp_path / "figs" / "bond_curves.png").stat().st_size > 1000


def test_given_parent_gives_the_same_answer(tmp_path, capsys):
    import json

    from screener import write_structure
    from screener.show.cli import main

    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): the parent found, written out and given back
    found = explain(read_structure("tests/data/As_A7_rhombohedral.cif"))
    write_structure(found.parent_structure, tmp_path / "parent.json")
    code = main(["explain", "tests/data/As_A7_rhombohedral.cif", "--parent", str(tmp_path / "parent.json"), "--json"])
    assert code == 0
    d = json.loads(capsys.readouterr().out)
    assert d["parent"]["space_group"] == "Pm-3m" and d["index"] == 8
    assert d["attribution"] == found.attribution
    assert d["optimum_lambda"] == pytest.approx(found.path.optimum_lambda, abs=1e-3)


def test_cli_explain_bad_parent_is_one_line_error(tmp_path, capsys):
    from screener.show.cli import main

    bad = tmp_path / "bad.cif"
    bad.write_text("not a cif\n")
    code = main(["explain", "tests/data/As_A7_rhombohedral.cif", "--parent", str(bad)])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "bad.cif" in err[0]


def test_a7_bismuth_explained():
    # Cucka & Barrett, Acta Cryst. 15, 865 (1962) (from memory): a = 4.546, c = 11.862 Å, z = 0.23389, bonds 3.07
    # and 3.53 Å; the A7 distortion of simple cubic is the Peierls split of the half-filled p bands (e.g. Burdett &
    # Lee, J. Am. Chem. Soc. 105, 1079 (1983) — from memory)
    r = explain(read_structure("tests/data/Bi_A7_hexagonal.cif"))
    assert r.parent_symbol == "Pm-3m" and r.index == 8
    short, long_ = r.bonds
    assert (short["count_per_cell"], long_["count_per_cell"]) == (3, 3)
    assert short["length_observed_A"] == pytest.approx(3.07, abs=0.01)
    assert long_["length_observed_A"] == pytest.approx(3.53, abs=0.01)
    # the bonds that shorten gain band energy, those that lengthen lose it
    assert short["bond_energy_eV"]["observed"] < short["bond_energy_eV"]["parent"] < long_["bond_energy_eV"]["observed"]
    assert r.path.optimum_lambda == pytest.approx(1.0, abs=0.5)
    assert r.attribution == "band-driven"


def test_explain_writes_the_parent_it_found(tmp_path, capsys):
    # the simple-cubic parent of A7 As (Schiferl & Barrett 1969) written in the observed cell reads back as Pm-3m
    from screener.show.cli import main

    out = tmp_path / "parent.cif"
    assert main(["explain", "tests/data/As_A7_rhombohedral.cif", "--write-parent", str(out)]) == 0
    assert f"wrote the parent (Pm-3m) to {out}" in capsys.readouterr().out
    from screener.structure.symmetry import analyse

    parent = read_structure(out)
    assert analyse(parent).number == 221 and parent.n_atoms == 2
    assert main(["explain", "tests/data/As_A7_rhombohedral.cif", "--write-parent", str(tmp_path / "p.txt")]) == 2
