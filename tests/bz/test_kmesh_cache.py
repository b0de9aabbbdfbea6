"""The irreducible mesh against spglib's own map (reference library), and the cache that serves repeated requests."""

from __future__ import annotations

import numpy as np
import pytest
import spglib

from screener.bz.kmesh import irreducible_mesh
from screener.structure.crystal import Crystal
from screener.structure.symmetry import _cell


def _rocksalt() -> Crystal:
    a = 6.0  # any cubic rocksalt cell (common practice, no source)
    return Crystal(0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]]), [[0, 0, 0], [0.5, 0.5, 0.5]],
                   ["Pb", "Te"])


@pytest.mark.parametrize("mesh", [(6, 6, 6), (7, 5, 4), (1, 1, 9)])
@pytest.mark.parametrize("shift", [(0, 0, 0), (1, 1, 1)])
def test_reduction_groups_spglib_map_as_numpy_unique(mesh, shift):
    crystal = _rocksalt()
    full_map, grid = spglib.get_ir_reciprocal_mesh(mesh, _cell(crystal), is_shift=shift, is_time_reversal=True)
    # reference: spglib's map grouped by numpy.unique (sorted representatives, inverse, counts)
    ir, inverse, counts = np.unique(full_map, return_inverse=True, return_counts=True)
    km = irreducible_mesh(crystal, mesh, shift)
    assert np.array_equal(km.grid_address, grid)
    assert np.array_equal(km.ir_index, ir) and km.ir_index.dtype == ir.dtype
    assert np.array_equal(km.mapping, inverse.reshape(-1))
    assert np.array_equal(km.weights, counts / counts.sum())
    assert np.array_equal(km.kfrac, ((grid + 0.5 * np.asarray(shift)) / np.asarray(mesh))[ir])


def test_same_request_is_served_once_and_read_only():
    crystal = _rocksalt()
    rots = spglib.get_symmetry(_cell(crystal))["rotations"]
    a = irreducible_mesh(crystal, (8, 8, 8), rotations=rots)
    assert irreducible_mesh(crystal, (8, 8, 8), rotations=rots[::-1].copy()) is a  # same point group, any order
    assert irreducible_mesh(crystal, (8, 8, 8), rotations=rots[:1]) is not a  # another group: another reduction
    assert irreducible_mesh(crystal, (8, 8, 4), rotations=rots) is not a
    with pytest.raises(ValueError):
        a.weights[0] = 1.0
    # a request by the crystal's own symmetry search reduces to the same wedge
    b = irreducible_mesh(crystal, (8, 8, 8))
    assert b is irreducible_mesh(crystal, (8, 8, 8)) and np.array_equal(b.mapping, a.mapping)
    moved = Crystal(crystal.lattice_A * 1.01, crystal.frac, crystal.species)  # another cell: searched again
    assert irreducible_mesh(moved, (8, 8, 8)) is not b
