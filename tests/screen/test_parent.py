"""The parent context: built once, reused everywhere, and the same whatever the input's origin or cell."""

import numpy as np
import pytest
import spglib

import screener.structure.crystal as crystal_module
import screener.structure.neighbours as neighbours_module
import screener.tb.bonds as bonds_module
from screener.screen.parent import build_parent
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.structure.symmetry import analyse
from screener.tb.bonds import find_bonds

# rocksalt GeTe, a = 6.00 Å (cubic high-temperature cell, from memory), as its 2-atom fcc primitive cell
FCC = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])


def rocksalt(a=6.0):
    return Crystal(FCC * a, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Ge", "Te"])


def _same_cell(cell, crystal):
    lat, frac = np.asarray(cell[0], dtype=float), np.asarray(cell[1], dtype=float)
    return lat.shape == (3, 3) and np.allclose(lat, crystal.lattice_A) and frac.shape == crystal.frac.shape \
        and np.allclose(frac, crystal.frac)


@pytest.mark.parametrize("crystal", [Crystal(np.eye(3) * 2.78, [[0, 0, 0]], ["As"]), rocksalt()],
                         ids=["simple-cubic As", "rocksalt GeTe"])
def test_rank_analyses_the_parent_symmetry_once_and_searches_its_neighbours_once(crystal, monkeypatch):
    # counting calls on the parent's own cell (common practice, no source): symmetry searches are spglib's
    # dataset and its mesh reduction (which searches the symmetry itself); neighbour searches are find_neighbours
    screened = build_parent(crystal).crystal  # the standardised primitive cell the screen works on
    cells = (crystal, screened)
    symmetry_calls, neighbour_calls = [], []
    real_dataset, real_ir = spglib.get_symmetry_dataset, spglib.get_ir_reciprocal_mesh
    real_find = neighbours_module.find_neighbours

    def count_dataset(cell, *a, **k):
        if any(_same_cell(cell, c) for c in cells):
            symmetry_calls.append("dataset")
        return real_dataset(cell, *a, **k)

    def count_ir(mesh, cell, *a, **k):
        if any(_same_cell(cell, c) for c in cells):
            symmetry_calls.append("mesh")
        return real_ir(mesh, cell, *a, **k)

    def count_find(lattice_A, frac, cutoff_A, include_zero=False):
        if not include_zero and any(_same_cell((lattice_A, frac), c) for c in cells):
            neighbour_calls.append(cutoff_A)
        return real_find(lattice_A, frac, cutoff_A, include_zero)

    monkeypatch.setattr(spglib, "get_symmetry_dataset", count_dataset)
    monkeypatch.setattr(spglib, "get_ir_reciprocal_mesh", count_ir)
    for module in (neighbours_module, bonds_module, crystal_module):
        monkeypatch.setattr(module, "find_neighbours", count_find)
    result = rank(crystal, settings=ScreenSettings(k_step_per_A=0.35, max_refinements=1), progress=False)
    assert result.candidates
    assert symmetry_calls == ["dataset"]
    assert len(neighbour_calls) == 1


@pytest.mark.parametrize("matrix", [[[0, 1, 1], [1, 0, 1], [1, 1, 0]], [[2, 0, 0], [0, 1, 0], [0, 0, 1]],
                                    [[1, 1, 0], [-1, 1, 0], [0, 0, 2]]])
def test_supercell_bonds_copied_from_the_parent_equal_a_new_search(matrix):
    # bonds are a property of local geometry, so copies of the parent's bonds must be exactly the bonds found
    # afresh in the supercell (translation symmetry, common practice, no source)
    parent = build_parent(rocksalt())
    sup = parent.crystal.supercell(matrix)
    copied = parent.supercell_bonds(matrix, sup)
    fresh = find_bonds(sup, parent.params)

    def as_set(b):
        return {(int(i), int(j), *map(int, r)) for i, j, r in zip(b.i, b.j, b.image, strict=True)}

    assert len(copied) == len(fresh) == 6 * sup.n_atoms // 2
    assert as_set(copied) == as_set(fresh)
    shells = parent.supercell_shells(matrix, sup)
    assert len(shells.i) == 6 * sup.n_atoms
    assert np.allclose(shells.distance_A, 3.0)


def test_standard_primitive_is_the_same_for_shifted_origin_reordered_atoms_and_conventional_cell():
    # International Tables A, No. 225 (Fm-3m): rocksalt has 2 atoms per primitive cell at 4a and 4b
    base = build_parent(rocksalt()).primitive.crystal
    shifted = Crystal(FCC * 6.0, [[0.75, 0.75, 0.75], [0.25, 0.25, 0.25]], ["Te", "Ge"])
    conventional = Crystal(np.eye(3) * 6.0, [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0],
                                             [.5, .5, .5], [.5, 0, 0], [0, .5, 0], [0, 0, .5]],
                           ["Ge"] * 4 + ["Te"] * 4)
    for other in (shifted, conventional):
        p = build_parent(other)
        prim = p.primitive
        assert prim.crystal.n_atoms == 2 and prim.crystal.species == base.species
        assert abs(prim.crystal.volume_A3 - base.volume_A3) < 1e-9
        assert analyse(prim.crystal).number == 225
        # the input lattice is an integer multiple of the primitive one
        assert round(abs(np.linalg.det(prim.supercell_matrix))) == other.n_atoms // 2
        # mapping the primitive sites back into the input setting lands on input sites
        back = prim.to_input_frame(prim.crystal.cart_A) @ np.linalg.inv(other.lattice_A)
        for f, el in zip(back, prim.crystal.species, strict=True):
            d = np.mod(other.frac - f + 0.5, 1.0) - 0.5
            hit = np.flatnonzero(np.all(np.abs(d) < 1e-6, axis=1))
            assert len(hit) == 1 and other.species[hit[0]] == el
