"""Output paths are checked before the work, and the safety line says which element is which hazard."""

import numpy as np
import pytest

from screener.show.cli import main
from screener.structure.crystal import Crystal


def test_bad_output_paths_are_refused_before_any_work(tmp_path, capsys):
    # the structure file does not even exist: a refusal naming the output proves the check comes first
    missing = str(tmp_path / "not_read.cif")
    assert main(["rank", missing, "--csv", str(tmp_path)]) == 2
    assert "--csv" in capsys.readouterr().err
    a_file = tmp_path / "a_file.txt"
    a_file.write_text("x")
    assert main(["rank", missing, "--write-structures", str(a_file)]) == 2
    assert "--write-structures" in capsys.readouterr().err
    assert main(["demo", "--out", str(a_file)]) == 2
    assert "is a file" in capsys.readouterr().err
    other = tmp_path / "someone_elses"
    other.mkdir()
    (other / "thesis.tex").write_text("keep me")
    assert main(["demo", "--out", str(other)]) == 2
    assert "not a screener report folder" in capsys.readouterr().err
    assert (other / "thesis.tex").read_text() == "keep me"


def test_safety_line_says_which_element_is_toxic_and_which_radioactive():
    # Pb and Te are toxic, Po is radioactive (no stable isotope); common laboratory knowledge, no source
    from screener.screen.rank import safety_note

    line = safety_note(Crystal(np.eye(3) * 6.0, [[0, 0, 0], [0.5, 0.5, 0.5], [0.5, 0, 0]], ["Pb", "Te", "Po"]))
    assert "Pb, Te (toxic)" in line and "Po (radioactive)" in line
    assert safety_note(Crystal(np.eye(3) * 3.0, [[0, 0, 0]], ["Sb"])).startswith("Contains Sb (toxic)")
    assert safety_note(Crystal(np.eye(3) * 3.0, [[0, 0, 0]], ["Na"])) == ""


@pytest.mark.parametrize("value", ["inf", "nan", "-inf", "1e309"])
def test_non_finite_option_values_are_refused_at_parse_time(value, capsys):
    # a step of inf or nan would reach the JSON output as NaN (invalid JSON, RFC 8259 section 6)
    from pathlib import Path

    demo = Path(__file__).resolve().parents[2] / "demo_structures" / "As_simple_cubic.cif"
    with pytest.raises(SystemExit) as info:
        main(["rank", str(demo), f"--k-step={value}"])
    assert info.value.code == 2
    assert "not a finite number" in capsys.readouterr().err


def test_unwritable_or_impossible_output_places_are_refused_before_any_work(tmp_path, capsys):
    # common practice, no source: an output that cannot be written is refused at once, not after the computation
    missing = str(tmp_path / "not_read.cif")
    a_file = tmp_path / "a_file.txt"
    a_file.write_text("x")
    # /proc takes no new folders, for any user (the Linux proc file system); elsewhere: a folder under a file
    impossible = "/proc/screener-report" if __import__("os").path.isdir("/proc/self") else str(a_file / "sub")
    assert main(["demo", "--out", impossible]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--out" in err[0]
    assert main(["demo", "--out", str(a_file / "sub")]) == 2
    assert "cannot be made" in capsys.readouterr().err
    assert main(["bands", missing, "--plot", str(tmp_path)]) == 2
    assert "--plot" in capsys.readouterr().err
    assert main(["explain", missing, "--plot", str(a_file)]) == 2
    assert "--plot" in capsys.readouterr().err
    assert main(["rank", missing, "--write-structures", str(a_file / "sub")]) == 2
    assert "--write-structures" in capsys.readouterr().err
