"""The tight-binding model: bands of textbook lattices, invariances, spin-orbit, bond finding."""

import numpy as np
import pytest
from hypothesis import given, seed, settings
from hypothesis import strategies as st

from screener import Crystal
from screener.errors import ParameterError, StructureError
from screener.tb.bonds import BondList, find_bonds
from screener.tb.model import build_model
from screener.tb.param_file import parameters_from_dict
from screener.tb.params import default_parameters
from screener.tb.slater_koster import orbital_indices, orbital_rotation

A = 2.5
EPS_S, EPS_P = -3.0, 1.5
V = {"ss_sigma": -0.8, "sp_sigma": 1.1, "pp_sigma": 1.7, "pp_pi": -0.45}
SPECIAL = np.array([[0, 0, 0], [0.5, 0, 0], [0.5, 0.5, 0], [0.5, 0.5, 0.5]])  # Γ, X, M, R of simple cubic


def _sc(orbitals, v=V, **species):
    crystal = Crystal(np.eye(3) * A, [[0, 0, 0]], ["Po"])
    ps = parameters_from_dict({
        "species": {"Po": {"orbitals": orbitals, "onsite_eV": {"s": EPS_S, "p": EPS_P}, "valence_electrons": 1,
                           **species}},
        "bond": {"Po-Po": {"law": "power", "r0_A": A, "exponent": 2, "V_eV": v}},
    }, ["Po"])
    return build_model(crystal, ps)


def _kpts():
    return np.vstack([SPECIAL, np.random.default_rng(11).random((20, 3)) - 0.5])


def test_simple_cubic_s_band():
    model = _sc(["s"])
    k = _kpts()
    c = np.cos(2 * np.pi * k)
    # Slater & Koster, Phys. Rev. 94, 1498 (1954): E(k) = ε_s + 2 V_ssσ (cos k_x a + cos k_y a + cos k_z a)
    expected = EPS_S + 2 * V["ss_sigma"] * c.sum(axis=1)
    assert np.allclose(model.eigenvalues(k)[:, 0], expected, atol=1e-9, rtol=0)


def test_simple_cubic_p_bands():
    model = _sc(["p"])
    k = _kpts()
    c = np.cos(2 * np.pi * k)
    # Slater & Koster 1954: E_x(k) = ε_p + 2 V_ppσ cos k_x a + 2 V_ppπ (cos k_y a + cos k_z a), and permutations
    ex = [EPS_P + 2 * V["pp_sigma"] * c[:, i] + 2 * V["pp_pi"] * (c.sum(axis=1) - c[:, i]) for i in range(3)]
    expected = np.sort(np.stack(ex, axis=1), axis=1)
    assert np.allclose(model.eigenvalues(k), expected, atol=1e-9, rtol=0)
    # the model is diagonal in px, py, pz for a simple cubic nearest-neighbour lattice (same source)
    H = model.hamiltonian(k)
    assert np.allclose(H - np.einsum("kii->ki", H)[:, :, None] * np.eye(3), 0, atol=1e-12)


def test_p_band_degeneracies_at_special_points():
    E = _sc(["p"]).eigenvalues(SPECIAL)
    spread = E.max(axis=1) - E.min(axis=1)
    # three-fold at Γ and R, split at X and M (common practice, no source)
    assert spread[0] < 1e-12 and spread[3] < 1e-12
    assert spread[1] > 0.1 and spread[2] > 0.1


def test_simple_cubic_sp_hamiltonian_closed_form():
    model = _sc(["s", "p"])
    k = _kpts()
    c, s = np.cos(2 * np.pi * k), np.sin(2 * np.pi * k)
    H = np.zeros((len(k), 4, 4), dtype=complex)
    H[:, 0, 0] = EPS_S + 2 * V["ss_sigma"] * c.sum(axis=1)
    for i in range(3):
        H[:, 1 + i, 1 + i] = EPS_P + 2 * V["pp_sigma"] * c[:, i] + 2 * V["pp_pi"] * (c.sum(axis=1) - c[:, i])
        # Slater & Koster 1954 Table I: E_{s,x} = l V_spσ; neighbours at ±a x̂ give 2i V_spσ sin k_x a
        H[:, 0, 1 + i] = 2j * V["sp_sigma"] * s[:, i]
        H[:, 1 + i, 0] = np.conj(H[:, 0, 1 + i])
    assert np.allclose(model.hamiltonian(k), H, atol=1e-12)


def _diamond(species=("Si", "Si"), a=5.43):
    lat = a / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
    return Crystal(lat, [[0, 0, 0], [0.25, 0.25, 0.25]], list(species))


def test_supercell_gamma_holds_the_parent_zone_boundary_states():
    parent = _diamond()
    params = default_parameters(["Si"])
    m1 = build_model(parent, params)
    sup = parent.supercell(2)
    m2 = build_model(sup, params)
    ks = np.array([[a, b, c] for a in (0, 0.5) for b in (0, 0.5) for c in (0, 0.5)])
    parent_set = np.sort(m1.eigenvalues(ks).ravel())
    # a 2×2×2 supercell folds k ∈ {0, 1/2}³ of the parent onto its Γ point (Bloch theorem, common practice)
    assert np.allclose(np.sort(m2.eigenvalues([[0, 0, 0]])[0]), parent_set, atol=1e-9)
    assert m2.n_electrons == 8 * m1.n_electrons


def test_diamond_silicon_bonds_and_counts():
    model = build_model(_diamond())
    # diamond: 4 nearest neighbours at a√3/4 = 2.351 Å; 2 atoms → 4 bonds listed once (common practice)
    assert len(model.bonds) == 4
    assert model.bond_length_A == pytest.approx(np.full(4, 5.43 * np.sqrt(3) / 4))
    assert model.n_orbitals == 8 and model.n_electrons == 8 and model.spin_degeneracy == 2
    assert model.periodic == (True, True, True)


def test_zincblende_keeps_only_cation_anion_bonds():
    crystal = _diamond(("Ga", "As"), 5.65)
    bonds = find_bonds(crystal, default_parameters(["Ga", "As"]))
    assert len(bonds) == 4
    assert set(zip(bonds.i.tolist(), bonds.j.tolist(), strict=True)) == {(0, 1)}


def _triclinic_spd():
    lat = np.array([[3.1, 0.2, -0.1], [0.4, 2.9, 0.3], [-0.2, 0.5, 3.3]])
    crystal = Crystal(lat, [[0.0, 0.0, 0.0], [0.43, 0.38, 0.55]], ["Ge", "Te"])
    rng = np.random.default_rng(99)
    vals = {k: float(rng.normal()) for k in ("ss_sigma", "sp_sigma", "ps_sigma", "pp_sigma", "pp_pi", "sd_sigma",
                                             "ds_sigma", "pd_sigma", "pd_pi", "dp_sigma", "dp_pi", "dd_sigma",
                                             "dd_pi", "dd_delta")}
    params = parameters_from_dict({
        "species": {"Ge": {"orbitals": "spd", "onsite_eV": {"s": -5, "p": 0, "d": 3}, "valence_electrons": 4},
                    "Te": {"orbitals": ["s", "p"], "onsite_eV": {"s": -6, "p": -1}, "valence_electrons": 6}},
        "bond": {"Ge-Te": {"law": "power", "r0_A": 2.8, "exponent": 2, "V_eV": vals, "cutoff_A": 3.6},
                 "Ge-Ge": {"law": "power", "r0_A": 3.0, "exponent": 3, "V_eV": vals, "cutoff_A": 3.6},
                 "Te-Te": {"law": "exponential", "r0_A": 3.0, "decay_A": 0.7,
                           "V_eV": {"pp_sigma": 1.0, "pp_pi": -0.3, "ss_sigma": -0.4, "sp_sigma": 0.5}}},
    }, ["Ge", "Te"])
    return crystal, params


def test_hamiltonian_is_hermitian_and_chunking_is_exact():
    crystal, params = _triclinic_spd()
    model = build_model(crystal, params)
    k = np.random.default_rng(2).random((13, 3))
    H = model.hamiltonian(k)
    assert np.allclose(H, np.conj(np.swapaxes(H, 1, 2)), atol=1e-12)
    assert np.allclose(model.eigenvalues(k, chunk_size=4), model.eigenvalues(k), atol=1e-12)
    vals, vecs = model.eigensystem(k, chunk_size=5)
    assert np.allclose(np.einsum("kab,kbn->kan", H, vecs), vecs * vals[:, None, :], atol=1e-10)


def test_atom_order_does_not_change_the_bands():
    crystal, params = _triclinic_spd()
    swapped = Crystal(crystal.lattice_A, crystal.frac[::-1], crystal.species[::-1])
    k = np.random.default_rng(4).random((9, 3))
    # relabelling atoms is a basis permutation (common practice, no source); exercises the A/B reversal (ps ≠ sp)
    assert np.allclose(build_model(crystal, params).eigenvalues(k), build_model(swapped, params).eigenvalues(k),
                       atol=1e-10)


@seed(424242)
@settings(max_examples=12, deadline=None)
@given(st.lists(st.floats(-2, 2, allow_nan=False), min_size=9, max_size=9))
def test_rotating_the_crystal_rotates_the_hamiltonian(entries):
    q, r = np.linalg.qr(np.reshape(entries, (3, 3)) + 3 * np.eye(3))
    R = q * np.sign(np.diag(r))
    if np.linalg.det(R) < 0:
        R[:, 0] *= -1
    crystal, params = _triclinic_spd()
    rotated = Crystal(crystal.lattice_A @ R.T, crystal.frac, crystal.species)
    m0, m1 = build_model(crystal, params), build_model(rotated, params)
    k = np.random.default_rng(8).random((5, 3))
    # the same fractional k in the rotated cell is the rotated wave vector: H' = D H Dᵀ, eigenvalues unchanged
    # (rotational invariance of the two-centre integrals, Slater & Koster 1954)
    D9 = orbital_rotation(R)
    D = np.zeros((m0.n_orbitals, m0.n_orbitals))
    start = 0
    for s in crystal.species:
        idx = orbital_indices(params.species(s).orbitals)
        D[start:start + len(idx), start:start + len(idx)] = D9[np.ix_(idx, idx)]
        start += len(idx)
    assert np.allclose(m1.hamiltonian(k), D @ m0.hamiltonian(k) @ D.T, atol=1e-10)
    assert np.allclose(m1.eigenvalues(k), m0.eigenvalues(k), atol=1e-10)


def _isolated(orbitals, soc):
    crystal = Crystal(np.eye(3) * 4.0, [[0, 0, 0]], ["Bi"])
    ps = parameters_from_dict({"species": {"Bi": {"orbitals": orbitals, "onsite_eV": {"p": 0.0, "d": 0.0},
                                                  "soc_eV": soc}}}, ["Bi"])
    empty = BondList(np.zeros(0, int), np.zeros(0, int), np.zeros((0, 3), int))
    return build_model(crystal, ps, bonds=empty)


def test_spin_orbit_splits_an_isolated_p_shell():
    lam = 0.6
    model = _isolated(["p"], lam)
    E = model.eigenvalues([[0, 0, 0]])[0]
    # λ L·S: j = 3/2 at +λ/2 (4 states), j = 1/2 at −λ (2 states), splitting 3λ/2 (textbook atomic physics)
    assert E == pytest.approx([-lam] * 2 + [lam / 2] * 4)
    assert model.spin_degeneracy == 1 and model.n_orbitals == 6
    assert model.orbital_name[:2] == ("px_up", "px_dn")
    assert model.periodic == (False, False, False)


def test_spin_orbit_splits_an_isolated_d_shell():
    lam = 0.2
    E = _isolated(["d"], lam).eigenvalues([[0.1, 0.2, 0.3]])[0]
    # j = 5/2 at +λ (6 states), j = 3/2 at −3λ/2 (4 states) (textbook atomic physics)
    assert E == pytest.approx([-1.5 * lam] * 4 + [lam] * 6)


def test_spin_orbit_in_a_solid_keeps_kramers_pairs_at_gamma():
    model = _sc(["s", "p"], soc_eV=0.4)
    E = model.eigenvalues([[0, 0, 0], [0.5, 0.5, 0.5]])
    # time reversal: every level at a time-reversal-invariant k is at least doubly degenerate (Kramers)
    assert np.allclose(E[:, ::2], E[:, 1::2], atol=1e-10)


def test_isolated_chain_is_periodic_along_its_axis_only():
    lat = np.diag([2.2, 12.0, 12.0])
    crystal = Crystal(lat, [[0, 0.5, 0.5]], ["C"])
    ps = parameters_from_dict({"species": {"C": {"orbitals": ["pz"], "onsite_eV": {"pz": 0.0},
                                                 "valence_electrons": 1}}}, ["C"])
    model = build_model(crystal, ps)
    assert model.periodic == (True, False, False)
    # one π band of a chain with the Harrison law: E = 2 V_ppπ cos(2πk) (Harrison 1980)
    vpi = -0.81 * 7.62 / 2.2**2
    k = np.array([[0.1, 0, 0], [0.37, 0, 0]])
    assert model.eigenvalues(k)[:, 0] == pytest.approx(2 * vpi * np.cos(2 * np.pi * k[:, 0]))


def test_shells_and_cutoff_from_the_parameter_file():
    crystal = Crystal(np.eye(3) * 2.0, [[0, 0, 0]], ["Po"])
    base = {"species": {"Po": {"orbitals": ["s"], "onsite_eV": {"s": 0.0}, "valence_electrons": 1}}}
    bond = {"law": "power", "r0_A": 2.0, "exponent": 2, "V_eV": {"ss_sigma": -1.0}}
    # simple cubic: 6 first, 12 second, 8 third neighbours (common practice, no source); listed once → halves
    counts = {}
    for label, extra in [("first", {}), ("shells2", {"shells": 2}), ("cutoff", {"cutoff_A": 3.5})]:
        ps = parameters_from_dict({**base, "bond": {"Po-Po": {**bond, **extra}}}, ["Po"])
        counts[label] = len(find_bonds(crystal, ps))
    assert counts == {"first": 3, "shells2": 9, "cutoff": 13}


def test_bonds_follow_atoms_across_the_cell_boundary():
    lat = np.diag([4.0, 10.0, 10.0])
    parent = Crystal(lat, [[0.01, 0.5, 0.5], [0.5, 0.5, 0.5]], ["C", "C"])
    ps = parameters_from_dict({"species": {"C": {"orbitals": ["pz"], "onsite_eV": {"pz": 0.0},
                                                 "valence_electrons": 1}}}, ["C"])
    bonds = find_bonds(parent, ps)
    assert np.sort(build_model(parent, ps, bonds=bonds).bond_length_A) == pytest.approx([1.96, 2.04])
    moved = Crystal(lat, [[-0.02, 0.5, 0.5], [0.5, 0.5, 0.5]], ["C", "C"])  # atom 0 wraps to x = 0.98
    m = build_model(moved, ps, bonds=bonds)
    # each bond changes by ±0.03·4 Å = 0.12 Å, not by a lattice vector (common practice, no source)
    assert np.sort(m.bond_length_A) == pytest.approx([1.92, 2.08])
    assert np.array_equal(m.bonds.i, bonds.i) and np.array_equal(m.bonds.j, bonds.j)


def test_bad_inputs():
    crystal = _diamond()
    with pytest.raises(StructureError, match="refers to atoms outside 0..1"):
        build_model(crystal, bonds=BondList([0], [5], [[0, 0, 0]]))
    with pytest.raises(ParameterError, match=r"k-points must be an \(nk, 3\) array"):
        build_model(crystal).eigenvalues(np.zeros((4, 2)))
    fe = Crystal(np.eye(3) * 2.5, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Fe", "As"])
    with pytest.raises(ParameterError, match="no universal d-orbital couplings"):
        build_model(fe)
