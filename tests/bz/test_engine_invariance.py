"""Cell-choice invariance of the band energy and the bulk-modulus calibration of the elastic closure."""

import numpy as np
import pytest

from screener.bz.integrate import solve_on_mesh
from screener.screen.closure import GPA_IN_EV_PER_A3, elastic_model_for
from screener.screen.parent import build_parent
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.tb.bonds import find_bonds
from screener.tb.model import build_model
from screener.tb.params import default_parameters


@pytest.mark.parametrize("method", ["gaussian", "methfessel-paxton", "fermi-dirac"])
@pytest.mark.parametrize("kind", ["diamond Si", "simple-cubic As"])
def test_band_energy_per_atom_same_in_primitive_cell_and_2x2x2_supercell(kind, method):
    # Bloch's theorem: a 2x2x2 supercell on an n^3 mesh samples exactly the states of the primitive cell on a
    # (2n)^3 Γ-centred mesh, so sampling methods give the same band energy per atom (common practice, no source)
    if kind == "diamond Si":
        lat = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * 5.431  # Si a = 5.431 Å (from memory)
        prim = Crystal(lat, [[0, 0, 0], [0.25, 0.25, 0.25]], ["Si", "Si"])
    else:
        prim = Crystal(np.eye(3) * 2.78, [[0, 0, 0]], ["As"])
    params = default_parameters(sorted(set(prim.species)))
    sup = prim.supercell(2)
    e_prim = solve_on_mesh(build_model(prim, params), (8, 8, 8), method=method, width_eV=0.1)
    e_sup = solve_on_mesh(build_model(sup, params), (4, 4, 4), method=method, width_eV=0.1)
    assert e_prim.band_energy_eV / prim.n_atoms == pytest.approx(e_sup.band_energy_eV / sup.n_atoms, abs=1e-6)
    assert e_prim.fermi_level_eV == pytest.approx(e_sup.fermi_level_eV, abs=1e-6)


def test_bulk_modulus_calibration_gives_that_curvature():
    # B = V d²E/dV² (thermodynamic definition); with V = V0 (1+s)^3, B = (1/9V0) d²E/ds² at s = 0
    crystal = Crystal(np.eye(3) * 2.78, [[0, 0, 0]], ["As"])
    params = default_parameters(["As"])
    settings = ScreenSettings(bulk_modulus_GPa=40.0)
    parent = build_parent(crystal, params, settings).energetics
    bonds = find_bonds(crystal, params)
    el = elastic_model_for(crystal, params, bonds, parent.repulsion_eV, parent.pair_exponent, parent.bending_eV)
    mesh = parent.kmesh

    def total(s):
        c = crystal.replace(lattice_A=crystal.lattice_A * (1 + s))
        return solve_on_mesh(build_model(c, params, bonds=bonds), mesh).band_energy_eV + el.energy_eV(
            c.lattice_A, c.frac)

    h = 0.004
    curvature = (total(h) - 2 * total(0.0) + total(-h)) / h**2
    b_gpa = curvature / (9 * crystal.volume_A3) / GPA_IN_EV_PER_A3
    assert b_gpa == pytest.approx(40.0, rel=0.05)


def test_half_filled_s_band_on_simple_cubic_splits_at_R():
    # the nearest-neighbour simple-cubic s band obeys E(k + R) = -E(k) (perfect nesting at R = (1/2,1/2,1/2),
    # from the Slater & Koster 1954 dispersion); half filled, it must gain from the R-point split. Group-1 Na
    # defaults to an s-only basis with one electron. (This case once hit a rounding edge in the Fermi search.)
    from screener.screen.rank import rank

    result = rank(Crystal(np.eye(3) * 3.0, [[0, 0, 0]], ["Na"]), generators=["rhombohedral-split"], progress=False)
    (best,) = result.candidates
    assert best.verdict == "unstable" and best.gap_eV > 0
