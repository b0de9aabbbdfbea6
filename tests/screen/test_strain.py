"""Homogeneous strain: the parent's elastic constants from its model (band energy + closure), clamped ions.

Sources: the form of a cubic elastic tensor (C11 = C22 = C33, C12 = C13 = C23, C44 = C55 = C66, the rest zero;
J. F. Nye, Physical Properties of Crystals, 1957 — from memory); the Born stability conditions C11 − C12 > 0,
C44 > 0, C11 + 2 C12 > 0 (Born & Huang, Dynamical Theory of Crystal Lattices, 1954 — from memory); the Voigt bulk
modulus of a cubic crystal (C11 + 2 C12)/3; measured bulk moduli from the bundled table (each row names its
source); NaCl's C44 ≈ 12.6 GPa at room temperature (ultrasonic, from memory); α-Po goes over to rhombohedral β-Po
(a trigonal shear of the cube along a body diagonal) near room temperature (from memory).
"""

from pathlib import Path

import numpy as np
import pytest

from screener.errors import ParameterError
from screener.screen.modes import cubic_summary, strain_matrix, strain_stiffness
from screener.screen.parent import build_parent
from screener.structure.formats import read_structure

KNOWN = Path(__file__).parents[1] / "data" / "known_phases"


def _parent(name):
    return build_parent(read_structure(KNOWN / f"{name}.cif"))


@pytest.fixture(scope="module")
def nacl():
    p = _parent("NaCl_rocksalt")
    return p, strain_stiffness(p)


def _assert_cubic_form(c):
    scale = np.abs(c).max()
    assert np.allclose(np.diag(c)[:3], c[0, 0], atol=1e-3 * scale)
    assert np.allclose([c[0, 1], c[0, 2], c[1, 2]], c[0, 1], atol=1e-3 * scale)
    assert np.allclose(np.diag(c)[3:], c[3, 3], atol=1e-3 * scale)
    off = c.copy()
    off[:3, :3] = 0
    off[np.arange(3, 6), np.arange(3, 6)] = 0
    assert np.allclose(off, 0, atol=1e-3 * scale)


def test_rocksalt_has_the_cubic_form_and_the_measured_bulk_modulus(nacl):
    parent, s = nacl
    _assert_cubic_form(s.elastic_constants_GPa)
    b_measured = parent.energetics.bulk_modulus_GPa  # the bundled table's measured value the closure was fitted to
    assert b_measured is not None
    assert s.bulk_modulus_GPa == pytest.approx(b_measured, rel=0.05)
    c = s.elastic_constants_GPa
    assert (c[0, 0] + 2 * c[0, 1]) / 3 == pytest.approx(s.bulk_modulus_GPa, rel=1e-9)


def test_rocksalt_nacl_is_mechanically_stable(nacl):
    _, s = nacl
    assert np.all(s.eigenvalues_GPa > 0) and s.unstable == []
    assert "mechanically stable" in cubic_summary(s)


def test_rocksalt_nacl_shear_constant_near_measured(nacl):
    # first-neighbour central repulsion and sp hoppings alone give NaCl a C44 of ~1.4 GPa; the closure's
    # bond-bending term, fitted to the bundled table's measured constants, brings it to the measured value
    parent, s = nacl
    assert parent.energetics.shear_closure == "bond-bending"
    assert s.elastic_constants_GPa[3, 3] == pytest.approx(12.6, rel=0.02)


def test_simple_cubic_po_is_unstable_to_the_trigonal_shear_towards_beta_po():
    s = strain_stiffness(_parent("Po_alpha_simple_cubic"))
    _assert_cubic_form(s.elastic_constants_GPa)
    assert s.elastic_constants_GPa[3, 3] < 0  # C44 < 0: the cube shears along a body diagonal (rhombohedral)
    assert "trigonal shear C44" in cubic_summary(s)
    # the model also finds C11 − C12 < 0 (tetragonal); no published counterpart, it is the model's own
    groups = s.unstable
    assert any(basis.shape[1] == 3 and np.allclose(np.sum(basis[:3] ** 2), 0, atol=1e-6) for _, basis in groups)


def test_quadratic_form_reproduces_the_energy_of_a_small_mixed_strain():
    # Taylor's theorem: E(ε) − E(0) = ½ V εᵀ C ε + O(ε³) at a stress-free cubic parent (a hand check of the
    # finite-difference assembly, not of the physics)
    from screener.bz.integrate import solve_on_mesh
    from screener.screen.closure import elastic_model_for
    from screener.tb.model import build_model

    p = _parent("As_simple_cubic_parent")
    s = strain_stiffness(p)
    eps = np.array([0.004, -0.002, 0.001, 0.003, -0.001, 0.002])
    en = p.energetics
    el = elastic_model_for(p.crystal, p.params, p.bonds, en.repulsion_eV, en.pair_exponent, en.bending_eV)

    def energy(voigt):
        lat = p.crystal.lattice_A @ (np.eye(3) + strain_matrix(voigt))
        m = build_model(p.crystal.replace(lattice_A=lat), p.params, bonds=p.bonds)
        band = solve_on_mesh(m, s.kmesh, method=p.settings.method, width_eV=p.settings.width_eV,
                             use_symmetry=False).band_energy_eV
        return band + el.energy_eV(lat, p.crystal.frac)

    direct = energy(eps) - energy(np.zeros(6))
    quadratic = 0.5 * eps @ s.elastic_constants_GPa @ eps * p.crystal.volume_A3 / 160.21766208
    assert direct == pytest.approx(quadratic, rel=0.1, abs=2e-5)


def test_a_chain_in_vacuum_has_no_elastic_constants():
    from screener.structure.crystal import Crystal

    chain = Crystal(np.diag([3.0, 12.0, 12.0]), [[0, 0, 0]], ["Sb"])
    with pytest.raises(ParameterError, match="periodic in three directions"):
        strain_stiffness(build_parent(chain))
