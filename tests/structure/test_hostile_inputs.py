"""Hostile structure files: each is read or rejected with one clear error naming the file, never a Python error.

Expected behaviour is common practice, no source, unless a standard is named.
"""

import json
import warnings

import numpy as np
import pytest

from screener.errors import FormatError, ScreenerError, ScreenerWarning, StructureError
from screener.structure.formats import read_structure

AL = """data_Al
_cell_length_a 4.0495
_cell_length_b 4.0495
_cell_length_c 4.0495
_cell_angle_alpha 90
_cell_angle_beta 90
_cell_angle_gamma 90
_symmetry_space_group_name_H-M 'F m -3 m'
loop_
_atom_site_label
_atom_site_type_symbol
_atom_site_fract_x
_atom_site_fract_y
_atom_site_fract_z
"""


def _write(tmp_path, name, data):
    p = tmp_path / name
    p.write_bytes(data if isinstance(data, bytes) else data.encode())
    return p


def test_cif_with_a_utf8_byte_order_mark_is_read(tmp_path):
    # a BOM is not part of the text (Unicode Standard, ch. 23.8); fcc Al has 4 atoms in the cubic cell
    p = _write(tmp_path, "bom.cif", b"\xef\xbb\xbf" + (AL + "Al1 Al 0 0 0\n").encode())
    assert read_structure(p).n_atoms == 4


def test_json_with_a_byte_order_mark_is_read(tmp_path):
    obj = {"lattice_A": [[3, 0, 0], [0, 3, 0], [0, 0, 3]], "sites": [{"element": "Po", "frac": [0, 0, 0]}]}
    p = _write(tmp_path, "bom.json", b"\xef\xbb\xbf" + json.dumps(obj).encode())
    assert read_structure(p).n_atoms == 1


@pytest.mark.parametrize("text", [
    '{"lattice_A": ' + "[" * 100000 + "1" + "]" * 100000 + ', "sites": []}',       # RecursionError before
    '{"lattice_A": [[' + "7" * 5000 + ', 0, 0], [0, 3, 0], [0, 0, 3]], "sites": []}',  # int-string limit
])
def test_pathological_json_is_a_format_error_naming_the_file(tmp_path, text):
    p = _write(tmp_path, "odd.json", text)
    with pytest.raises(ScreenerError, match="odd.json"):
        read_structure(p)


def test_symmetry_expansion_beyond_the_atom_limit_is_refused_before_the_work(tmp_path):
    rng = np.random.default_rng(0)
    rows = "".join(f"Al{i} Al {x:.5f} {y:.5f} {z:.5f}\n" for i, (x, y, z) in enumerate(rng.random((2500, 3))))
    p = _write(tmp_path, "many.cif", AL + rows)
    with pytest.raises(StructureError, match="--max-atoms"):
        read_structure(p)


def test_thousands_of_sites_merge_correctly_in_p1(tmp_path):
    # 4,400 sites on a 11 x 20 x 20 grid of a P1 cell, every site listed twice: the merge keeps each once
    grid = np.stack(np.meshgrid(np.arange(11) / 11, np.arange(20) / 20, np.arange(20) / 20, indexing="ij"), -1)
    grid = grid.reshape(-1, 3)
    text = AL.replace("'F m -3 m'", "'P 1'").replace("4.0495", "40.0")
    rows = "".join(f"Na{i} Na {x:.6f} {y:.6f} {z:.6f}\n" for i, (x, y, z) in enumerate(np.vstack([grid, grid])))
    p = _write(tmp_path, "grid.cif", text + rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ScreenerWarning)
        c = read_structure(p, max_atoms=5000)
    assert c.n_atoms == 4400


def test_distinct_sites_merged_within_the_tolerance_give_a_warning(tmp_path):
    # two Al sites 0.134 Å apart (less than the 0.2 Å merge tolerance) become one atom, and the user is told
    p = _write(tmp_path, "close.cif", AL + "Al1 Al 0 0 0\nAl2 Al 0.0331 0 0\n")
    with pytest.warns(ScreenerWarning, match="Al1 and Al2"):
        assert read_structure(p).n_atoms == 4


def test_mixed_site_is_still_an_error(tmp_path):
    p = _write(tmp_path, "mixed.cif", AL + "Al1 Al 0 0 0\nCu1 Cu 0 0 0\n")
    with pytest.raises(StructureError, match="Al1 .*Cu1.*mixed site"):
        read_structure(p)


def test_binary_garbage_is_a_format_error(tmp_path):
    p = _write(tmp_path, "garbage.cif", bytes(range(256)) * 4)
    with pytest.raises(FormatError, match="garbage.cif"):
        read_structure(p)


@pytest.mark.parametrize("occ", ["0,5", "half", "2", "1.5"])
def test_unparseable_or_excess_occupancy_is_an_error_naming_the_site(tmp_path, occ):
    # occupancy is a fraction 0..1 (IUCr CIF dictionary, _atom_site_occupancy)
    text = AL + "_atom_site_occupancy\nAl1 Al 0 0 0 " + occ + "\n"
    with pytest.raises(ScreenerError, match="site Al1: occupancy"):
        read_structure(_write(tmp_path, "occ.cif", text))


@pytest.mark.parametrize("occ", ["?", "."])
def test_null_occupancy_means_unknown_and_reads_as_full(tmp_path, occ):
    # '?' and '.' are the CIF 1.1 null values (IUCr CIF 1.1 syntax specification)
    text = AL + "_atom_site_occupancy\nAl1 Al 0 0 0 " + occ + "\n"
    assert read_structure(_write(tmp_path, "occ.cif", text)).n_atoms == 4


@pytest.mark.parametrize("x", ["1e6", "1e20", "-11"])
def test_coordinates_far_outside_the_cell_are_an_error(tmp_path, x):
    with pytest.raises(StructureError, match="site Al1: fractional coordinate x"):
        read_structure(_write(tmp_path, "far.cif", AL + f"Al1 Al {x} 0 0\n"))


def test_cell_vector_beyond_1000_A_is_an_error(tmp_path):
    # 1e10-1e20 Å cells made the neighbour search explode or lose every bond to rounding; common practice, no source
    for length in (1e4, 1e10, 1e20):
        p = _write(tmp_path, "huge.json", json.dumps(
            {"lattice_A": [[length, 0, 0], [0, length, 0], [0, 0, length]], "sites": [{"element": "As", "frac": [0, 0, 0]}]}))
        with pytest.raises(StructureError, match="longer than 1000"):
            read_structure(p)


def test_json_position_far_outside_the_cell_is_an_error_not_wrapped(tmp_path):
    # 1e6 would wrap to 0 and silently land on another atom
    p = _write(tmp_path, "far.json", json.dumps({"lattice_A": [[4, 0, 0], [0, 4, 0], [0, 0, 4]], "sites": [
        {"element": "As", "frac": [0, 0, 0]}, {"element": "As", "frac": [1e6, 0.5, 0.5]}]}))
    with pytest.raises(StructureError, match="outside -10..10"):
        read_structure(p)


def test_single_atom_site_tag_beside_a_loop_is_named(tmp_path):
    text = AL.replace("loop_\n_atom_site_label\n_atom_site_type_symbol", "_atom_site_type_symbol Al\nloop_\n_atom_site_label")
    p = _write(tmp_path, "single.cif", text + "Al1 0 0 0\nAl2 0.5 0.5 0.5\n")
    with pytest.raises(FormatError, match="_atom_site_type_symbol has 1 value"):
        read_structure(p)


def test_symmetry_tolerance_beyond_half_the_shortest_contact_is_refused():
    # atoms within the tolerance of each other cannot be told apart (common practice, no source)
    from screener.errors import SymmetryError
    from screener.structure.crystal import Crystal
    from screener.structure.symmetry import analyse

    c = Crystal(np.eye(3) * 4, [[0, 0, 0], [0.5, 0.5, 0.5]], ["As", "As"])
    assert analyse(c, 0.5).number == 229  # bcc, contact 3.46 Å
    with pytest.raises(SymmetryError, match="half the shortest contact"):
        analyse(c, 2.0)
