"""Candidate distortion generators: geometry and symmetry of the products."""

import numpy as np
import pytest

from screener.errors import ParameterError
from screener.screen.generators import (
    commensurate_supercell,
    default_candidates,
    dimerise,
    follow_bonds,
    modulate,
    rhombohedral_split,
)
from screener.structure.crystal import Crystal
from screener.structure.neighbours import nearest_neighbour_bonds
from screener.structure.symmetry import analyse


def simple_cubic(a=2.78, el="As"):
    return Crystal(np.eye(3) * a, [[0, 0, 0]], [el])


def bond_lengths(family, amplitude):
    crystal, shift = family.at_with_shift(amplitude)
    nl = nearest_neighbour_bonds(family.reference)
    img = follow_bonds(nl.i, nl.j, nl.image, shift)
    return np.linalg.norm((crystal.frac[nl.j] + img - crystal.frac[nl.i]) @ crystal.lattice_A, axis=1), nl.i


def test_rhombohedral_split_of_simple_cubic_is_A7_type():
    (fam,) = rhombohedral_split(simple_cubic())
    crystal = fam.at(0.2)
    sym = analyse(crystal)
    # International Tables for Crystallography A: R-3m is No. 166 (the A7 alpha-As type)
    assert (sym.symbol, sym.number) == ("R-3m", 166)
    assert crystal.n_atoms == 2 and sym.primitive_atoms == 2
    d, i = bond_lengths(fam, 0.2)
    # every site: 3 short + 3 long bonds; neighbours move by -/+ 2u along [111]/sqrt(3), so a bond along x becomes
    # (a -/+ w, -/+ w, -/+ w) with w = 2u/sqrt(3) (geometry of the simple-cubic lattice, common practice, no source)
    w = 2 * 0.2 / np.sqrt(3)
    for site in range(crystal.n_atoms):
        ds = np.sort(d[i == site])
        assert np.allclose(ds[:3], np.sqrt((2.78 - w) ** 2 + 2 * w**2), atol=1e-9)
        assert np.allclose(ds[3:], np.sqrt((2.78 + w) ** 2 + 2 * w**2), atol=1e-9)
    assert np.allclose(np.max(np.linalg.norm(fam.pattern_A, axis=1)), 1.0)


def test_rocksalt_split_gives_ferroelectric_R3m_with_same_cell():
    # alpha-GeTe is the rocksalt structure distorted along [111], space group R3m, No. 160
    # (Chattopadhyay, Boucherle & von Schnering, J. Phys. C 20, 1431 (1987); from memory)
    a = 6.0
    lat = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * a
    gete = Crystal(lat, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Ge", "Te"])
    (fam,) = rhombohedral_split(gete)
    assert fam.n_atoms == 2 and fam.q_label == "(0, 0, 0)"
    sym = analyse(fam.at(0.15))
    assert (sym.symbol, sym.number) == ("R3m", 160)


def test_chain_dimerisation_alternates_bonds_and_doubles_cell():
    chain = Crystal(np.diag([1.22, 10.0, 10.0]), [[0, 0, 0]], ["C"])
    (fam,) = dimerise(chain)
    assert fam.n_atoms == 2
    assert fam.q_label == "(1/2, 0, 0)"
    d, _ = bond_lengths(fam, 0.04)
    # alternating bonds a -/+ 2u (Su, Schrieffer & Heeger, PRB 22, 2099 (1980), eq. for bond lengths)
    assert np.allclose(np.unique(d.round(6)), [1.22 - 0.08, 1.22 + 0.08])


def test_dimerise_finds_one_direction_per_symmetry_class():
    # square net: one bond class (a = b); rectangular net: two classes (common practice, no source)
    square = Crystal(np.diag([3.0, 3.0, 10.0]), [[0, 0, 0]], ["Sb"])
    rect = Crystal(np.diag([3.0, 3.3, 10.0]), [[0, 0, 0]], ["Sb"])
    assert len(dimerise(square)) == 1
    assert len(nearest_neighbour_bonds(rect).i) == 2  # only the 3.0 Å bonds are in the first shell (5 % tolerance)
    assert len(dimerise(simple_cubic())) == 1


def test_default_candidates_drop_symmetry_duplicates():
    fams = default_candidates(simple_cubic())
    labels = [(f.generator, f.q_label) for f in fams]
    # X (dimerise), R (rhombohedral split) and M (modulate) are the three zone-boundary stars of the
    # simple-cubic Brillouin zone (Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010), CUB)
    assert labels == [("dimerise", "(1/2, 0, 0)"), ("rhombohedral-split", "(1/2, 1/2, 1/2)"),
                      ("modulate", "(0, 1/2, 1/2)")]


def test_isolated_chain_gets_no_modulation_across_vacuum():
    chain = Crystal(np.diag([1.22, 10.0, 10.0]), [[0, 0, 0]], ["C"])
    fams = default_candidates(chain)
    assert [f.generator for f in fams] == ["dimerise"]


@pytest.mark.parametrize("q, index", [((1 / 2, 0, 0), 2), ((1 / 3, 0, 0), 3), ((1 / 4, 1 / 4, 0), 4),
                                      ((1 / 2, 1 / 2, 1 / 2), 2), ((0, 0, 0), 1)])
def test_commensurate_supercell_index(q, index):
    m = commensurate_supercell(q, np.eye(3) * 3)
    # the supercell holds exp(2πi q·n) = 1 on its lattice vectors and has the smallest index N/gcd
    assert round(np.linalg.det(m)) == index
    assert np.allclose(np.mod(m @ np.array(q) + 1e-9, 1.0), 0, atol=1e-6)


def test_modulate_third_period_and_errors():
    fam = modulate(simple_cubic(), (1 / 3, 0, 0))
    assert fam.n_atoms == 3
    disp = fam.pattern_A[:, 0]
    # cos(2π n/3) for n = 0, 1, 2 normalised to the largest: 1, -1/2, -1/2
    assert np.allclose(np.sort(disp), [-0.5, -0.5, 1.0])
    with pytest.raises(ParameterError, match="not commensurate"):
        modulate(simple_cubic(), (0.123456, 0, 0))
    with pytest.raises(ParameterError, match="needs q ≠ 0"):
        modulate(simple_cubic(), (0, 0, 0))
    with pytest.raises(ParameterError, match="unknown generator 'twist'"):
        default_candidates(simple_cubic(), generators=["twist"])
