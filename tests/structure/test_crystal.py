"""Crystal: validation, derived quantities, supercells and periodic neighbour search."""

from pathlib import Path

import numpy as np
import pytest

from screener import Crystal, read_structure
from screener.errors import StructureError
from screener.structure.neighbours import find_neighbours

DATA = Path(__file__).parents[1] / "data"
SC = 3.359 * np.eye(3)  # alpha-Po cell, a = 3.359 Å (from memory)


# ----------------------------------------------------------------------------------- validation
@pytest.mark.parametrize(
    "kwargs,message",
    [
        ({"lattice_A": [[np.nan, 0, 0], [0, 1, 0], [0, 0, 1]]}, "lattice contains non-finite"),
        ({"frac": [[0, 0, np.inf]]}, "coordinates of atom 1 are not finite"),
        ({"lattice_A": [[3, 0, 0], [0, 3, 0], [3, 3, 0]]}, "cell is degenerate"),
        ({"lattice_A": [[3, 0, 0], [0, 3, 0], [0, 0, -3]]}, "left-handed or negative cell"),
        ({"lattice_A": [[0.5, 0, 0], [0, 0.5, 0], [0, 0, 0.5]]}, "cell is degenerate"),
        ({"lattice_A": [[3, 0], [0, 3]]}, "lattice must be a 3x3 matrix"),
        ({"species": ["Xx"]}, "unknown element symbol 'Xx'"),
        ({"species": ["Po", "Po"]}, "got 1 positions but 2 element symbols"),
        ({"frac": [[0, 0, 0], [0.05, 0, 0]], "species": ["Po", "Po"]}, "0.168 Å apart, closer than the minimum"),
        ({"frac": np.zeros((0, 3)), "species": []}, "structure has no atoms"),
        ({"frac": [[0, 0]]}, r"must be an \(n, 3\) array"),
        ({"labels": ["a", "b"]}, "got 1 positions but 2 site labels"),
    ],
)
def test_constructor_rejects(kwargs, message):
    args = {"lattice_A": SC, "frac": [[0, 0, 0]], "species": ["Po"]} | kwargs
    with pytest.raises(StructureError, match=message):
        Crystal(args["lattice_A"], args["frac"], args["species"], args.get("labels"))


def test_minimum_distance_is_configurable():
    # 1.0 Å apart: rejected with a 1.5 Å minimum, accepted with the 0.5 Å default (common practice, no source)
    frac = [[0, 0, 0], [1.0 / 3.359, 0, 0]]
    Crystal(SC, frac, ["Po", "Po"])
    with pytest.raises(StructureError, match="1.000 Å apart, closer than the minimum 1.5 Å"):
        Crystal(SC, frac, ["Po", "Po"], min_distance_A=1.5)


def test_periodic_image_too_close_is_rejected():
    # an atom at x=0.99 is 0.034 Å from the image of the atom at x=0 in the next cell
    with pytest.raises(StructureError, match="closer than the minimum"):
        Crystal(SC, [[0, 0, 0], [0.99, 0, 0]], ["Po", "Po"])


def test_normalisation():
    c = Crystal(SC, [[1.25, -0.25, 1.0]], ["po"])
    assert c.species == ("Po",) and c.labels == ("Po1",)
    assert c.frac.tolist() == [[0.25, 0.75, 0.0]]
    with pytest.raises(ValueError):
        c.frac[0, 0] = 0.5  # arrays are read-only: the dataclass is frozen all the way down
    assert c.formula == "Po"


def test_derived_quantities_of_a7_arsenic():
    c = read_structure(DATA / "As_A7_hexagonal.cif")
    # hexagonal cell volume a^2 c sqrt(3)/2 (International Tables A, Table 1.1: hexagonal metric)
    a, cc = 3.7598, 10.5475  # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969)
    assert c.volume_A3 == pytest.approx(a * a * cc * np.sqrt(3) / 2, rel=1e-9)
    assert c.volume_A3 / c.n_atoms == pytest.approx(21.52, abs=0.01)
    assert c.formula == "As6"
    # reciprocal vectors without 2π: lattice @ reciprocal.T = identity (definition)
    assert c.lattice_A @ c.reciprocal_A.T == pytest.approx(np.eye(3), abs=1e-12)
    assert c.cart_A == pytest.approx(c.frac @ c.lattice_A)


def test_a7_nearest_neighbour_distances():
    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): a, c, z at 299 K. In the hexagonal cell of R-3m the
    # atom at (0,0,z) has 3 neighbours at (2/3,1/3,1/3-z)-type positions and 3 at (1/3,2/3,2/3-z)-type ones
    # (International Tables A, No. 166, 6c), so d^2 = a^2/3 + (Δz c)^2 with Δz = 1/3-2z and 2/3-2z.
    a, c, z = 3.7598, 10.5475, 0.22707
    short = np.sqrt(a * a / 3 + ((1 / 3 - 2 * z) * c) ** 2)
    long = np.sqrt(a * a / 3 + ((2 / 3 - 2 * z) * c) ** 2)
    assert (short, long) == pytest.approx((2.52, 3.12), abs=0.005)  # ≈2.52 / 3.12 Å, from memory
    for name in ("As_A7_hexagonal.cif", "As_A7_rhombohedral.cif", "As_A7_rhombohedral_P1.cif"):
        shells = read_structure(DATA / name).neighbour_shells(cutoff_A=5.0)
        assert [s.distance_A for s in shells[:3]] == pytest.approx([short, long, a], abs=1e-4)
        assert [s.count_per_atom for s in shells[:3]] == [3, 3, 6]


def test_shells_of_cubic_lattices():
    # fcc: 12 at a/√2, 6 at a; diamond: 4 at a√3/4, 12 at a/√2; sc: 6 at a, 12 at a√2
    # (Kittel, Introduction to Solid State Physics, ch. 1, tables of nearest neighbours)
    def first_two(name):
        shells = read_structure(DATA / name).neighbour_shells(cutoff_A=5.0)
        return np.array([(s.distance_A, s.count_per_atom) for s in shells[:2]])

    a = 4.0495
    assert first_two("Al_fcc_symbol_only.cif") == pytest.approx(np.array([(a / np.sqrt(2), 12), (a, 6)]))
    a = 5.431
    assert first_two("Si_diamond_primitive.cif") == pytest.approx(
        np.array([(a * np.sqrt(3) / 4, 4), (a / np.sqrt(2), 12)]))
    a = 3.359
    assert first_two("Po_simple_cubic_number_only.cif") == pytest.approx(np.array([(a, 6), (a * np.sqrt(2), 12)]))


def test_neighbour_search_matches_brute_force():
    # reference: direct numpy enumeration of every image within ±4 cells of a skewed triclinic cell
    rng = np.random.default_rng(7)
    lattice = np.array([[4.0, 0.3, 0.1], [1.9, 3.6, -0.2], [0.7, -1.1, 5.2]])
    frac = rng.random((4, 3))
    cutoff = 6.0
    nl = find_neighbours(lattice, frac, cutoff)
    r = np.arange(-4, 5)
    images = np.stack(np.meshgrid(r, r, r, indexing="ij"), -1).reshape(-1, 3)
    vec = (frac[None, :, None, :] + images[None, None, :, :] - frac[:, None, None, :]) @ lattice
    dist = np.linalg.norm(vec, axis=-1)
    want = np.sort(dist[(dist > 1e-8) & (dist <= cutoff)])
    assert np.sort(nl.distance_A) == pytest.approx(want)
    # vectors agree with indices and images
    again = (frac[nl.j] + nl.image - frac[nl.i]) @ lattice
    assert again == pytest.approx(nl.vector_A)
    # each ordered pair appears in both directions
    assert len(nl.i) % 2 == 0 and sorted(zip(nl.i, nl.j)) == sorted(zip(nl.j, nl.i))


# ----------------------------------------------------------------------------------- supercells
def test_supercell_preserves_density_and_shells():
    c = read_structure(DATA / "As_A7_rhombohedral_P1.cif")
    for m in [(2, 1, 1), (2, 2, 2), [[1, 1, 0], [-1, 1, 0], [0, 0, 1]]]:
        s = c.supercell(m)
        det = round(abs(np.linalg.det(np.diag(m) if np.ndim(m) == 1 else np.array(m))))
        assert s.n_atoms == det * c.n_atoms
        assert s.volume_A3 == pytest.approx(det * c.volume_A3)
        assert [x.distance_A for x in s.neighbour_shells()] == pytest.approx(
            [x.distance_A for x in c.neighbour_shells()])
        assert len(set(s.labels)) == s.n_atoms


@pytest.mark.parametrize("matrix,message", [
    ((1, 1, 0), "positive determinant"),
    ([[1, 0, 0], [0, 1, 0], [0, 0, -1]], "positive determinant"),
    ((1.5, 1, 1), "integer"),
])
def test_bad_supercell(matrix, message):
    c = Crystal(SC, [[0, 0, 0]], ["Po"])
    with pytest.raises(StructureError, match=message):
        c.supercell(matrix)
