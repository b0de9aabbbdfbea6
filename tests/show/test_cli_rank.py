"""`screener rank` and `screener demo` through the command line."""

import json
from pathlib import Path

import numpy as np
import pytest

from screener.show.cli import main
from screener.structure.crystal import Crystal
from screener.structure.formats import read_structure, write_structure
from screener.structure.symmetry import analyse

REQUIRED_CANDIDATE_KEYS = {
    "generator", "q", "supercell_atoms", "space_group", "displacement_A", "delta_E_meV_per_atom",
    "delta_E_band_meV_per_atom", "delta_E_elastic_meV_per_atom", "gap_eV", "shell_distances_A", "verdict",
    "converged", "kmesh", "delta_E_range_meV_per_atom", "distorting_fraction", "member_delta_E_meV_per_atom",
    "kmesh_error_meV_per_atom",
}

# Su, Schrieffer & Heeger, PRB 22, 2099 (1980): t0 = 2.5 eV, α = 4.1 eV/Å, K = 21 eV/Å², a = 1.22 Å
SSH_TOML = (Path(__file__).parents[1] / "data" / "params" / "ssh_polyacetylene.toml").read_text()


@pytest.fixture
def chain_files(tmp_path):
    chain = Crystal(np.diag([1.22, 10.0, 10.0]), [[0, 0, 0]], ["C"])
    structure = tmp_path / "chain.cif"
    write_structure(chain, structure)
    params = tmp_path / "ssh.toml"
    params.write_text(SSH_TOML)
    return structure, params


def test_rank_json_carries_every_key_and_ssh_verdict(chain_files, capsys, tmp_path):
    structure, params = chain_files
    out_dir = tmp_path / "optima"
    code = main(["rank", str(structure), "--params", str(params), "--json", "--write-structures", str(out_dir)])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert {"formula", "space_group", "valence_electrons_per_cell", "fermi_level_eV", "candidates"} <= set(data)
    assert data["valence_electrons_per_cell"] == 1
    assert data["space_group"]["number"] == 123  # P4/mmm, International Tables A
    (cand,) = data["candidates"]
    assert REQUIRED_CANDIDATE_KEYS <= set(cand)
    # SSH (1980): the half-filled chain dimerises with u0 ≈ 0.04 Å and a gap ≈ 1.3–1.4 eV
    assert cand["verdict"] == "unstable"
    assert cand["q"] == [0.5, 0.0, 0.0]
    assert 0.035 < cand["displacement_A"] < 0.045
    assert 1.2 < cand["gap_eV"] < 1.5
    # the written optimum reads back with the same symmetry and bond lengths
    (written,) = data["structures_written"]
    back = read_structure(written)
    assert analyse(back).number == cand["space_group"]["number"]
    d = np.sort(np.linalg.norm(np.diff(back.cart_A[np.argsort(back.cart_A[:, 0])], axis=0), axis=1))
    assert d[0] == pytest.approx(cand["shell_distances_A"][0], abs=2e-3)


def test_rank_text_table_and_csv(chain_files, capsys, tmp_path):
    structure, params = chain_files
    csv = tmp_path / "ranked.csv"
    assert main(["rank", str(structure), "--params", str(params), "--csv", str(csv), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "dimerise" in text and "UNSTABLE" in text and "not a substitute for DFT" in text
    import pandas as pd

    table = pd.read_csv(csv)
    assert list(table["generator"]) == ["dimerise"]
    assert table.loc[0, "verdict"] == "unstable"


@pytest.mark.parametrize("args, message", [
    (["--q", "1/2,0"], "--q must be three numbers"),
    (["--generator", "twist"], "unknown generator 'twist'"),
    (["--q", "0.1234567,0,0"], "not commensurate"),
])
def test_rank_bad_options_exit_2_with_one_line(chain_files, capsys, args, message):
    structure, params = chain_files
    assert main(["rank", str(structure), "--params", str(params), "--quiet", *args]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]


def test_version(capsys):
    from importlib.metadata import version

    # the version the package was installed with (pyproject.toml) is the one printed (common practice, no source)
    with pytest.raises(SystemExit, match="^0$"):
        main(["--version"])
    assert capsys.readouterr().out == f"screener {version('screener')}\n"


def test_generator_help_lists_the_generator_names(capsys):
    from screener.screen.generators import GENERATORS

    with pytest.raises(SystemExit, match="^0$"):
        main(["rank", "--help"])
    text = " ".join(capsys.readouterr().out.split())  # argparse wraps the help lines
    assert f"--generator NAME candidate generator to run, one of {', '.join(GENERATORS)}" in text
    assert GENERATORS == ("dimerise", "rhombohedral-split", "modulate", "soft-mode")  # the names the README documents


def test_demo_writes_report_for_every_invented_structure(tmp_path, capsys):
    # plumbing: the report folder holds a table row set, curves and band plots for every demo structure
    import pandas as pd

    from screener.show.report import demo_folder

    out = tmp_path / "report"
    assert main(["demo", "--out", str(out), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "invented" in text and "not a substitute for DFT" in text
    names = sorted(p.name for p in demo_folder().iterdir() if p.suffix in (".cif", ".json"))
    table = pd.read_csv(out / "ranked.csv")
    assert sorted(set(table["structure"])) == names
    for name in names:
        stem = name.rsplit(".", 1)[0]
        assert (out / f"{stem}_energy_curves.png").stat().st_size > 10_000
        assert (out / f"{stem}_bands_parent.png").stat().st_size > 10_000
    data = json.loads((out / "results.json").read_text())
    assert set(data) == set(names)
