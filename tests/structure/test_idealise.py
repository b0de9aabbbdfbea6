"""Finding the higher-symmetry parent of an observed structure."""

import numpy as np
import pytest

from screener import read_structure
from screener.errors import StructureError
from screener.structure.crystal import Crystal
from screener.structure.idealise import find_parents, parent_primitive

DATA = "tests/data/"


def _summary(search):
    return [(c.space_group_symbol, c.index, c.primitive_atoms) for c in search.chain]


def test_a7_arsenic_parent_is_simple_cubic():
    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): A7 As, R-3m, x = 0.227, alpha_r = 54.1 deg
    s = find_parents(read_structure(DATA + "As_A7_rhombohedral.cif"))
    assert s.observed_symbol == "R-3m"
    # International Tables for Crystallography A1: Pm-3m > R-3m (t-index 4) and the halved cell (k-index 2):
    # index 8; the chain passes through the one-atom R-3m cell (index 2)
    assert _summary(s) == [("R-3m", 2, 1), ("Pm-3m", 8, 1)]
    top = s.highest
    # displacement from x = 1/4 is 0.023 of the 10.1 A body diagonal (from the cell above)
    assert 0.15 < top.max_displacement_A < 0.3
    assert top.max_strain < 0.08
    prim = parent_primitive(top)
    assert prim.n_atoms == 1
    a = np.linalg.norm(prim.lattice_A, axis=1)
    assert np.allclose(a, a[0], rtol=1e-6)
    assert np.allclose(prim.lattice_A @ prim.lattice_A.T, np.diag(a**2), atol=1e-6)


@pytest.mark.parametrize("name", ["As_A7_hexagonal.cif", "As_A7_rhombohedral_P1.cif"])
def test_parent_independent_of_setting(name):
    ref = find_parents(read_structure(DATA + "As_A7_rhombohedral.cif"))
    other = find_parents(read_structure(DATA + name))
    assert _summary(other) == _summary(ref)
    assert other.highest.max_displacement_A == pytest.approx(ref.highest.max_displacement_A, abs=1e-6)
    assert parent_primitive(other.highest).volume_A3 == pytest.approx(parent_primitive(ref.highest).volume_A3,
                                                                       rel=1e-6)


def test_parent_independent_of_origin_and_atom_order():
    c = read_structure(DATA + "As_A7_hexagonal.cif")
    rng = np.random.default_rng(11)
    shifted = Crystal(c.lattice_A, c.frac + rng.random(3), c.species)
    order = rng.permutation(c.n_atoms)
    permuted = Crystal(c.lattice_A, c.frac[order], [c.species[k] for k in order])
    ref = find_parents(c)
    for other in (find_parents(shifted), find_parents(permuted)):
        assert _summary(other) == _summary(ref)
        assert other.highest.max_displacement_A == pytest.approx(ref.highest.max_displacement_A, abs=1e-6)


def test_undistorted_structure_has_no_parent():
    # simple cubic is its own highest-symmetry structure: nothing above it (International Tables A, No. 221)
    s = find_parents(read_structure(DATA + "known_phases/As_simple_cubic_parent.cif"))
    assert s.chain == ()
    with pytest.raises(StructureError, match="no structure of higher symmetry"):
        s.highest


def test_limits_are_respected():
    # with a displacement limit below the 0.23 A of A7 As, the cubic parent is out of reach
    s = find_parents(read_structure(DATA + "As_A7_rhombohedral.cif"), max_displacement_A=0.1)
    assert s.chain == ()
    with pytest.raises(StructureError, match="strain limit"):
        find_parents(read_structure(DATA + "As_A7_rhombohedral.cif"), max_strain=0.9)
