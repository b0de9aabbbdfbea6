"""`screener info` on published structures, and one-line errors (exit status 2) for every kind of bad file."""

import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from screener import read_structure
from screener.show.cli import main

DATA = Path(__file__).parents[1] / "data"
pytestmark = pytest.mark.filterwarnings("ignore:Set OLD_ERROR_HANDLING:DeprecationWarning")


def _info_json(capsys, *args):
    assert main(["info", *map(str, args), "--json"]) == 0
    out, err = capsys.readouterr()
    assert err == ""
    return json.loads(out)


@pytest.mark.parametrize("name,n_atoms,wyckoff", [
    ("As_A7_hexagonal.cif", 6, "6c"),
    ("As_A7_rhombohedral.cif", 2, "6c"),
    ("As_A7_rhombohedral_P1.cif", 2, "6c"),
])
def test_info_json_a7_arsenic(capsys, name, n_atoms, wyckoff):
    info = _info_json(capsys, DATA / name)
    # International Tables A, No. 166 R-3m; As on 6c (hexagonal axes multiplicity); 2 atoms per primitive cell
    assert info["space_group"] == {"symbol": "R-3m", "number": 166}
    assert info["primitive_atoms"] == 2
    assert info["n_atoms"] == n_atoms and info["formula"] == f"As{n_atoms}"
    assert {s["wyckoff"] for s in info["sites"]} == {wyckoff}
    # As is group 15: 5 valence electrons (s2 p3; any periodic table)
    assert info["valence_electrons"] == 5 * n_atoms
    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): 3 bonds ≈2.52 Å, 3 contacts ≈3.12 Å (from memory)
    shells = info["neighbour_shells_A"]
    assert [round(s["distance_A"], 2) for s in shells[:2]] == [2.52, 3.12]
    assert [s["count_per_atom"] for s in shells[:2]] == [3, 3]
    # A7 As volume ≈ 21.5 Å^3 per atom, recomputed from the same paper's cell
    assert info["cell"]["volume_per_atom_A3"] == pytest.approx(21.52, abs=0.01)


def test_info_json_reads_back_as_structure(tmp_path, capsys):
    info = _info_json(capsys, DATA / "GeTe_rocksalt_primitive.cif")
    assert info["space_group"]["number"] == 225  # rocksalt, International Tables A, No. 225
    assert sorted(s["wyckoff"] for s in info["sites"]) == ["4a", "4b"]  # ITA No. 225: 4a + 4b
    assert info["valence_electrons"] == 10  # Ge 4 + Te 6 (groups 14 and 16)
    path = tmp_path / "again.json"
    path.write_text(json.dumps(info))
    again = read_structure(path)
    original = read_structure(DATA / "GeTe_rocksalt_primitive.cif")
    assert again.species == original.species and again.frac.tolist() == original.frac.tolist()


def test_info_conventional_cell(capsys):
    info = _info_json(capsys, DATA / "Si_diamond_conventional.cif")
    # International Tables A, No. 227 Fd-3m; diamond: 2 atoms per primitive cell, 4 neighbours
    assert info["space_group"]["number"] == 227 and info["primitive_atoms"] == 2
    assert info["neighbour_shells_A"][0]["count_per_atom"] == 4


def test_info_table(capsys):
    assert main(["info", str(DATA / "As_A7_hexagonal.cif")]) == 0
    out = capsys.readouterr().out
    assert "R-3m (No. 166)" in out  # International Tables A, No. 166
    assert "6 atoms in this cell, 2 in the primitive cell" in out
    assert "a=3.7598 b=3.7598 c=10.5475 Å" in out and "γ=120.000°" in out  # Schiferl & Barrett (1969)
    assert "21.521 Å^3 per atom" in out
    assert "6c" in out and "2.5171" in out and "3.1204" in out


def test_info_symprec_loosens_symmetry(tmp_path, capsys):
    # CsCl-type GeTe with Te moved 0.01 Å along z: a strict tolerance sees the polar tetragonal group P4mm
    # (International Tables A, No. 99), a loose one the CsCl type Pm-3m (No. 221)
    path = tmp_path / "GeTe.json"
    path.write_text(json.dumps({"lattice_A": (3.359 * np.eye(3)).tolist(),
                                "sites": [{"element": "Ge", "frac": [0, 0, 0]},
                                          {"element": "Te", "frac": [0.5, 0.5, 0.503]}]}))
    strict = _info_json(capsys, path, "--symprec", "1e-4")["space_group"]["number"]
    loose = _info_json(capsys, path, "--symprec", "0.05")["space_group"]["number"]
    assert (strict, loose) == (99, 221)


def test_failed_symmetry_search_is_one_line_in_our_words(tmp_path, capsys):
    # like atoms 0.8 Å apart under a 1 Å tolerance defeat the symmetry search (common practice, no source)
    path = tmp_path / "close.json"
    sites = [{"element": "Ge", "frac": [0, 0, 0]}, {"element": "Ge", "frac": [0.2, 0, 0]}]
    path.write_text(json.dumps({"lattice_A": (4.0 * np.eye(3)).tolist(), "sites": sites}))
    assert main(["info", str(path), "--symprec", "1.0"]) == 2
    err = capsys.readouterr().err
    errors = [line for line in err.splitlines() if ": error:" in line]
    assert len(errors) == 1 and "symmetry tolerance 1 Å is not below half the shortest contact of Ge2" in errors[0]
    # the only other line: the reading warning that 0.8 Å is no Ge–Ge bond
    assert all("warning:" in line and "covalent radii" in line for line in err.splitlines() if ": error:" not in line)
    assert "spglib" not in err and "Traceback" not in err


# ------------------------------------------------------------------------------------------ bad files
_GOOD_CIF = (DATA / "As_A7_hexagonal.cif").read_text()
_CUBE = "data_t\n_cell_length_a {a}\n_cell_length_b {b}\n_cell_length_c 4\n_cell_angle_alpha 90\n" \
        "_cell_angle_beta 90\n_cell_angle_gamma 90\nloop_\n_atom_site_label\n_atom_site_type_symbol\n" \
        "_atom_site_fract_x\n_atom_site_fract_y\n_atom_site_fract_z\n_atom_site_occupancy\n{sites}"
_JUNK = bytes(range(256)) * 8

BAD_FILES = {
    # name: (file name, content, words expected in the message)
    "empty-cif": ("empty.cif", "", "empty"),
    "empty-json": ("empty.json", "", "empty"),
    "empty-unknown": ("empty.dat", "", "unrecognised format"),
    "junk-cif": ("junk.cif", _JUNK, "binary"),
    "junk-json": ("junk.json", _JUNK, "not UTF-8"),
    "junk-unknown": ("junk.bin", _JUNK, "unrecognised format"),
    "latin1-cif": ("latin.cif", "\xe9t\xe9 \xff".encode("latin-1"), "not a readable CIF"),
    "latin1-json": ("latin.json", "{\"title\": \"\xe9t\xe9\"}".encode("latin-1"), "not UTF-8"),
    "truncated-cif": ("cut.cif", _GOOD_CIF[: _GOOD_CIF.index("As1 As") + 9], "Wrong number of values"),
    "truncated-json": ("cut.json", '{"lattice_A": [[1, 0, 0], [0, ', "not valid JSON"),
    "duplicate-tag": ("dup.cif", "data_x\n_cell_length_a 4\n_cell_length_a 5\n",
                      "not a readable CIF file: line 3 (data_x): duplicate tag _cell_length_a"),
    "missing-cell": ("nocell.cif", _CUBE.format(a=4, b=4, sites="Ge1 Ge 0 0 0 1\n").replace(
        "_cell_length_c 4\n", ""), "missing _cell_length_c"),
    "negative-cell": ("neg.cif", _CUBE.format(a=-4, b=4, sites="Ge1 Ge 0 0 0 1\n"), "must be positive"),
    "degenerate-json": ("flat.json", json.dumps({"lattice_A": [[4, 0, 0], [0, 4, 0], [4, 4, 0]],
                                                 "sites": [{"element": "Ge", "frac": [0, 0, 0]}]}), "degenerate"),
    "left-handed-json": ("lh.json", json.dumps({"lattice_A": [[4, 0, 0], [0, 4, 0], [0, 0, -4]],
                                                "sites": [{"element": "Ge", "frac": [0, 0, 0]}]}), "left-handed"),
    "unknown-element-cif": ("el.cif", _CUBE.format(a=4, b=4, sites="X1 Xx 0 0 0 1\n"), "unknown element"),
    "unknown-element-json": ("el.json", json.dumps({"lattice_A": [[4, 0, 0], [0, 4, 0], [0, 0, 4]],
                                                    "sites": [{"element": "Qq", "frac": [0, 0, 0]}]}),
                             "unknown element"),
    "overlap-cif": ("close.cif", _CUBE.format(a=4, b=4, sites="Ge1 Ge 0 0 0 1\nGe2 Ge 0.1 0 0 1\n"),
                    "closer than the minimum"),
    "overlap-json": ("close.json", json.dumps({"lattice_A": [[4, 0, 0], [0, 4, 0], [0, 0, 4]],
                                               "sites": [{"element": "Ge", "frac": [0, 0, 0]},
                                                         {"element": "Te", "frac": [0.01, 0, 0]}]}), "closer than"),
    "partial-occupancy": ("part.cif", _CUBE.format(a=4, b=4, sites="Ge1 Ge 0 0 0 0.5\nTe1 Te 0 0 0 0.5\n"),
                          "ordered structure"),
    "mixed-site": ("mixed.cif", _CUBE.format(a=4, b=4, sites="Ge1 Ge 0 0 0 1\nTe1 Te 0 0 0 1\n"), "mixed site"),
    "unrecognised": ("notes.txt", "These are my notes about GeTe.\nNothing else.\n",
                     "unrecognised format: neither CIF"),
    "wrong-json-type": ("list.json", "[1, 2, 3]", "expected a JSON object"),
    "missing-file": ("never-written.cif", None, "no such file"),
}


@pytest.mark.parametrize("case", list(BAD_FILES), ids=list(BAD_FILES))
@pytest.mark.parametrize("as_json", [False, True], ids=["table", "json"])
def test_bad_file_one_line_exit_2(tmp_path, capsys, case, as_json):
    name, content, words = BAD_FILES[case]
    path = tmp_path / name
    if isinstance(content, bytes):
        path.write_bytes(content)
    elif content is not None:
        path.write_text(content)
    argv = ["info", str(path)] + (["--json"] if as_json else [])
    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert str(path) in lines[0] and words in lines[0]
    assert "Traceback" not in err


def test_debug_shows_the_exception(tmp_path):
    path = tmp_path / "empty.cif"
    path.write_text("")
    from screener.errors import FormatError

    with pytest.raises(FormatError, match="empty"):
        main(["--debug", "info", str(path)])


# ------------------------------------------------------------------------------------------ fuzz
_FUZZ_SOURCES = ["As_A7_hexagonal.cif", "GeTe_rocksalt_primitive.cif", "Al_fcc_symbol_only.cif"]


@settings(max_examples=25, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(_FUZZ_SOURCES), cut=st.floats(0, 1), junk=st.binary(max_size=12), at=st.floats(0, 1))
def test_corrupted_files_never_give_a_traceback(tmp_path, capsys, name, cut, junk, at):
    # robustness, common practice, no source: any corruption either still reads or exits 2 with one line
    data = (DATA / name).read_bytes()
    k = int(at * len(data))
    data = (data[:k] + junk + data[k:])[: max(1, int(cut * len(data) * 1.1))]
    path = tmp_path / name
    path.write_bytes(data)
    status = main(["info", str(path), "--json"])
    out, err = capsys.readouterr()
    assert status in (0, 2)
    if status == 2:
        assert out == "" and len(err.splitlines()) == 1 and str(path) in err
    else:
        assert err == "" and json.loads(out)["n_atoms"] >= 1
