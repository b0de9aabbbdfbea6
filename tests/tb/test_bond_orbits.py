"""Bonds grouped by their symmetry orbits.

Sources: in simple cubic every nearest-neighbour bond is equivalent (6 per atom, one orbit); the A7 structure of
As has 3 short + 3 long bonds per atom, two orbits (Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): 2.517 and
3.120 Å — from memory); a dimerised chain has a short and a long bond (one each per cell, two orbits).
"""

from pathlib import Path

import numpy as np

from screener.structure.crystal import Crystal
from screener.structure.formats import read_structure
from screener.structure.symmetry import analyse
from screener.tb.bonds import bond_orbits, find_bonds

DATA = Path(__file__).parents[1] / "data"


def _orbits(crystal):
    b = find_bonds(crystal)
    sym = analyse(crystal)
    return b, bond_orbits(crystal, b.i, b.j, b.image, sym.rotations, sym.translations)


def test_simple_cubic_bonds_form_one_orbit_also_in_a_supercell():
    cube = Crystal(2.8 * np.eye(3), [[0, 0, 0]], ["As"])
    for c in (cube, cube.supercell([2, 2, 2])):
        _, labels = _orbits(c)
        assert len(set(labels)) == 1


def test_a7_arsenic_has_a_short_and_a_long_orbit():
    c = read_structure(DATA / "As_A7_hexagonal.cif")
    b, labels = _orbits(c)
    lengths = np.linalg.norm((c.frac[b.j] + b.image - c.frac[b.i]) @ c.lattice_A, axis=1)
    by_orbit = {o: np.round(lengths[labels == o], 3) for o in set(labels)}
    assert len(by_orbit) == 2
    assert sorted(float(v[0]) for v in by_orbit.values()) == [2.517, 3.12]
    for v in by_orbit.values():
        assert np.allclose(v, v[0])  # one length per orbit


def test_dimerised_chain_has_two_orbits():
    chain = Crystal(np.diag([5.0, 10.0, 10.0]), [[0, 0, 0], [0.45, 0, 0]], ["Sb", "Sb"])
    b = find_bonds(chain)
    sym = analyse(chain)
    labels = bond_orbits(chain, b.i, b.j, b.image, sym.rotations, sym.translations)
    assert len(b.i) == 2 and len(set(labels)) == 2
