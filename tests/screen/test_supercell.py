"""Commensurate supercells: a direct construction of {n : q·n ∈ Z} instead of a search over a box of candidates.

The reference below is the previous implementation (a search over every n with |n_i| ≤ index), kept here to check
that the direct construction gives the same supercells on the common cases: the same index and rows at least as
short. Its cost grows as (2 index + 1)³, so it is only run on small indices.
"""

import itertools
from fractions import Fraction

import numpy as np
import pytest

from screener.screen.generators import commensurate_supercell


def previous_commensurate_supercell(q, lattice_A):
    """The previous implementation of commensurate_supercell (box search), kept as the reference."""
    fr = [Fraction(float(x)).limit_denominator(12) for x in q]
    den = int(np.lcm.reduce([f.denominator for f in fr]))
    num = np.array([int(f * den) for f in fr])
    index = den // int(np.gcd.reduce(np.append(num, den)))
    if index == 1:
        return np.eye(3, dtype=int)
    span = range(-index, index + 1)
    cands = np.array([n for n in itertools.product(span, span, span) if any(n)])
    cands = cands[np.mod(cands @ num, den) == 0]
    lengths = np.linalg.norm(cands @ np.asarray(lattice_A, dtype=float), axis=1)
    cands = cands[np.lexsort((np.abs(cands).sum(1), lengths))]
    for a, b in itertools.combinations(range(min(len(cands), 40)), 2):
        v1, v2 = cands[a], cands[b]
        if np.linalg.norm(np.cross(v1, v2)) < 1e-9:
            continue
        for v3 in cands:
            d = round(float(np.linalg.det(np.array([v1, v2, v3]))))
            if abs(d) == index:
                return np.array([v1, v2, v3 if d > 0 else -v3])
    raise AssertionError("no supercell")


def _rhombohedral(a, alpha_deg):
    """Rhombohedral cell of edge a and angle alpha, symmetric about z (textbook construction, from memory)."""
    c = np.cos(np.radians(alpha_deg))
    tz = np.sqrt((1 + 2 * c) / 3)
    r = np.sqrt(1 - tz**2)
    return np.array([[r * np.cos(t), r * np.sin(t), tz] for t in (0, 2 * np.pi / 3, 4 * np.pi / 3)]) * a


LATTICES = {
    "simple cubic": np.eye(3) * 3.0,
    "fcc primitive": np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * 5.6,
    "bcc primitive": np.array([[-0.5, 0.5, 0.5], [0.5, -0.5, 0.5], [0.5, 0.5, -0.5]]) * 3.3,
    "hexagonal": np.array([[3.0, 0, 0], [-1.5, 1.5 * np.sqrt(3), 0], [0, 0, 4.9]]),
    "rhombohedral 57°": _rhombohedral(4.1, 57.0),
    "rhombohedral 100°": _rhombohedral(3.4, 100.0),
}

QS = ([h for h in itertools.product((0, 0.5), repeat=3)]
      + [(1 / 3, 0, 0), (0, 0, 1 / 3), (1 / 3, 1 / 3, 0), (1 / 3, 1 / 3, 1 / 3), (1 / 3, 2 / 3, 0),
         (1 / 4, 0, 0), (0, 1 / 4, 1 / 4), (1 / 4, 1 / 4, 1 / 4), (1 / 2, 1 / 4, 0),
         (2 / 3, 0, 0), (2 / 3, 2 / 3, 0), (2 / 3, 1 / 3, 1 / 3), (1 / 3, 1 / 4, 0)])


def _check_cell(m, q, index):
    # the definition of the commensurate supercell: integer rows with q·n ∈ Z, det M = +index
    assert m.dtype.kind == "i"
    assert round(np.linalg.det(m)) == index
    assert np.allclose(np.mod(m @ np.asarray(q, dtype=float) + 1e-9, 1.0), 0, atol=1e-6)


@pytest.mark.parametrize("name", LATTICES)
@pytest.mark.parametrize("q", QS, ids=lambda q: ",".join(str(Fraction(x).limit_denominator(12)) for x in q))
def test_same_supercell_as_previous_implementation(name, q):
    lattice = LATTICES[name]
    new = commensurate_supercell(q, lattice)
    old = previous_commensurate_supercell(q, lattice)
    index = round(np.linalg.det(old))
    _check_cell(new, q, index)
    # expectation: the previous implementation (reference above); rows as short or shorter, to round-off
    new_len = np.sort(np.linalg.norm(new @ lattice, axis=1))
    old_len = np.sort(np.linalg.norm(old @ lattice, axis=1))
    assert np.all(new_len <= old_len + 1e-9)


def test_large_index_is_exact():
    # q = (1/11, 1/12, 0): n₁/11 + n₂/12 ∈ Z needs 11 | n₁ and 12 | n₂ (gcd(11, 12) = 1), so the index is
    # 11·12 = 132 and, on a cubic lattice, the shortest rows are 3 Å (along z), 33 Å and 36 Å (arithmetic)
    lattice = np.eye(3) * 3.0
    q = (1 / 11, 1 / 12, 0)
    m = commensurate_supercell(q, lattice)
    _check_cell(m, q, 132)
    assert np.allclose(np.sort(np.linalg.norm(m @ lattice, axis=1)), [3.0, 33.0, 36.0])
    # (its time — the previous box search took about 10 s and 1.9 GB — is printed by benchmarks/supercell.py)


@pytest.mark.parametrize("q, index", [((1 / 11, 1 / 10, 1 / 9), 990), ((1 / 7, 2 / 11, 5 / 12), 924),
                                      ((5 / 12, 0, 0), 12), ((0, 0, 7 / 12), 12)])
def test_index_of_larger_denominators(q, index):
    # index = lcm of the denominators / gcd of the numerators with it (arithmetic of q·n ∈ Z)
    for lattice in LATTICES.values():
        m = commensurate_supercell(q, lattice)
        _check_cell(m, q, index)
        # no row is longer than needed: each is at most the length of index·(a lattice vector)
        assert np.max(np.linalg.norm(m @ lattice, axis=1)) <= index * np.max(np.linalg.norm(lattice, axis=1))
