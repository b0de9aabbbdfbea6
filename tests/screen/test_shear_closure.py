"""The closure's bond-bending term and its fit to measured shear constants (screener.screen.closure, parent, modes).

Sources: the measured constants are the bundled table's (tb/data/shear_constants_GPa.csv; Al from Kittel,
Introduction to Solid State Physics, 8th ed., ch. 3 — from memory; Na from the Simmons & Wang handbook — from
memory); the cubic shear energies ½ V C44 γ² and 2 V C' ε² (C' = (C11 − C12)/2) of the strains γ_yz and
ε_xx = −ε_yy (J. F. Nye, Physical Properties of Crystals, 1957 — from memory); the harmonic energy of a frozen wave
u_s(L) = Re e_s exp(2πi q·L), ½ eᵀΦe per cell for q ≡ −q and ¼ e†Φe otherwise (Born & Huang, Dynamical Theory of
Crystal Lattices, 1954 — from memory); Taylor's theorem for the finite differences.
"""

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from screener.screen.closure import bending_for_shear, elastic_model_for, shear_constants_for
from screener.screen.modes import cube_axes, elastic_force_constants, stiffness, strain_stiffness
from screener.screen.parent import build_parent
from screener.structure.formats import read_structure

KNOWN = Path(__file__).parents[1] / "data" / "known_phases"


def _parent(name):
    return build_parent(read_structure(KNOWN / f"{name}.cif"))


@pytest.fixture(scope="module")
def al():
    return _parent("Al_fcc")


@pytest.fixture(scope="module")
def na():
    return _parent("Na_bcc")


@pytest.mark.parametrize("name", ["Al_fcc", "Na_bcc"])
def test_fitted_model_reproduces_the_measured_shear_constants(name, al, na):
    p = {"Al_fcc": al, "Na_bcc": na}[name]
    c11, c12, c44, _, _ = shear_constants_for(p.crystal, p.symmetry.number)
    en = p.energetics
    assert en.shear_closure == "bond-bending" and en.bending_eV > 0
    c = strain_stiffness(p).elastic_constants_GPa
    # the binding constant is met to the finite-difference rounding, the other one is at least the measured one
    model_c44, model_cp = c[3, 3], 0.5 * (c[0, 0] - c[0, 1])
    assert min(model_c44 - c44, model_cp - 0.5 * (c11 - c12)) == pytest.approx(0.0, abs=0.02 * c44)
    assert model_c44 >= c44 * 0.99 and model_cp >= 0.5 * (c11 - c12) * 0.99
    # the bulk modulus is untouched (analytic: the term is invariant under uniform scaling): the same parent with
    # the pair closure alone has the same C11 + 2 C12
    bare = build_parent(p.input_crystal)
    bare.__dict__["energetics"] = replace(en, bending_eV=0.0)  # κ = 0, same A and m
    c_bare = strain_stiffness(bare).elastic_constants_GPa
    assert c_bare[3, 3] < c44  # the pair closure alone falls short of the measured C44 (the reason for the term)
    assert c[0, 0] + 2 * c[0, 1] == pytest.approx(c_bare[0, 0] + 2 * c_bare[0, 1], rel=1e-3)


def test_every_member_of_the_closure_range_carries_its_own_bending_constant(al):
    members = al.energetics.ensemble
    assert all(len(member) == 4 for member in members)  # (label, A, m, κ)
    # a softer pair repulsion (smaller m, the B − 25 % member) leaves more shear to the bending term
    kappas = [k for _, _, _, k in members]
    assert kappas[0] >= kappas[1] >= kappas[2] >= 0


def test_bending_force_constants_equal_finite_differences_of_the_energy():
    # Taylor's theorem: the analytic Φ(q) of the closure (pair + bending) against the second difference of
    # ElasticModel.energy_eV in a supercell, for a two-atom cell at a zone-boundary q and an incommensurate-looking
    # q = ¼ with a complex pattern (the phases of arms whose bond ends at the shared atom)
    p = _parent("NaCl_rocksalt")
    en = p.energetics
    assert en.bending_eV > 0
    cr = p.crystal
    el = elastic_model_for(cr, p.params, p.bonds, en.repulsion_eV, en.pair_exponent, en.bending_eV)
    rng = np.random.default_rng(7)
    for q, real in (((0.0, 0.5, 0.5), True), ((0.0, 0.0, 0.25), False)):
        q = np.array(q)
        den = [int(round(1 / x)) if x else 1 for x in q]
        m = np.diag(den)
        ref = cr.supercell(m)
        el_s = elastic_model_for(ref, p.params, p.supercell_bonds(m, ref), en.repulsion_eV, en.pair_exponent,
                                 en.bending_eV)
        e = rng.normal(size=3 * cr.n_atoms) + (0 if real else 1j * rng.normal(size=3 * cr.n_atoms))
        n = int(np.prod(den))
        sites = np.repeat(np.arange(cr.n_atoms), n)
        wave = np.exp(2j * np.pi * ((ref.frac @ m - cr.frac[sites]) @ q))
        u = np.real(wave[:, None] * e.reshape(-1, 3)[sites]) @ np.linalg.inv(ref.lattice_A)

        def energy(lam, el_s=el_s, ref=ref, u=u):
            return el_s.energy_eV(ref.lattice_A, ref.frac + lam * u)

        h = 1e-3
        fd = (energy(h) - 2 * energy(0.0) + energy(-h)) / h**2 / n
        phi = elastic_force_constants(cr, el, q)
        analytic = float(np.real(np.conj(e) @ phi @ e)) * (1.0 if real else 0.5)
        assert fd == pytest.approx(analytic, rel=1e-4)


def test_acoustic_sum_rule_holds_with_the_bending_term():
    # analytic: a rigid translation costs nothing, with or without the bending term
    p = _parent("NaCl_rocksalt")
    assert p.energetics.bending_eV > 0
    s = stiffness(p, (0, 0, 0), mesh=(6, 6, 6), width_eV=0.1)
    trans = np.kron(np.ones((p.crystal.n_atoms, 1)), np.eye(3)) / np.sqrt(p.crystal.n_atoms)
    assert np.max(np.abs(s.elastic_eV_per_A2 @ trans)) < 1e-9 * np.max(np.abs(s.elastic_eV_per_A2))
    assert np.max(np.abs(s.total_eV_per_A2 @ trans)) < 1e-4 * np.max(np.abs(s.total_eV_per_A2))


def test_the_bending_energy_ignores_rigid_rotations_and_uniform_scaling(al):
    # analytic: angles do not change under a rotation or a uniform scaling of the whole crystal
    en = al.energetics
    el = elastic_model_for(al.crystal, al.params, al.bonds, 0.0, en.pair_exponent, bending_eV=1.0)
    t = 0.3
    rot = np.array([[np.cos(t), -np.sin(t), 0], [np.sin(t), np.cos(t), 0], [0, 0, 1]])
    lat = al.crystal.lattice_A
    assert el.bending_energy_eV(lat @ rot.T, al.crystal.frac) == pytest.approx(0.0, abs=1e-12)
    assert el.bending_energy_eV(lat * 1.05, al.crystal.frac) == pytest.approx(0.0, abs=1e-12)
    assert el.bending_energy_eV(lat @ np.diag([1.01, 1.0, 1.0]), al.crystal.frac) > 0


def test_the_fit_does_not_depend_on_the_orientation_of_the_input(al):
    # analytic: the measured constants refer to the cube axes, which the fit finds from the point group
    cr = read_structure(KNOWN / "Al_fcc.cif")
    t = 0.4
    rot = np.array([[1, 0, 0], [0, np.cos(t), -np.sin(t)], [0, np.sin(t), np.cos(t)]])
    turned = build_parent(cr.replace(lattice_A=cr.lattice_A @ rot.T))
    assert turned.energetics.bending_eV == pytest.approx(al.energetics.bending_eV, rel=1e-3)
    axes = cube_axes(turned.point_group_cart)
    assert np.allclose(np.abs(axes @ rot @ np.eye(3)).max(axis=1), 1.0, atol=1e-6)


def test_bending_for_shear_is_the_smallest_stiffening_that_meets_both_constants():
    # arithmetic: each constant is linear in κ; the larger requirement wins, none is softened
    assert bending_for_shear(10.0, 30.0, 50.0, 20.0, 20.0, 20.0) == pytest.approx(0.2)
    assert bending_for_shear(10.0, 5.0, 50.0, 20.0, 20.0, 20.0) == pytest.approx(0.75)
    assert bending_for_shear(30.0, 30.0, 50.0, 20.0, 20.0, 20.0) == 0.0
    assert bending_for_shear(10.0, 30.0, 0.0, 20.0, 20.0, 20.0) == 0.0  # the term cannot raise C44 here


def test_parents_without_measured_shear_constants_keep_the_pair_closure():
    # the measured rows are for the observed phase: simple-cubic Po has none, and the hypothetical simple-cubic As
    # parent is not the measured A7 phase
    for name in ("Po_alpha_simple_cubic", "As_simple_cubic_parent"):
        en = _parent(name).energetics
        assert en.shear_closure == "none" and en.bending_eV == 0
        assert "no measured shear constants" in en.shear_source
        assert all(k == 0 for _, _, _, k in en.ensemble)
