"""Space groups, Wyckoff positions and primitive cells of reference structures, checked against International
Tables for Crystallography Vol. A (ITA) numbering; invariance of the space group under rigid motions and
relabelling (hypothesis property tests with a fixed seed)."""

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from screener import Crystal, read_structure
from screener.bz.kmesh import irreducible_mesh
from screener.errors import SymmetryError
from screener.structure.symmetry import analyse, primitive_cell, standard_cell

DATA = Path(__file__).parents[1] / "data"
# spglib >= 2.5 warns about its legacy error handling on every call; screener.structure.symmetry checks return values
pytestmark = pytest.mark.filterwarnings("ignore:Set OLD_ERROR_HANDLING:DeprecationWarning")

# (file, ITA number, Hermann–Mauguin symbol, atoms in the primitive cell)
REFERENCE = [
    # International Tables A, No. 166 (R-3m); A7 As has 2 atoms per rhombohedral primitive cell
    ("As_A7_hexagonal.cif", 166, "R-3m", 2),
    ("As_A7_hexagonal_symbol_only.cif", 166, "R-3m", 2),
    ("As_A7_rhombohedral.cif", 166, "R-3m", 2),
    ("As_A7_rhombohedral_P1.cif", 166, "R-3m", 2),
    # International Tables A, No. 225 (Fm-3m); fcc has 1 atom per primitive cell
    ("Al_fcc_symbol_only.cif", 225, "Fm-3m", 1),
    # International Tables A, No. 221 (Pm-3m)
    ("Po_simple_cubic_number_only.cif", 221, "Pm-3m", 1),
    ("Po_simple_cubic_duplicate_sites.cif", 221, "Pm-3m", 1),
    # International Tables A, No. 227 (Fd-3m); diamond has 2 atoms per primitive cell
    ("Si_diamond_primitive.cif", 227, "Fd-3m", 2),
    ("Si_diamond_conventional.cif", 227, "Fd-3m", 2),
    # International Tables A, No. 225: rocksalt (NaCl type) is Fm-3m with 2 atoms per primitive cell
    ("GeTe_rocksalt_primitive.cif", 225, "Fm-3m", 2),
]


def _load(name):
    return read_structure(DATA / name)


@pytest.mark.parametrize("name,number,symbol,n_prim", REFERENCE, ids=[r[0] for r in REFERENCE])
def test_space_group_of_reference_structures(name, number, symbol, n_prim):
    info = analyse(_load(name))
    assert (info.number, info.symbol, info.primitive_atoms) == (number, symbol, n_prim)


@pytest.mark.parametrize("matrix", [(2, 1, 1), (1, 2, 3), [[1, 1, 0], [-1, 1, 0], [0, 0, 1]]],
                         ids=["2x1x1", "1x2x3", "rotated-2"])
@pytest.mark.parametrize("name,number,symbol,n_prim", REFERENCE[::2] + REFERENCE[7:8],
                         ids=[r[0] for r in REFERENCE[::2] + REFERENCE[7:8]])
def test_supercell_keeps_space_group_and_primitive_size(name, number, symbol, n_prim, matrix):
    # a supercell describes the same crystal: same ITA number, same primitive cell (ITA, any space group)
    crystal = _load(name).supercell(matrix)
    info = analyse(crystal)
    assert (info.number, info.primitive_atoms) == (number, n_prim)


def test_wyckoff_letters_of_a7_and_fcc():
    # International Tables A, No. 166: (0,0,z) is Wyckoff position c, site symmetry 3m
    assert set(analyse(_load("As_A7_hexagonal.cif")).wyckoff) == {"c"}
    assert set(analyse(_load("As_A7_rhombohedral.cif")).wyckoff) == {"c"}
    # International Tables A, No. 225: (0,0,0) is Wyckoff position a, site symmetry m-3m
    assert set(analyse(_load("Al_fcc_symbol_only.cif")).wyckoff) == {"a"}
    # International Tables A, No. 227: the diamond sites are 8a or, after an origin shift of the Euclidean
    # normaliser, 8b; either way one orbit
    info = analyse(_load("Si_diamond_primitive.cif"))
    assert len(set(info.wyckoff)) == 1 and info.wyckoff[0] in ("a", "b")
    assert len(set(info.equivalent_atoms)) == 1


def test_rocksalt_has_two_orbits():
    # International Tables A, No. 225: rocksalt cations on 4a, anions on 4b
    info = analyse(_load("GeTe_rocksalt_primitive.cif"))
    assert sorted(info.wyckoff) == ["a", "b"]


def test_hexagonal_and_rhombohedral_settings_give_same_primitive_cell():
    # the rhombohedral cell is the primitive cell of the hexagonal one (ITA Vol. A, Table 5.1.3.1 R-centring):
    # same volume per atom and the same lattice-vector lengths after reduction
    hexa = primitive_cell(_load("As_A7_hexagonal.cif"))
    rhom = primitive_cell(_load("As_A7_rhombohedral_P1.cif"))
    assert hexa.n_atoms == rhom.n_atoms == 2
    assert hexa.volume_A3 == pytest.approx(rhom.volume_A3, rel=1e-6)
    assert sorted(np.linalg.norm(hexa.lattice_A, axis=1)) == pytest.approx(
        sorted(np.linalg.norm(rhom.lattice_A, axis=1)), rel=1e-6)


def test_standard_cell_of_rhombohedral_input_is_hexagonal():
    # ITA convention for R groups: the conventional cell is the triple hexagonal cell (obverse), 6 atoms for A7
    std = standard_cell(_load("As_A7_rhombohedral.cif"))
    assert std.n_atoms == 6
    a, b, c = np.linalg.norm(std.lattice_A, axis=1)
    assert (a, b, c) == pytest.approx((3.7598, 3.7598, 10.5475), abs=1e-4)  # Schiferl & Barrett (1969)


def test_symmetry_lowered_by_dimerisation():
    # pairing the atoms of sc Po along z (one atom moved in a 1x1x2 cell) keeps an inversion centre at the middle
    # of each pair: International Tables A, No. 123 P4/mmm, both atoms on 2g (0,0,z)
    crystal = _load("Po_simple_cubic_number_only.cif").supercell((1, 1, 2))
    moved = crystal.replace(frac=crystal.frac + np.array([[0, 0, 0], [0, 0, 0.03]]))
    info = analyse(moved)
    assert (info.number, info.symbol, info.wyckoff) == (123, "P4/mmm", ("g", "g"))
    # three unequal spacings along a 1x1x3 chain (gaps 0.353, 0.363, 0.283 c) have no inversion centre:
    # P4mm, International Tables A, No. 99
    three = _load("Po_simple_cubic_number_only.cif").supercell((1, 1, 3))
    moved3 = three.replace(frac=three.frac + np.array([[0, 0, 0], [0, 0, 0.02], [0, 0, 0.05]]))
    assert analyse(moved3).number == 99


def test_bad_symprec():
    with pytest.raises(SymmetryError, match="symprec must be a positive"):
        analyse(_load("Al_fcc_symbol_only.cif"), symprec=0.0)


@pytest.mark.parametrize("step,message", [
    (lambda c: analyse(c, symprec=1.0), "the symmetry tolerance 1 Å is not below half the shortest contact of Ge2"),
    (lambda c: primitive_cell(c, symprec=1.0), "the symmetry tolerance 1 Å is not below half the shortest contact"),
    (lambda c: standard_cell(c, symprec=1.0), "the symmetry tolerance 1 Å is not below half the shortest contact"),
    (lambda c: irreducible_mesh(c, (4, 4, 4), symprec=1.0), r"could not reduce the \(4, 4, 4\) k-mesh of Ge2"),
], ids=["dataset", "primitive", "standard", "mesh"])
def test_failed_symmetry_search_says_what_to_try(step, message):
    # two like atoms 0.8 Å apart under a 1 Å tolerance: the search cannot tell them apart and gives up
    # (common practice, no source); the message is in the tool's words and points at a smaller tolerance
    crystal = Crystal(4.0 * np.eye(3), [[0, 0, 0], [0.2, 0, 0]], ["Ge", "Ge"])
    with pytest.raises(SymmetryError, match=message + ".*smaller --symprec") as exc:
        step(crystal)
    assert "spglib" not in str(exc.value)


def test_irreducible_mesh_weights_match_full_mesh():
    # reference: spglib's own grid mapping; every full-mesh point is counted once (sum of weights = 1 and the
    # multiplicities add up to the number of mesh points)
    crystal = _load("As_A7_rhombohedral_P1.cif")
    mesh = irreducible_mesh(crystal, (6, 6, 6))
    assert mesh.weights.sum() == pytest.approx(1.0)
    assert len(mesh.kfrac_full) == 216
    assert np.all(np.round(mesh.weights * 216) >= 1)
    assert len(mesh.kfrac) < 216 // 6  # point group -3m has 12 operations (ITA No. 166)
    full = irreducible_mesh(crystal, (6, 6, 6), use_symmetry=False)
    assert len(full.kfrac) == 216


# --------------------------------------------------------------------------------- property tests
_PROPERTY_CASES = ["As_A7_rhombohedral_P1.cif", "Si_diamond_primitive.cif", "GeTe_rocksalt_primitive.cif"]
_EXPECTED = {"As_A7_rhombohedral_P1.cif": 166, "Si_diamond_primitive.cif": 227,
             "GeTe_rocksalt_primitive.cif": 225}  # ITA numbers, as above


def _rotation(angles):
    a, b, c = angles
    rz = np.array([[np.cos(a), -np.sin(a), 0], [np.sin(a), np.cos(a), 0], [0, 0, 1]])
    ry = np.array([[np.cos(b), 0, np.sin(b)], [0, 1, 0], [-np.sin(b), 0, np.cos(b)]])
    rx = np.array([[1, 0, 0], [0, np.cos(c), -np.sin(c)], [0, np.sin(c), np.cos(c)]])
    return rz @ ry @ rx


@settings(max_examples=15, derandomize=True, deadline=None)
@given(
    name=st.sampled_from(_PROPERTY_CASES),
    angles=st.tuples(*[st.floats(-np.pi, np.pi, allow_nan=False)] * 3),
    shift=st.tuples(*[st.floats(-1, 1, allow_nan=False)] * 3),
)
def test_space_group_invariant_under_rotation_and_translation(name, angles, shift):
    # a rigid motion does not change the crystal, so the ITA number cannot change
    crystal = _load(name)
    rot = _rotation(angles)
    moved = Crystal(crystal.lattice_A @ rot.T, crystal.frac + np.asarray(shift), crystal.species)
    assert analyse(moved).number == _EXPECTED[name]


@settings(max_examples=15, derandomize=True, deadline=None)
@given(name=st.sampled_from(_PROPERTY_CASES), seed=st.integers(0, 2**16))
def test_space_group_invariant_under_atom_reordering(name, seed):
    # atom order is bookkeeping; use a 2x2x1 supercell so there is something to shuffle
    crystal = _load(name).supercell((2, 2, 1))
    perm = np.random.default_rng(seed).permutation(crystal.n_atoms)
    shuffled = Crystal(crystal.lattice_A, crystal.frac[perm], [crystal.species[k] for k in perm])
    info = analyse(shuffled)
    assert info.number == _EXPECTED[name]
    assert info.primitive_atoms == analyse(crystal).primitive_atoms


def test_primitive_cell_of_a_supercell_keeps_every_rotation_of_the_crystal():
    # fcc Al (point group m-3m, order 48: International Tables A) written as a 2×1×1 cell of its primitive cell:
    # that lattice maps onto itself under only 12 of the 48 rotations, and the cell's own symmetry search lists
    # only those; the standardised primitive cell must carry all 48 again
    from screener.structure.symmetry import standardise

    fcc = _load("Al_fcc_symbol_only.cif")
    prim, _ = standardise(fcc, analyse(fcc))
    skewed = prim.crystal.supercell(np.diag([2, 1, 1]))
    info = analyse(skewed)
    assert info.number == 225 and len(np.unique(info.rotations, axis=0)) == 12
    std, prim_info = standardise(skewed, info)
    assert std.crystal.n_atoms == 1 and len(np.unique(prim_info.rotations, axis=0)) == 48
