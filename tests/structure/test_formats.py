"""Structure file formats: reading published structures, write-then-read round trips, format guessing and the
messages for malformed input."""

import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from screener import Crystal, read_structure, write_structure
from screener.errors import FormatError, StructureError
from screener.structure.formats import FORMATS, guess_format
from screener.structure.symmetry import analyse

DATA = Path(__file__).parents[1] / "data"
pytestmark = pytest.mark.filterwarnings("ignore:Set OLD_ERROR_HANDLING:DeprecationWarning")

# Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969), 299 K
AS_A, AS_C, AS_Z = 3.7598, 10.5475, 0.22707


def _metric(c: Crystal) -> np.ndarray:
    return c.lattice_A @ c.lattice_A.T


def _sorted_sites(c: Crystal):
    return sorted((s, *np.round(f, 8) % 1) for s, f in zip(c.species, c.frac, strict=True))


# ------------------------------------------------------------------------------------------ CIF
def test_cif_hexagonal_a7_with_uncertainties_and_operators():
    c = read_structure(DATA / "As_A7_hexagonal.cif")
    # cell values printed as 3.7598(1) etc.: the uncertainty is dropped, the value kept
    lengths = np.linalg.norm(c.lattice_A, axis=1)
    assert lengths == pytest.approx([AS_A, AS_A, AS_C], abs=1e-12)
    # R-centred hexagonal cell of No. 166 holds 6 atoms from 6c: (0,0,±z) + (2/3,1/3,1/3) + (1/3,2/3,2/3)
    # (International Tables A, No. 166)
    expected = []
    for t in ([0, 0, 0], [2 / 3, 1 / 3, 1 / 3], [1 / 3, 2 / 3, 2 / 3]):
        for z in (AS_Z, -AS_Z):
            expected.append(("As", *np.round((np.array([0, 0, z]) + t) % 1, 8) % 1))
    assert _sorted_sites(c) == sorted(expected)
    assert len(set(c.labels)) == 6 and all(lab.startswith("As1") for lab in c.labels)


def test_cif_symbol_only_equals_operator_loop():
    a = read_structure(DATA / "As_A7_hexagonal.cif")
    b = read_structure(DATA / "As_A7_hexagonal_symbol_only.cif")
    assert _sorted_sites(a) == _sorted_sites(b)


def test_cif_rhombohedral_setting_from_angles():
    c = read_structure(DATA / "As_A7_rhombohedral.cif")
    assert c.n_atoms == 2  # International Tables A, No. 166, rhombohedral axes: 2c (x,x,x) has 2 positions
    assert _sorted_sites(c) == sorted([("As", *np.round([AS_Z] * 3, 8)), ("As", *np.round([1 - AS_Z] * 3, 8))])


def test_cif_centring_from_symbol():
    c = read_structure(DATA / "Al_fcc_symbol_only.cif")
    # F centring: (0,0,0) + (0,½,½), (½,0,½), (½,½,0) (International Tables A, No. 225, 4a)
    assert _sorted_sites(c) == sorted([("Al", 0, 0, 0), ("Al", 0, 0.5, 0.5), ("Al", 0.5, 0, 0.5), ("Al", 0.5, 0.5, 0)])


def test_cif_duplicate_sites_merged():
    c = read_structure(DATA / "Po_simple_cubic_duplicate_sites.cif")
    assert c.n_atoms == 1 and c.labels == ("Po1",)


def test_cif_number_only():
    assert read_structure(DATA / "Po_simple_cubic_number_only.cif").n_atoms == 1


_CIF_HEAD = """data_t
_cell_length_a 4
_cell_length_b 4
_cell_length_c 4
_cell_angle_alpha 90
_cell_angle_beta 90
_cell_angle_gamma 90
"""
_SITES = """loop_
_atom_site_label
_atom_site_type_symbol
_atom_site_fract_x
_atom_site_fract_y
_atom_site_fract_z
_atom_site_occupancy
"""


@pytest.mark.parametrize(
    "text,error,message",
    [
        (_CIF_HEAD + _SITES + "Ge1 Ge 0 0 0 0.5\nTe1 Te 0.5 0.5 0.5 1\n", StructureError,
         "site Ge1 has occupancy 0.5: screener needs an ordered structure"),
        (_CIF_HEAD + _SITES + "Ge1 Ge 0 0 0 1\nTe1 Te 0.01 0 0 1\n", StructureError,
         r"sites Ge1 \(Ge\) and Te1 \(Te\) share one position: a mixed site"),
        (_CIF_HEAD.replace("_cell_length_b 4\n", "") + _SITES + "Ge1 Ge 0 0 0 1\n", FormatError,
         "missing _cell_length_b"),
        (_CIF_HEAD.replace("_cell_length_c 4", "_cell_length_c ?") + _SITES + "Ge1 Ge 0 0 0 1\n", FormatError,
         "_cell_length_c is '\\?', expected a number"),
        (_CIF_HEAD.replace("_cell_length_a 4", "_cell_length_a -4") + _SITES + "Ge1 Ge 0 0 0 1\n",
         StructureError, "cell lengths must be positive"),
        (_CIF_HEAD.replace("_cell_angle_gamma 90", "_cell_angle_gamma 180") + _SITES + "Ge1 Ge 0 0 0 1\n",
         StructureError, "_cell_angle_gamma is 180°"),
        (_CIF_HEAD.replace("alpha 90", "alpha 150").replace("beta 90", "beta 150").replace("gamma 90", "gamma 60")
         + _SITES + "Ge1 Ge 0 0 0 1\n", StructureError, "do not form a cell with positive volume"),
        (_CIF_HEAD + _SITES + "Q1 Qq 0 0 0 1\n", StructureError, "site Q1: unknown element symbol 'Qq'"),
        (_CIF_HEAD + _SITES + "Ge1 Ge 0 0 0 1\nGe2 Ge 0.1 0 0 1\n", StructureError, "closer than the minimum"),
        (_CIF_HEAD + "_symmetry_space_group_name_H-M 'Q 9 z'\n" + _SITES + "Ge1 Ge 0 0 0 1\n", FormatError,
         "space group 'Q 9 z' is not a Hermann–Mauguin or Hall symbol the CIF reader knows"),
        (_CIF_HEAD, FormatError, r"no _atom_site_fract_x/_y/_z loop"),
        ("data_t\n_cell_length_a 4\n_cell_length_b 'oops\n", FormatError, "not a readable CIF file: line 3"),
        ("# nothing but a comment\n", FormatError, "no data_ block found"),
        ("data_a\n_title x\n", FormatError, "no data block has a cell"),
    ],
    ids=["partial", "mixed", "missing-b", "unknown-c", "negative", "angle-180", "impossible-angles",
         "element", "overlap", "bad-symbol", "no-sites", "unterminated", "no-block", "no-cell"],
)
def test_cif_errors(tmp_path, text, error, message):
    path = tmp_path / "bad.cif"
    path.write_text(text)
    with pytest.raises(error, match=message) as exc:
        read_structure(path)
    assert str(exc.value).startswith(str(path))  # the registry names the file


def test_cif_block_choice(tmp_path):
    text = "data_first\n_title none\n" + _CIF_HEAD.replace("data_t", "data_second") + _SITES + "Te1 Te 0 0 0 1\n"
    path = tmp_path / "two.cif"
    path.write_text(text)
    assert read_structure(path).species == ("Te",)  # first block with a cell
    assert read_structure(path, block="second").species == ("Te",)
    with pytest.raises(FormatError, match="no data block named 'third'"):
        read_structure(path, block="third")


def test_cif_p1_listing_matches_symmetry_expansion():
    # the same A7 cell written twice: every atom listed in P1 (one at negative coordinates) and the asymmetric
    # unit of R-3m expanded by the reader (International Tables A, No. 166, 2c on rhombohedral axes)
    a = read_structure(DATA / "As_A7_rhombohedral_P1.cif")
    b = read_structure(DATA / "As_A7_rhombohedral.cif")
    assert np.linalg.eigvalsh(_metric(a)) == pytest.approx(np.linalg.eigvalsh(_metric(b)), abs=1e-4)
    assert _sorted_sites(a) == _sorted_sites(b)


# ------------------------------------------------------------------------------------------ JSON
def test_json_cartesian_sites_and_extra_keys(tmp_path):
    path = tmp_path / "s.json"
    path.write_text(json.dumps({"title": "x", "anything": 1, "lattice_A": (4 * np.eye(3)).tolist(),
                                "sites": [{"element": "Ge", "cart_A": [0, 0, 0]},
                                          {"element": "Te", "frac": [0.5, 0.5, 0.5]}]}))
    c = read_structure(path)
    assert c.species == ("Ge", "Te") and c.labels == ("Ge1", "Te2")


@pytest.mark.parametrize(
    "obj,message",
    [
        ([1, 2], "expected a JSON object"),
        ({"sites": []}, "missing field 'lattice_A'"),
        ({"lattice_A": [[1, 0, 0], [0, 1, 0]], "sites": [{}]}, r"'lattice_A' must have shape \(3, 3\)"),
        ({"lattice_A": (4 * np.eye(3)).tolist(), "sites": []}, "'sites' must be a non-empty list"),
        ({"lattice_A": (4 * np.eye(3)).tolist(), "sites": [{"frac": [0, 0, 0]}]}, r"sites\[0\]: missing field"),
        ({"lattice_A": (4 * np.eye(3)).tolist(), "sites": [{"element": "Ge"}]}, r"sites\[0\]: needs 'frac'"),
        ({"lattice_A": (4 * np.eye(3)).tolist(), "sites": [{"element": "Ge", "frac": "a"}]}, "must hold numbers"),
        ({"format": "other", "lattice_A": []}, "field 'format' is 'other'"),
    ],
)
def test_json_errors(tmp_path, obj, message):
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(obj))
    with pytest.raises(FormatError, match=message):
        read_structure(path)


def test_json_syntax_error(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text('{"lattice_A": [1, 2,')
    with pytest.raises(FormatError, match="not valid JSON: .* at line 1"):
        read_structure(path)


# ------------------------------------------------------------------------------------------ round trips
ROUND_TRIP = ["As_A7_hexagonal.cif", "As_A7_rhombohedral_P1.cif", "GeTe_rocksalt_primitive.cif",
              "Al_fcc_symbol_only.cif"]


@pytest.mark.parametrize("fmt,suffix", [("cif", "out.cif"), ("json", "out.json")])
@pytest.mark.parametrize("name", ROUND_TRIP)
def test_round_trip(tmp_path, name, fmt, suffix):
    original = read_structure(DATA / name)
    path = tmp_path / suffix
    write_structure(original, path)
    again = read_structure(path)
    assert guess_format(path) == fmt
    assert sorted(again.species) == sorted(original.species)
    # the CIF writer re-expresses the cell by lengths and angles: compare the metric, not the vectors
    assert _metric(again) == pytest.approx(_metric(original), abs=1e-8)
    shells = [(s.distance_A, s.count_per_atom) for s in original.neighbour_shells()]
    assert np.array([(s.distance_A, s.count_per_atom) for s in again.neighbour_shells()]) == pytest.approx(
        np.array(shells), abs=1e-8)
    assert analyse(again).number == analyse(original).number
    if fmt == "json":  # JSON keeps the Cartesian frame and the atom order
        assert again.lattice_A == pytest.approx(original.lattice_A, abs=1e-12)
        assert again.frac == pytest.approx(original.frac, abs=1e-12)
        assert again.labels == original.labels


_lattices = st.tuples(*[st.floats(-1.5, 1.5, allow_nan=False)] * 6, st.floats(3.0, 7.0))
_coords = st.lists(st.tuples(*[st.floats(0, 1, allow_nan=False, exclude_max=True)] * 3), min_size=1, max_size=4)


@settings(max_examples=20, derandomize=True, deadline=None)
@given(lat=_lattices, coords=_coords, fmt=st.sampled_from(["out.cif", "out.json"]))
def test_round_trip_random_triclinic(tmp_path_factory, lat, coords, fmt):
    # arbitrary (well-conditioned) triclinic cells and positions survive write -> read to printed precision
    off = np.array([[0, lat[0], lat[1]], [lat[2], 0, lat[3]], [lat[4], lat[5], 0]])
    lattice = lat[6] * np.eye(3) + off
    try:
        original = Crystal(lattice, coords, ["Sb"] * len(coords))
    except StructureError:
        assume(False)
    path = tmp_path_factory.mktemp("rt") / fmt
    write_structure(original, path)
    again = read_structure(path)
    assert _metric(again) == pytest.approx(_metric(original), abs=1e-6)
    assert again.frac == pytest.approx(original.frac, abs=1e-8)


# ------------------------------------------------------------------------------------------ format choice
@pytest.mark.parametrize("name,fmt", [("a.cif", "cif"), ("X.CIF", "cif"), ("s.json", "json")])
def test_guess_by_name(name, fmt):
    assert guess_format(name, sniff=False) == fmt


@pytest.mark.parametrize("text,fmt", [
    ('  {"lattice_A": []}', "json"),
    ("# comment\ndata_x\n_cell_length_a 4\n", "cif"),
    ("loop_\n_cell_length_a 4\n", "cif"),
])
def test_guess_by_content(tmp_path, text, fmt):
    path = tmp_path / "structure.txt"
    path.write_text(text)
    assert guess_format(path) == fmt


def test_text_that_is_neither_format_is_refused(tmp_path):
    # plain lines of numbers and symbols (no data_ line, no JSON object) are not guessed as anything
    path = tmp_path / "structure.txt"
    path.write_text("GeTe\n1.0\n4 0 0\n0 4 0\n0 0 4\nGe Te\n1 1\n0 0 0\n0.5 0.5 0.5\n")
    with pytest.raises(FormatError, match=r"unrecognised format: neither CIF .* nor screener JSON .*--format"):
        guess_format(path)


def test_unknown_name_without_file():
    with pytest.raises(FormatError, match="cannot tell the file format from the name"):
        guess_format("nowhere.xyz")


def test_format_override(tmp_path):
    path = tmp_path / "odd.dat"
    path.write_text(_CIF_HEAD + _SITES + "Ge1 Ge 0 0 0 1\nTe1 Te 0.5 0.5 0.5 1\n")
    assert read_structure(path, format="cif").species == ("Ge", "Te")
    with pytest.raises(FormatError, match="unknown format 'xyz'; choose one of"):
        read_structure(path, format="xyz")


def test_registry_lists_every_module():
    import importlib

    for fmt, (module, _) in FORMATS.items():
        mod = importlib.import_module(f"screener.structure.formats.{module}")
        assert callable(mod.read) and callable(mod.write), fmt


# ------------------------------------------------------------------------------------------ demo structures
DEMO = Path(__file__).parents[2] / "demo_structures"
# the symmetry each invented arrangement must have: simple cubic Pm-3m No. 221; a square net or an isolated
# chain in a tetragonal box P4/mmm No. 123; rocksalt Fm-3m No. 225 (International Tables A)
_DEMO_GROUPS = {"As_simple_cubic.cif": 221, "Te_simple_cubic.cif": 221, "Sb_linear_chain.cif": 123,
                "Sb_square_net.cif": 123, "GeTe_rocksalt.cif": 225}


def test_demo_structures_are_small_marked_and_symmetric():
    files = sorted(p.name for p in DEMO.iterdir() if p.suffix in (".cif", ".json"))
    assert files == sorted(_DEMO_GROUPS)
    for name, number in _DEMO_GROUPS.items():
        c = read_structure(DEMO / name)
        assert c.n_atoms <= 2
        assert "INVENTED" in (DEMO / name).read_text().splitlines()[0]
        assert analyse(c).number == number, name
