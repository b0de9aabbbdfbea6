"""`batch --export` (CSV or Parquet) and the electronegativity descriptor of the batch report."""

import importlib.util
import shutil
from pathlib import Path

import pandas as pd
import pytest

from screener.show.cli import main
from screener.structure.elements import PAULING_ELECTRONEGATIVITY, mean_electronegativity_difference, parse_formula

KNOWN = Path(__file__).parents[1] / "data" / "known_phases"


def _inputs(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    for name in ("NaCl_rocksalt", "K_bcc"):  # quick literature cases (sources in known_phases.csv)
        shutil.copy(KNOWN / f"{name}.cif", folder / f"{name}.cif")
    return folder


def test_export_csv_has_one_row_per_structure_and_the_descriptor_plot_is_drawn(tmp_path, capsys):
    folder, store = _inputs(tmp_path), tmp_path / "s.sqlite"
    out, rep = tmp_path / "table.csv", tmp_path / "rep"
    args = ["batch", str(folder), "--store", str(store), "--workers", "1", "--k-step", "0.4",
            "--quiet", "--export", str(out), "--report", str(rep), "--descriptor", "electronegativity-difference"]
    assert main(args) == 0
    table = pd.read_csv(out)
    assert len(table) == 2 and set(table.status) == {"ranked"}
    assert {"verdict", "generator", "delta_E_low_meV_per_atom", "delta_E_high_meV_per_atom"} <= set(table.columns)
    assert (rep / "delta_E_vs_electronegativity_difference.png").stat().st_size > 0


def test_export_to_an_unknown_format_or_without_pyarrow_is_refused_before_the_batch(tmp_path, capsys):
    folder, store = _inputs(tmp_path), tmp_path / "s.sqlite"
    base = ["batch", str(folder), "--store", str(store), "--workers", "1", "--quiet"]
    assert main(base + ["--export", str(tmp_path / "t.xlsx")]) == 2
    assert ".csv or .parquet" in capsys.readouterr().err
    if importlib.util.find_spec("pyarrow") is None:
        assert main(base + ["--export", str(tmp_path / "t.parquet")]) == 2
        assert "pyarrow" in capsys.readouterr().err
    assert not store.exists()  # refused before any structure was ranked


@pytest.mark.skipif(importlib.util.find_spec("pyarrow") is None, reason="pyarrow not installed")
def test_export_parquet_round_trips(tmp_path):
    folder, store, out = _inputs(tmp_path), tmp_path / "s.sqlite", tmp_path / "t.parquet"
    assert main(["batch", str(folder), "--store", str(store), "--workers", "1", "--k-step", "0.4", "--quiet",
                 "--export", str(out)]) == 0
    assert len(pd.read_parquet(out)) == 2


def test_mean_electronegativity_difference():
    # Pauling scale (Allred 1961): F is the most electronegative element, Cs among the least (from memory)
    assert max(PAULING_ELECTRONEGATIVITY, key=PAULING_ELECTRONEGATIVITY.get) == "F"
    assert mean_electronegativity_difference({"Si": 8}) == 0.0
    nacl = mean_electronegativity_difference(parse_formula("NaCl"))
    assert nacl == pytest.approx(PAULING_ELECTRONEGATIVITY["Cl"] - PAULING_ELECTRONEGATIVITY["Na"])
    # a binary's value does not depend on the stoichiometry (definition: mean over unlike pairs)
    assert mean_electronegativity_difference(parse_formula("Na2Cl2")) == pytest.approx(nacl)
    # ionicity order of common knowledge (general chemistry, no source): NaCl > GaAs > Si
    assert nacl > mean_electronegativity_difference(parse_formula("GaAs")) > 0
    assert parse_formula("Bi0.5Sb0.5") == {"Bi": 0.5, "Sb": 0.5}
    assert mean_electronegativity_difference({"Ce": 1, "Eu": 1}) is None  # Eu not tabulated
