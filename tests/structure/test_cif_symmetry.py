"""How a CIF's symmetry is read: checked operator lists, stated origin choices, and warnings where the file leaves
doubt (the structure is read, but perhaps not as its author meant).

Sources: International Tables for Crystallography Vol. A (diamond structure: Si on 8a at 0,0,0 in origin choice 1,
at 1/8,1/8,1/8 in origin choice 2; the 230 space groups; a symmetry operation's rotation has determinant ±1 and the
operations of a space group form a group) — from memory. Covalent radii: Cordero et al., Dalton Trans. 2008, 2832,
compared with the radii shipped by gemmi (a general-purpose crystallographic library). Everything else is common
practice, no source.
"""

import json
import warnings

import numpy as np
import pytest

from screener.errors import FormatError, StructureError, StructureWarning
from screener.show.cli import main
from screener.structure.elements import COVALENT_RADIUS_A
from screener.structure.formats import read_structure
from screener.structure.neighbours import short_contacts

CELL = """data_x
_cell_length_a {a}
_cell_length_b {a}
_cell_length_c {a}
_cell_angle_alpha 90
_cell_angle_beta 90
_cell_angle_gamma 90
{symmetry}
loop_
_atom_site_label
_atom_site_type_symbol
_atom_site_fract_x
_atom_site_fract_y
_atom_site_fract_z
{sites}
"""


def _cif(tmp_path, symmetry, sites, a=5.431, name="x.cif"):
    p = tmp_path / name
    p.write_text(CELL.format(a=a, symmetry=symmetry, sites=sites))
    return p


def _read(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        crystal = read_structure(path)
    kinds = [w.message.kind for w in caught if issubclass(w.category, StructureWarning)]
    return crystal, kinds


def _ops(*triplets):
    return "loop_\n_space_group_symop_operation_xyz\n" + "\n".join(f"'{t}'" for t in triplets)


@pytest.mark.parametrize("symbol", ["'F d -3 m:1'", "'Fd-3m:1'"])
def test_origin_choice_1_stated_diamond_si_has_8_atoms(tmp_path, symbol):
    crystal, kinds = _read(_cif(tmp_path, f"_symmetry_space_group_name_H-M {symbol}", "Si1 Si 0 0 0"))
    assert crystal.n_atoms == 8 and kinds == []


def test_origin_choice_2_stated_diamond_si_has_8_atoms(tmp_path):
    crystal, kinds = _read(_cif(tmp_path, "_space_group_name_H-M_alt 'F d -3 m:2'", "Si1 Si 0.125 0.125 0.125"))
    assert crystal.n_atoms == 8 and kinds == []
    d = crystal.neighbour_shells()[0].distance_A
    assert d == pytest.approx(5.431 * np.sqrt(3) / 4, abs=1e-4)  # the Si–Si bond a√3/4


@pytest.mark.parametrize("symmetry", ["_symmetry_space_group_name_H-M 'F d -3 m'", "_space_group_IT_number 227"])
def test_unqualified_two_origin_group_says_which_choice_and_suggests_the_other(tmp_path, symmetry):
    # Si at 0,0,0 is origin choice 1's site: read in origin choice 2 it becomes 16 atoms 1.92 Å apart
    crystal, kinds = _read(_cif(tmp_path, symmetry, "Si1 Si 0 0 0"))
    assert crystal.n_atoms == 16
    assert kinds[0] == "origin_choice" and "origin_choice_suspect" in kinds
    # the symbol and the number are read the same way
    crystal2, kinds2 = _read(_cif(tmp_path, symmetry, "Si1 Si 0.125 0.125 0.125", name="y.cif"))
    assert crystal2.n_atoms == 8 and kinds2 == ["origin_choice"]


def test_strict_turns_an_assumed_origin_choice_into_an_error(tmp_path, capsys):
    p = _cif(tmp_path, "_symmetry_space_group_name_H-M 'F d -3 m'", "Si1 Si 0.125 0.125 0.125")
    assert main(["info", str(p)]) == 0
    assert "origin choice 2" in capsys.readouterr().err
    assert main(["info", "--strict", str(p)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--strict" in err[0] and "x.cif" in err[0]


@pytest.mark.parametrize("number", ["0", "999", "-3", "12.5"])
def test_space_group_number_outside_1_to_230_is_an_error(tmp_path, number):
    with pytest.raises(FormatError, match="230|not an integer"):
        read_structure(_cif(tmp_path, f"_space_group_IT_number {number}", "Al1 Al 0 0 0", a=4.05))


def test_file_without_symmetry_is_p1_with_a_warning(tmp_path):
    # a misspelt symbol tag is no symmetry at all: fcc Al's cubic cell then holds 1 atom, not 4
    crystal, kinds = _read(_cif(tmp_path, "_symmetry_space_group_name_H-N 'F m -3 m'", "Al1 Al 0 0 0", a=4.05))
    assert crystal.n_atoms == 1 and kinds == ["no_symmetry"]


def test_p1_written_by_screener_reads_back_without_warnings(tmp_path):
    from screener.structure.formats import write_structure

    crystal, _ = _read(_cif(tmp_path, "_space_group_IT_number 225", "Al1 Al 0 0 0", a=4.05))
    out = tmp_path / "out.cif"
    write_structure(crystal, out)
    back, kinds = _read(out)
    assert back.n_atoms == 4 and kinds == []


@pytest.mark.parametrize("ops, words", [
    (("x,y,z", "x+1/3,y,z"), "do not form a group"),       # x+2/3 missing
    (("x,y,z", "-x,-y,-z", "y,z,x"), "do not form a group"),  # -y,-z,-x missing
    (("x,y,z", "x,x,z"), "determinant"),                   # singular: not an isometry
])
def test_operator_list_that_is_not_a_group_is_an_error(tmp_path, ops, words):
    with pytest.raises(StructureError, match=words):
        read_structure(_cif(tmp_path, _ops(*ops), "Al1 Al 0.1 0.2 0.3", a=4.05))


def test_complete_operator_list_is_accepted(tmp_path):
    # P-1: identity and inversion, a group; a general site gives 2 atoms
    crystal, kinds = _read(_cif(tmp_path, _ops("x,y,z", "-x,-y,-z"), "Al1 Al 0.1 0.2 0.3", a=4.05))
    assert crystal.n_atoms == 2 and kinds == []


def test_operators_contradicting_the_stated_symbol_warn_and_win(tmp_path):
    sym = "_symmetry_space_group_name_H-M 'F m -3 m'\n" + _ops("x,y,z", "-x,-y,-z")
    crystal, kinds = _read(_cif(tmp_path, sym, "Al1 Al 0.1 0.2 0.3", a=4.05))
    assert crystal.n_atoms == 2 and kinds == ["symmetry_mismatch"]


def test_operators_matching_the_stated_symbol_are_silent(tmp_path):
    sym = "_symmetry_space_group_name_H-M 'P -1'\n" + _ops("x,y,z", "-x,-y,-z")
    _, kinds = _read(_cif(tmp_path, sym, "Al1 Al 0.1 0.2 0.3", a=4.05))
    assert kinds == []


def test_merged_listed_sites_appear_in_the_json(tmp_path, capsys):
    p = _cif(tmp_path, _ops("x,y,z"), "Bi1 Bi 0 0 0\nBi2 Bi 0.006 0 0\nBi3 Bi 0.5 0.5 0.5", a=5.5)
    assert main(["info", "--json", str(p)]) == 0
    out = capsys.readouterr()
    d = json.loads(out.out)
    assert d["n_atoms"] == 2
    assert d["merged_sites"][0]["labels"] == ["Bi1", "Bi2"]
    assert d["merged_sites"][0]["distance_A"] == pytest.approx(0.033, abs=1e-3)
    assert "Bi1 and Bi2" in out.err
    assert main(["info", "--strict", str(p)]) == 2


def test_covalent_radii_agree_with_a_reference_library():
    gemmi = pytest.importorskip("gemmi")
    # p-block and alkali values, where both follow Cordero et al. 2008 (gemmi's C is the sp2 value; ours sp3)
    for el in "B N O F Na Mg Al Si P S Cl K Ga Ge As Se Br Rb In Sn Sb Te I Cs Tl Pb Bi".split():
        assert COVALENT_RADIUS_A[el] == pytest.approx(gemmi.Element(el).covalent_r, abs=0.006), el


def test_short_contact_is_flagged_and_real_bonds_are_not(tmp_path):
    # Si pairs 1.2 Å apart (0.54 × 2.22 Å) are not a solid; the diamond Si–Si bond (1.06 ×) is fine
    crystal, kinds = _read(_cif(tmp_path, _ops("x,y,z"), "Si1 Si 0 0 0\nSi2 Si 0.3 0 0", a=4.0))
    assert "short_contact" in kinds
    assert short_contacts(crystal)[0][2] == pytest.approx(1.2, abs=1e-6)
    good, _ = _read(_cif(tmp_path, "_space_group_name_H-M_alt 'F d -3 m:1'", "Si1 Si 0 0 0", name="d.cif"))
    assert short_contacts(good) == []


def test_known_phases_read_without_doubts():
    # published structures (sources in known_phases.csv) must not trip any of these warnings
    from pathlib import Path

    files = sorted((Path(__file__).parents[1] / "data" / "known_phases").glob("*.cif"))
    assert files
    for f in files:
        _, kinds = _read(f)
        assert kinds == [], f.name


def test_short_contacts_are_flagged_in_json_files_too(tmp_path):
    import json as _json

    p = tmp_path / "close.json"
    p.write_text(_json.dumps({"lattice_A": (4.0 * np.eye(3)).tolist(), "sites": [
        {"element": "Si", "frac": [0, 0, 0]}, {"element": "Si", "frac": [0.3, 0, 0]}]}))
    _, kinds = _read(p)
    assert kinds == ["short_contact"]
