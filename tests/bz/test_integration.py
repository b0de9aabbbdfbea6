"""Occupations, Fermi level, band energy and DOS checked against analytic tight-binding results.

The models here are analytic nearest-neighbour s bands (one orbital per site) with the interface of
``screener.tb.model.TightBindingModel`` that ``solve_on_mesh`` uses.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, seed, settings
from hypothesis import strategies as st

from screener.bz.common import METHODS
from screener.bz.fermi import find_fermi_level
from screener.bz.integrate import density_of_states, integrate, solve_on_mesh
from screener.bz.kmesh import irreducible_mesh
from screener.bz.smearing import delta, entropy_term, occupation
from screener.bz.tetrahedron import _tet_corner_dos, _tet_count, _tet_weights
from screener.errors import ParameterError
from screener.structure.crystal import Crystal

SEED = 20240611  # fixed, overridable seed for the random checks


class AnalyticSBand:
    """E(k) = ε + Σ_n 2 V_n cos(2π k·n) over neighbour vectors n (lattice coordinates), one s orbital per site."""

    def __init__(self, lattice_A, neighbours, hoppings_eV, onsite_eV=0.0, n_electrons=1.0,
                 periodic=(True, True, True), species="Po"):
        self.crystal = Crystal(np.asarray(lattice_A, float), [[0.0, 0.0, 0.0]], [species])
        self.n = np.asarray(neighbours, dtype=float)
        self.v = np.asarray(hoppings_eV, dtype=float)
        self.onsite = float(onsite_eV)
        self.n_electrons = float(n_electrons)
        self.spin_degeneracy = 2
        self.periodic = tuple(periodic)

    def eigenvalues(self, kfrac, chunk_size=None):
        k = np.asarray(kfrac, dtype=float)
        return (self.onsite + 2 * np.cos(2 * np.pi * k @ self.n.T) @ self.v)[:, None]


def simple_cubic(onsite_eV=0.3, V_eV=-1.0, n_electrons=1.0):
    # s band of the simple-cubic lattice, E = ε + 2V(cos 2πk1 + cos 2πk2 + cos 2πk3)
    # Ashcroft & Mermin, Solid State Physics (1976), ch. 10, eq. 10.23 (from memory)
    return AnalyticSBand(np.eye(3) * 3.0, np.eye(3), [V_eV] * 3, onsite_eV, n_electrons)


def chain(t_eV=-1.3):
    return AnalyticSBand(np.diag([2.5, 15.0, 15.0]), [[1, 0, 0]], [t_eV], 0.0, 1.0, (True, False, False), "Li")


class SSHChain:
    """Two sites per cell with alternating hoppings t1, t2: E = ±|t1 + t2 e^{2πik}|."""

    # Su, Schrieffer & Heeger, PRB 22, 2099 (1980): gap 2|t1 − t2| at the zone boundary

    def __init__(self, t1=-1.2, t2=-0.8):
        self.crystal = Crystal(np.diag([5.0, 15.0, 15.0]), [[0, 0, 0], [0.48, 0, 0]], ["C", "C"])
        self.t1, self.t2 = t1, t2
        self.n_electrons = 2.0
        self.spin_degeneracy = 2
        self.periodic = (True, False, False)

    def eigenvalues(self, kfrac, chunk_size=None):
        k = np.asarray(kfrac, dtype=float)[:, 0]
        a = np.abs(self.t1 + self.t2 * np.exp(2j * np.pi * k))
        return np.stack([-a, a], axis=1)


# ============================================================================================ occupations
@pytest.mark.parametrize("method", ["gaussian", "fermi-dirac", "methfessel-paxton"])
def test_smearing_sum_rules(method):
    x = np.linspace(-60, 60, 240001)
    dx = x[1] - x[0]
    d = delta(x, method)
    # a broadened δ integrates to one and is the derivative of the step
    # Methfessel & Paxton, PRB 40, 3616 (1989), eqs. 5–11
    assert np.sum(d) * dx == pytest.approx(1.0, abs=1e-9)
    f = occupation(x, method)
    assert np.allclose(-np.gradient(f, dx), d, atol=1e-6)
    # particle–hole symmetry of the step: f(x) + f(−x) = 1
    assert np.allclose(f + occupation(-x, method), 1.0, atol=1e-13)
    # generalised entropy: ds/dx = −x δ(x), which makes F = E − σS variational
    # Mermin, Phys. Rev. 137, A1441 (1965); Methfessel & Paxton, PRB 40, 3616 (1989)
    s = entropy_term(x, method)
    assert np.allclose(np.gradient(s, dx), -x * d, atol=1e-6)


def test_methfessel_paxton_second_moment_vanishes():
    # order-N MP integrates polynomials up to degree 2N+1 exactly: ∫x²δ₁ = 0, whereas ∫x²δ_Gauss = 1/2
    # Methfessel & Paxton, PRB 40, 3616 (1989), sec. II
    x = np.linspace(-40, 40, 160001)
    dx = x[1] - x[0]
    assert np.sum(x**2 * delta(x, "methfessel-paxton", mp_order=1)) * dx == pytest.approx(0.0, abs=1e-10)
    assert np.sum(x**4 * delta(x, "methfessel-paxton", mp_order=2)) * dx == pytest.approx(0.0, abs=1e-9)
    assert np.sum(x**2 * delta(x, "gaussian")) * dx == pytest.approx(0.5, abs=1e-10)


def test_tetrahedron_corner_weights_match_direct_integration():
    # Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), App. B: w_i = ∫_T λ_i(k) θ(ε_F − ε(k)) d³k / V_T
    rng = np.random.default_rng(SEED)
    lam = rng.dirichlet(np.ones(4), size=400_000)  # uniform points in a tetrahedron, barycentric
    e = np.sort(rng.normal(size=(3, 4)), axis=1)
    # one Fermi level in each of the three cases of the formulas
    eps = np.array([e[0, 0] + 0.4 * (e[0, 1] - e[0, 0]), 0.5 * (e[1, 1] + e[1, 2]),
                    e[2, 2] + 0.5 * (e[2, 3] - e[2, 2])])
    for row, ef in zip(e, eps, strict=True):
        occ = (lam @ row) < ef
        assert _tet_count(row[None], ef)[0] == pytest.approx(occ.mean(), abs=3e-3)
        assert np.allclose(_tet_weights(row[None], ef)[0], (lam * occ[:, None]).mean(0), atol=2e-3)
        # corner DOS is the energy derivative of the corner weights
        h = 1e-6
        num = (_tet_weights(row[None], ef + h) - _tet_weights(row[None], ef - h))[0] / (2 * h)
        assert np.allclose(_tet_corner_dos(row[None], ef)[0], num, atol=1e-7)


# ============================================================================================ Fermi level
@pytest.mark.parametrize("method", METHODS)
def test_half_filled_simple_cubic_fermi_level_at_onsite(method):
    # particle–hole symmetry of a nearest-neighbour band on the bipartite sc lattice: E_F = ε_s at half filling
    # Ashcroft & Mermin, Solid State Physics (1976), ch. 10 (dispersion); symmetry argument, no further source
    r = solve_on_mesh(simple_cubic(onsite_eV=0.3), mesh=(12, 12, 12), method=method, width_eV=0.1)
    assert r.fermi_level_eV == pytest.approx(0.3, abs=1e-9)
    assert r.gap_eV == 0.0
    assert np.sum(r.occupations) == pytest.approx(1.0, abs=1e-9)


def test_find_fermi_level_two_levels():
    # two flat levels −1 and +1 eV, one electron per cell: symmetric, E_F = 0 (common practice, no source)
    eigs = np.array([[-1.0, 1.0]])
    assert find_fermi_level(eigs, [1.0], 2.0, "gaussian", 0.1) == pytest.approx(0.0, abs=1e-9)
    assert find_fermi_level(eigs, [1.0], 2.0, "fermi-dirac", 0.1) == pytest.approx(0.0, abs=1e-9)


# ============================================================================================ band energies
def test_chain_half_filled_band_energy():
    # E = 2t cos 2πk; at half filling (E_F = 0) the occupied states are |k| < 1/4 for t < 0:
    # E_band = 2 ∫_{−1/4}^{1/4} 2t cos(2πk) dk = 4t/π = −4|t|/π per site, both spins
    # (textbook nearest-neighbour chain; Ashcroft & Mermin (1976), ch. 10, derived here)
    m = chain(t_eV=-1.3)
    exact = -4 * 1.3 / np.pi
    r = solve_on_mesh(m, mesh=(256, 5, 5))  # the non-periodic directions are forced to a single point
    assert r.mesh == (256, 1, 1)
    assert r.fermi_level_eV == pytest.approx(0.0, abs=1e-9)
    assert r.band_energy_eV == pytest.approx(exact, abs=2e-5)
    g = solve_on_mesh(m, mesh=(2000, 1, 1), method="methfessel-paxton", width_eV=0.05)
    assert g.band_energy_eV == pytest.approx(exact, abs=2e-4)


def test_square_lattice_half_filled_band_energy():
    # 2-D square lattice, E = 2t(cos 2πk1 + cos 2πk2): the half-filled Fermi surface is the diamond |k1|+|k2| = 1/2
    # and E_band = −16|t|/π² per site, both spins (∫_diamond cos = 8 in units k ∈ [−π, π]²; derived here)
    t = -0.7
    m = AnalyticSBand(np.diag([3.0, 3.0, 12.0]), [[1, 0, 0], [0, 1, 0]], [t, t], 0.0, 1.0, (True, True, False))
    r = solve_on_mesh(m, mesh=(64, 64, 64))
    assert r.mesh == (64, 64, 1)
    assert r.band_energy_eV == pytest.approx(-16 * abs(t) / np.pi**2, abs=2e-4)


def test_tetrahedron_agrees_with_dense_smearing_in_a_metal():
    # s band of the sc lattice at a non-symmetric filling (0.6 electrons): the tetrahedron result on 32³ and the
    # σ→0 Gaussian estimate on a denser mesh are two routes to the same integral (common practice, no source)
    m = simple_cubic(n_electrons=0.6)
    tet = solve_on_mesh(m, mesh=(32, 32, 32), method="tetrahedron")
    gau = solve_on_mesh(m, mesh=(48, 48, 48), method="gaussian", width_eV=0.1)
    mp = solve_on_mesh(m, mesh=(48, 48, 48), method="methfessel-paxton", width_eV=0.1)
    assert tet.band_energy_eV == pytest.approx(gau.band_energy_eV, abs=1e-4)
    assert tet.band_energy_eV == pytest.approx(mp.band_energy_eV, abs=1e-4)
    # E_F converges more slowly than E (which is stationary in μ): both lie within ~5 meV of the limit here,
    # from opposite sides
    assert tet.fermi_level_eV == pytest.approx(mp.fermi_level_eV, abs=1e-2)


@pytest.mark.parametrize("method", ["gaussian", "fermi-dirac"])
def test_sigma_to_zero_estimate_beats_raw_smeared_energy(method):
    # E(σ→0) ≈ (E + F)/2 for Fermi–Dirac and Gaussian smearing
    # Gillan, J. Phys.: Condens. Matter 1, 689 (1989); Kresse & Furthmüller, Comput. Mater. Sci. 6, 15 (1996)
    m = simple_cubic(n_electrons=0.6)
    ref = solve_on_mesh(m, mesh=(32, 32, 32), method="tetrahedron").band_energy_eV
    r = solve_on_mesh(m, mesh=(32, 32, 32), method=method, width_eV=0.2)
    assert r.free_energy_eV < r.smeared_energy_eV  # −σS ≤ 0
    assert abs(r.band_energy_eV - ref) < 0.2 * abs(r.smeared_energy_eV - ref)


def test_ssh_insulator_gap_and_midgap_fermi_level():
    # Su, Schrieffer & Heeger, PRB 22, 2099 (1980): E = ±|t1 + t2 e^{ik}|, gap 2|t1 − t2| at the zone boundary
    m = SSHChain(t1=-1.2, t2=-0.8)
    for method in METHODS:
        r = solve_on_mesh(m, mesh=(40, 1, 1), method=method, width_eV=0.02)
        assert r.gap_eV == pytest.approx(2 * 0.4, abs=1e-12)
        assert r.fermi_level_eV == pytest.approx(0.0, abs=1e-9)
    # band energy: Σ over the lower band, both spins, = −2⟨|t1 + t2 e^{ik}|⟩ (trapezoid rule on a periodic
    # integrand of a gapped band converges exponentially; common practice, no source)
    k = np.arange(4000) / 4000
    exact = -2 * np.mean(np.abs(-1.2 - 0.8 * np.exp(2j * np.pi * k)))
    assert solve_on_mesh(m, mesh=(400, 1, 1)).band_energy_eV == pytest.approx(exact, abs=1e-5)


def test_symmetry_reduction_changes_nothing():
    # the irreducible wedge with spglib weights must reproduce the full-mesh sums (spglib get_ir_reciprocal_mesh)
    hexagonal = np.array([[3.0, 0, 0], [-1.5, 1.5 * np.sqrt(3), 0], [0, 0, 4.0]])
    models = [
        simple_cubic(n_electrons=0.7),
        # triangular layers stacked along c: neighbours a1, a2, a1+a2 in-plane and c out of plane
        AnalyticSBand(hexagonal, [[1, 0, 0], [0, 1, 0], [1, 1, 0], [0, 0, 1]], [-1.0, -1.0, -1.0, -0.3], 0.0, 0.8),
    ]
    for m in models:
        for method in ("tetrahedron", "methfessel-paxton"):
            a = solve_on_mesh(m, mesh=(9, 9, 6), method=method, use_symmetry=True)
            b = solve_on_mesh(m, mesh=(9, 9, 6), method=method, use_symmetry=False)
            assert a.n_kpoints_irreducible < b.n_kpoints_irreducible
            assert a.band_energy_eV == pytest.approx(b.band_energy_eV, abs=1e-9)
            assert a.fermi_level_eV == pytest.approx(b.fermi_level_eV, abs=1e-9)


def test_full_and_empty_bands():
    # boundary fillings: nothing or everything occupied (common practice, no source)
    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (6, 6, 6))
    e = m.eigenvalues(kmesh.kfrac)
    for method in METHODS:
        full = integrate(e, kmesh, 2.0, method=method)
        assert full.band_energy_eV == pytest.approx(2 * 0.3, abs=1e-12)  # 2 × average band energy = 2ε
        empty = integrate(e, kmesh, 0.0, method=method)
        assert empty.band_energy_eV == 0.0


@seed(SEED)
@settings(max_examples=15, deadline=None)
@given(shift=st.floats(-20, 20), filling=st.floats(0.05, 3.95), method=st.sampled_from(METHODS))
def test_rigid_shift_moves_fermi_level_and_energy(shift, filling, method):
    # shifting every level by c shifts E_F by c and the band energy by c·N (energy zero is arbitrary; no source)
    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (6, 6, 6))
    e1 = m.eigenvalues(kmesh.kfrac)
    e = np.concatenate([e1, 0.5 * e1 + 0.8], axis=1)
    e.sort(axis=1)
    a = integrate(e, kmesh, filling, method=method, width_eV=0.1, reciprocal_A=m.crystal.reciprocal_A)
    b = integrate(e + shift, kmesh, filling, method=method, width_eV=0.1, reciprocal_A=m.crystal.reciprocal_A)
    assert b.fermi_level_eV == pytest.approx(a.fermi_level_eV + shift, abs=1e-8)
    assert b.band_energy_eV == pytest.approx(a.band_energy_eV + shift * filling, abs=1e-8)
    assert np.sum(b.occupations) == pytest.approx(filling, abs=1e-9)


# ============================================================================================ DOS
def test_simple_cubic_dos_edges_and_state_count():
    # band edges at ε ± 6|V| (Slater & Koster, Phys. Rev. 94, 1498 (1954): sc s band, from memory) and
    # 2 states per orbital with spin
    m = simple_cubic(onsite_eV=0.3, V_eV=-1.0)
    kmesh = irreducible_mesh(m.crystal, (16, 16, 16))
    e = m.eigenvalues(kmesh.kfrac)
    grid = np.linspace(-7.0, 7.6, 1461)
    d = density_of_states(e, kmesh, grid, method="tetrahedron", reciprocal_A=m.crystal.reciprocal_A)
    assert np.trapezoid(d.dos_per_eV, grid) == pytest.approx(2.0, abs=1e-6)
    assert d.states_below[-1] == pytest.approx(2.0, abs=1e-12)
    occupied = grid[d.dos_per_eV > 0]
    assert occupied.min() == pytest.approx(0.3 - 6.0, abs=0.011)
    assert occupied.max() == pytest.approx(0.3 + 6.0, abs=0.011)
    g = density_of_states(e, kmesh, grid, method="gaussian", width_eV=0.1)
    assert np.trapezoid(g.dos_per_eV, grid) == pytest.approx(2.0, abs=1e-6)
    assert g.states_below[-1] == pytest.approx(2.0, abs=1e-9)


def test_chain_dos_against_analytic():
    # chain E = 2t cos 2πk: D(E) = 2 / (π √(4t² − E²)) per site, both spins (derived from the dispersion)
    t = -1.0
    m = chain(t_eV=t)
    kmesh = irreducible_mesh(m.crystal, (4000, 1, 1))
    e = m.eigenvalues(kmesh.kfrac)
    energies = np.linspace(-1.5, 1.5, 31)
    exact = 2 / (np.pi * np.sqrt(4 * t**2 - energies**2))
    d = density_of_states(e, kmesh, energies, method="tetrahedron")
    # linear interpolation makes the DOS constant on each k-segment: relative error ≲ (D'/D)·ΔE_segment ≈ 2e-3
    assert np.allclose(d.dos_per_eV, exact, rtol=2e-3)
    # integrated: for t < 0, E(k) < E ⇔ |2πk| < arccos(−E/2|t|), so states below E = 2 arccos(−E/2|t|)/π
    # = 2(1 − arccos(E/2|t|)/π) per site, both spins (derived from the dispersion)
    below = 2 * (1 - np.arccos(energies / (2 * abs(t))) / np.pi)
    assert np.allclose(d.states_below, below, atol=1e-5)


@pytest.mark.parametrize("method", ["tetrahedron", "gaussian"])
def test_projected_dos_sums_to_total(method):
    # projections that sum to one per state give PDOS summing to the total DOS (completeness; no source)
    m = SSHChain()
    kmesh = irreducible_mesh(m.crystal, (60, 1, 1))
    e = m.eigenvalues(kmesh.kfrac)
    rng = np.random.default_rng(SEED)
    p = rng.random(e.shape + (1,))
    proj = np.concatenate([p, 1 - p], axis=2)
    grid = np.linspace(-2.5, 2.5, 201)
    d = density_of_states(e, kmesh, grid, method=method, width_eV=0.05, weights_projected=proj)
    assert d.projected_per_eV.shape == (201, 2)
    assert np.allclose(d.projected_per_eV.sum(1), d.dos_per_eV, atol=1e-10)
    assert np.all(d.projected_per_eV[:, 0] <= d.dos_per_eV + 1e-12)


# ============================================================================================ errors
def test_bad_method_name():
    with pytest.raises(ParameterError, match="unknown Brillouin-zone integration method 'linear'.*allowed: tetra"):
        solve_on_mesh(simple_cubic(), mesh=(2, 2, 2), method="linear")


def test_electron_count_out_of_range():
    with pytest.raises(ParameterError, match=r"n_electrons = 3\.0 is outside the allowed range 0 … 2"):
        solve_on_mesh(simple_cubic(n_electrons=3.0), mesh=(2, 2, 2))
    with pytest.raises(ParameterError, match=r"n_electrons = -1 is outside"):
        find_fermi_level(np.zeros((1, 1)), [1.0], -1)


def test_unsorted_or_nonfinite_eigenvalues():
    kmesh = irreducible_mesh(simple_cubic().crystal, (2, 2, 2))
    e = np.tile([0.0, 1.0], (len(kmesh.weights), 1))
    e[1] = [1.0, 0.5]
    with pytest.raises(ParameterError, match="must ascend.*k-point index 1 band index 1 lies 0.5 eV"):
        integrate(e, kmesh, 1.0)
    e[1] = [np.nan, 1.0]
    with pytest.raises(ParameterError, match="NaN or infinite"):
        integrate(e, kmesh, 1.0)


def test_bad_width_and_tetrahedron_without_mesh():
    with pytest.raises(ParameterError, match="width_eV must be a positive number of eV.*got 0"):
        solve_on_mesh(simple_cubic(), mesh=(2, 2, 2), method="gaussian", width_eV=0)
    with pytest.raises(ParameterError, match="needs the k-mesh"):
        find_fermi_level(np.zeros((1, 1)), [1.0], 1.0, method="tetrahedron")


@pytest.mark.parametrize("method", ["tetrahedron", "gaussian"])
def test_projected_dos_integrates_to_projection_weights_3d(method):
    # ∫ PDOS_j dE = g Σ_k w_k Σ_n p_knj: each state's weight is spread, not lost (sum rule; no source)
    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (8, 8, 8), use_symmetry=False)  # random projections are not symmetric
    e = np.concatenate([m.eigenvalues(kmesh.kfrac), 0.5 * m.eigenvalues(kmesh.kfrac) + 1.0], axis=1)
    e.sort(axis=1)
    rng = np.random.default_rng(SEED)
    proj = rng.random(e.shape + (3,))
    grid = np.linspace(-7.0, 8.0, 1501)
    d = density_of_states(e, kmesh, grid, method=method, width_eV=0.05, weights_projected=proj,
                          reciprocal_A=m.crystal.reciprocal_A)
    expected = 2 * np.einsum("k,knj->j", kmesh.weights, proj)
    assert np.allclose(np.trapezoid(d.projected_per_eV, grid, axis=0), expected, rtol=2e-4)
    assert np.trapezoid(d.dos_per_eV, grid) == pytest.approx(4.0, rel=1e-5)


# ============================================================================================ through the model
def _pz_params(**species):
    from screener.tb.param_file import parameters_from_dict

    return parameters_from_dict({"species": {"C": {"orbitals": ["pz"], "onsite_eV": {"pz": 0.0},
                                                   "valence_electrons": 1, **species}}}, ["C"])


def test_model_chain_half_filled_band_energy():
    # π band of an isolated chain from build_model, E = 2 V_ppπ cos 2πk: half filling gives −4|V_ppπ|/π per site
    # (Slater & Koster 1954 two-centre form; chain integral derived in test_chain_half_filled_band_energy)
    from screener.tb.model import build_model

    a = 2.2
    params = _pz_params()
    model = build_model(Crystal(np.diag([a, 12.0, 12.0]), [[0, 0.5, 0.5]], ["C"]), params)
    v_pi = float(params.bond("C", "C").hoppings(np.array([a]))["pp_pi"][0])
    r = solve_on_mesh(model, mesh=(400, 400, 400))
    assert r.mesh == (400, 1, 1)
    assert r.band_energy_eV == pytest.approx(-4 * abs(v_pi) / np.pi, abs=1e-5)
    default = solve_on_mesh(model)  # mesh from the default k-spacing, single point across the chain
    assert default.mesh[1:] == (1, 1) and default.mesh[0] > 1
    assert default.band_energy_eV == pytest.approx(r.band_energy_eV, abs=0.02)


def test_model_dimerised_chain_gap_is_twice_the_hopping_difference():
    # Su, Schrieffer & Heeger, PRB 22, 2099 (1980): alternating hoppings t1, t2 open a gap 2|t1 − t2| at the zone
    # boundary, with the Fermi level mid-gap at half filling
    from screener.tb.model import build_model

    a, d = 2.2, 0.02
    params = _pz_params()
    crystal = Crystal(np.diag([2 * a, 12.0, 12.0]), [[0, 0.5, 0.5], [0.5 - d, 0.5, 0.5]], ["C", "C"])
    model = build_model(crystal, params)
    t1, t2 = params.bond("C", "C").hoppings(np.array([2 * a * (0.5 - d), 2 * a * (0.5 + d)]))["pp_pi"]
    for method in METHODS:
        r = solve_on_mesh(model, mesh=(24, 1, 1), method=method, width_eV=0.02)
        assert r.gap_eV == pytest.approx(2 * abs(t1 - t2), abs=1e-9)
        assert r.fermi_level_eV == pytest.approx(0.0, abs=1e-9)


def test_model_spin_orbit_basis_gives_the_same_band_energy():
    # an s-only basis has no orbital moment, so spin–orbit coupling changes nothing: the doubled basis with
    # spin_degeneracy 1 must reproduce the spin-degenerate band energy (L = 0; textbook atomic physics)
    from screener.tb.model import build_model
    from screener.tb.param_file import parameters_from_dict

    def sc(**extra):
        ps = parameters_from_dict({
            "species": {"Po": {"orbitals": ["s"], "onsite_eV": {"s": 0.0}, "valence_electrons": 0.7, **extra}},
            "bond": {"Po-Po": {"law": "power", "r0_A": 2.5, "exponent": 2, "V_eV": {"ss_sigma": -0.8}}},
        }, ["Po"])
        return build_model(Crystal(np.eye(3) * 2.5, [[0, 0, 0]], ["Po"]), ps)

    plain, soc = sc(), sc(soc_eV=0.3)
    assert (plain.spin_degeneracy, soc.spin_degeneracy) == (2, 1)
    a = solve_on_mesh(plain, mesh=(10, 10, 10))
    b = solve_on_mesh(soc, mesh=(10, 10, 10))
    assert b.band_energy_eV == pytest.approx(a.band_energy_eV, abs=1e-9)
    assert b.fermi_level_eV == pytest.approx(a.fermi_level_eV, abs=1e-9)


def test_folded_chain_matches_the_primitive_chain_on_an_even_mesh():
    # the same chain described with two equal sites per cell (bands folded at k = 1/2, where E_F sits on a grid
    # point of an even mesh) must give the same band energy per site as the one-site cell on the doubled mesh:
    # the linear interpolation is identical (exact identity of the sampling; no source)
    one = solve_on_mesh(chain(t_eV=-1.3), mesh=(64, 1, 1))
    two = solve_on_mesh(SSHChain(t1=-1.3, t2=-1.3), mesh=(32, 1, 1))
    assert two.band_energy_eV / 2 == pytest.approx(one.band_energy_eV, abs=1e-9)
    assert two.gap_eV == 0.0


def _brute_force_tetrahedron(e_ir, kmesh, n_electrons, reciprocal_A):
    """Fermi level, band energy and occupations with Blöchl's formulas applied to every band-tetrahedron.

    Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), App. B and eq. 22: no pre-selection of rows, every
    tetrahedron sorted, the count solved over the whole band range, weights scattered with numpy.add.at.
    """
    from scipy.optimize import brentq

    from screener.bz.tetrahedron import _tet_dos, _tetra_offsets

    mesh = tuple(int(m) for m in kmesh.mesh)
    grid_to_ir = np.empty(int(np.prod(mesh)), dtype=int)
    addr = np.mod(np.asarray(kmesh.grid_address), mesh)
    grid_to_ir[np.ravel_multi_index(addr.T, mesh)] = kmesh.mapping
    base = np.stack(np.unravel_index(np.arange(len(grid_to_ir)), mesh), 1)
    corners = np.mod(base[:, None, None, :] + _tetra_offsets(np.array(mesh), reciprocal_A)[None], mesh)
    corner_ir = grid_to_ir[np.ravel_multi_index(np.moveaxis(corners.reshape(-1, 4, 3), -1, 0), mesh)]
    nt, nb = len(corner_ir), e_ir.shape[1]
    e = np.moveaxis(e_ir[corner_ir], 1, 2).reshape(-1, 4)
    order = np.argsort(e, axis=1, kind="stable")
    e = np.take_along_axis(e, order, axis=1)
    mu = brentq(lambda m: 2 * _tet_count(e, m).sum() / nt - n_electrons, e.min() - 1e-6, e.max() + 1e-6,
                xtol=1e-13)
    h = 1e-9 * max(1.0, e.max() - e.min())
    d_f = 0.5 * (_tet_dos(e, mu - h) + _tet_dos(e, mu + h))
    w = _tet_weights(e, mu) + d_f[:, None] / 40.0 * (e.sum(1, keepdims=True) - 4 * e)
    rows = np.arange(len(e))
    ir = np.take_along_axis(corner_ir[rows // nb], order, axis=1)
    occ = np.zeros_like(e_ir)
    np.add.at(occ, (ir, np.broadcast_to((rows % nb)[:, None], ir.shape)), 2 * w / nt)
    return mu, float(np.sum(occ * e_ir)), occ


@pytest.mark.parametrize("use_symmetry", [False, True])
def test_tetrahedron_fast_path_matches_brute_force(use_symmetry):
    # the row pre-selection (wholly below / above / straddling) must reproduce the plain formulas over all
    # rows (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994)) to rounding, for metallic fillings and ties
    rng = np.random.default_rng(SEED)
    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (6, 5, 4) if not use_symmetry else (6, 6, 6), use_symmetry=use_symmetry)
    e1 = m.eigenvalues(kmesh.kfrac)
    if use_symmetry:
        cases = [np.sort(np.concatenate([e1, 0.5 * e1 + 0.8, np.round(0.3 * e1, 1)], axis=1), axis=1)]
    else:
        noisy = np.sort(rng.normal(size=(len(e1), 3)), axis=1)
        cases = [noisy, np.round(noisy, 1)]  # rounding creates tied corners and rows of zero width
    for e in cases:
        for n in (0.37, 1.0, 2.9, 4.6):
            fast = integrate(e, kmesh, n, reciprocal_A=m.crystal.reciprocal_A)
            mu, energy, occ = _brute_force_tetrahedron(e, kmesh, n, m.crystal.reciprocal_A)
            assert fast.fermi_level_eV == pytest.approx(mu, abs=1e-10)
            assert fast.band_energy_eV == pytest.approx(energy, abs=1e-10)
            assert np.allclose(fast.occupations, occ, rtol=0, atol=1e-10)


@pytest.mark.parametrize("use_symmetry", [False, True])
def test_tetrahedron_occupations_with_and_without_the_fermi_window(use_symmetry):
    # occupations read the straddling rows from the Fermi-level window when it holds them, else from each band's
    # row extremes; both must reproduce the plain formulas over all rows (Blöchl, Jepsen & Andersen, PRB 49,
    # 16223 (1994)), also at energies outside the last window and with tied corners
    from screener.bz.tetra_grid import _TetrahedronGrid

    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (6, 5, 4) if not use_symmetry else (6, 6, 6), use_symmetry=use_symmetry)
    e1 = m.eigenvalues(kmesh.kfrac)
    e = np.sort(np.concatenate([e1, 0.5 * e1 + 0.8, np.round(0.3 * e1, 1)], axis=1), axis=1)
    for n in (0.37, 2.9, 4.6):
        mu, _, occ = _brute_force_tetrahedron(e, kmesh, n, m.crystal.reciprocal_A)
        warm = _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A)
        mu_fast = warm.fermi_level(n, 2)
        via_window = 2 * warm.occupations(mu_fast)
        fresh = 2 * _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A).occupations(mu_fast)  # no window yet
        assert np.array_equal(via_window, fresh)
        assert np.allclose(via_window, occ, rtol=0, atol=1e-10)
        assert mu_fast == pytest.approx(mu, abs=1e-10)
        # far from the window: the window cannot serve, the row extremes must
        other = float(np.quantile(e, 0.9))
        assert np.array_equal(warm.occupations(other),
                              _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A).occupations(other))
        assert 2 * warm.occupations(other).sum() == pytest.approx(2 * warm.count(other), abs=1e-12)


def test_tetrahedron_window_from_band_edges_equals_the_full_pass():
    # a band entering the Fermi-level window at its top or bottom is searched from its few points there; the rows,
    # corner energies and count below must be those of the pass over all its rows (so must the count inside), and
    # the count at the level from Blöchl's formula over every row must hold the electrons (Blöchl, Jepsen &
    # Andersen, PRB 49, 16223 (1994), App. B)
    from screener.bz.tetra_grid import _TetrahedronGrid

    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, (8, 8, 8))
    e1 = m.eigenvalues(kmesh.kfrac)
    e = np.sort(np.concatenate([e1, 0.5 * e1 + 0.8, np.round(0.3 * e1, 1) + 2.0], axis=1), axis=1)
    mu, _, _ = _brute_force_tetrahedron(e, kmesh, 1.0, m.crystal.reciprocal_A)
    probe = _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A)
    assert probe.mult is not None  # the distinct-tetrahedra path the edge search serves
    width = float(e.max() - e.min())
    edges = [float(probe.band_max[b]) for b in range(3)] + [float(probe.band_min[b]) for b in range(3)]
    used = 0
    for edge in edges:
        for lo, hi in ((edge - 0.02 * width, edge + 0.01 * width), (edge - 1e-3, edge), (edge, edge + 1e-3)):
            fresh = _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A)
            called = []
            original = fresh._edge_rows
            fresh._edge_rows = lambda b, a, z: called.append(b) or original(b, a, z)
            win = fresh._window(lo, hi)
            used += sum(fresh._rows_of_band[b] is None for b in called)
            full = _TetrahedronGrid(e, kmesh, m.crystal.reciprocal_A)
            full._prepare_rows(range(full.n_bands))  # every band's rows known: the full pass
            ref = full._window(lo, hi)
            assert win.below == ref.below
            assert all(np.array_equal(x, y) for x, y in zip(win.arrays, ref.arrays))
            for eps in (lo, 0.5 * (lo + hi), hi):
                if lo < eps <= hi:
                    assert win.count_slope(eps)[0] == ref.count_slope(eps)[0]
    assert used > 0  # some band was found from its edge points
    assert probe.count(mu) * 2 == pytest.approx(1.0, abs=1e-10)


def test_sorting_networks_match_numpy_stable_argsort():
    # the four-corner sorting networks must equal numpy's stable argsort (the reference), ties included:
    # every row over {0, 1, 2}^4 and random rows with many ties
    import itertools

    from screener.bz.tetrahedron import _sort4, _sort4_stable

    rng = np.random.default_rng(SEED)
    rows = np.concatenate([np.array(list(itertools.product(range(3), repeat=4)), float),
                           np.round(rng.normal(size=(500, 4)), 1)])
    corner = rng.integers(0, 1000, size=rows.shape)
    e, c = _sort4_stable(rows, corner)
    order = np.argsort(rows, axis=1, kind="stable")
    assert np.array_equal(e, np.take_along_axis(rows, order, axis=1))
    assert np.array_equal(c, np.take_along_axis(corner, order, axis=1))
    assert np.array_equal(np.stack(_sort4(rows), 1), np.sort(rows, axis=1))


def test_weighted_level_selection_matches_numpy_sort_and_search():
    # the Fermi-level start's weighted selection must equal numpy's argsort + cumsum + searchsorted (the
    # reference) for whole-number weights, ties and the end points included
    from screener.bz.tetra_grid import _weighted_level

    rng = np.random.default_rng(SEED + 4)
    for size in (1, 7, 2048, 2049, 5000, 40000):
        for e in (rng.normal(size=size), np.round(rng.normal(size=size), 1), np.full(size, 0.5)):
            w = rng.integers(1, 49, size=size).astype(float)
            order = np.argsort(e)
            cum = np.cumsum(w[order])
            for frac in (0.0, 1e-12, float(rng.random()), 0.5, 1 - 1e-12, 1.0):
                target = frac * float(w.sum())
                ref = e[order[min(int(np.searchsorted(cum, target)), size - 1)]]
                assert _weighted_level(e, w, target) == ref


def test_tetrahedron_row_extremes_and_count_match_corner_energies():
    # band-major rows b·T + t: lowest/highest corner energy and the count against Blöchl's formula applied to
    # every row (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), App. B)
    from screener.bz.tetra_grid import _TetrahedronGrid
    from screener.bz.tetrahedron import _tetra_offsets

    rng = np.random.default_rng(SEED + 1)
    m = simple_cubic()
    for mesh, sym in (((5, 4, 3), False), ((6, 6, 6), True)):
        kmesh = irreducible_mesh(m.crystal, mesh, use_symmetry=sym)
        e_ir = np.sort(rng.normal(size=(len(kmesh.kfrac), 3)), axis=1)
        grid = _TetrahedronGrid(e_ir, kmesh, m.crystal.reciprocal_A)
        grid_to_ir = np.empty(int(np.prod(mesh)), dtype=int)
        grid_to_ir[np.ravel_multi_index(np.mod(kmesh.grid_address, mesh).T, mesh)] = kmesh.mapping
        base = np.stack(np.unravel_index(np.arange(len(grid_to_ir)), mesh), 1)
        offs = _tetra_offsets(np.array(mesh), m.crystal.reciprocal_A)  # (6, 4, 3), tetrahedron j·N + p
        corners = np.mod(offs[:, None] + base[None, :, None, :], mesh).reshape(-1, 4, 3)
        corner_ir = grid_to_ir[np.ravel_multi_index(np.moveaxis(corners, -1, 0), mesh)]  # (T, 4)
        e_rows = np.moveaxis(e_ir[corner_ir], 2, 0).reshape(-1, 4)  # row b·T + t
        assert np.array_equal(grid.row_min, e_rows.min(1))
        assert np.array_equal(grid.row_max, e_rows.max(1))
        e_sorted = np.sort(e_rows, axis=1)
        for eps in (-1.5, -0.2, 0.0, 0.7, float(e_ir[3, 1])):
            assert grid.count(eps) == pytest.approx(_tet_count(e_sorted, eps).sum() / len(corner_ir), abs=1e-12)


@pytest.mark.parametrize("mesh", [(7, 1, 1), (6, 6, 1), (5, 4, 6)])
def test_tetrahedron_newton_fermi_level_matches_brute_force(mesh):
    # the safeguarded Newton search must land on Brent's root of the full-row count (Blöchl, Jepsen & Andersen,
    # PRB 49, 16223 (1994)): flattened meshes (DOS jumps at corner energies), a nearly flat band crossing a wide
    # one (slope varying by orders of magnitude), fillings near band edges
    rng = np.random.default_rng(SEED + 2)
    m = simple_cubic()
    kmesh = irreducible_mesh(m.crystal, mesh, use_symmetry=False)
    nk = len(kmesh.kfrac)
    wide = np.sort(rng.normal(size=(nk, 2)) * 2.0, axis=1)
    flat = 0.1 + 1e-3 * rng.normal(size=(nk, 1))
    e = np.sort(np.concatenate([wide, flat], axis=1), axis=1)
    for n in (0.01, 0.37, 2.0, 2.02, 3.3, 5.99):
        fast = integrate(e, kmesh, n, reciprocal_A=m.crystal.reciprocal_A)
        mu, energy, occ = _brute_force_tetrahedron(e, kmesh, n, m.crystal.reciprocal_A)
        assert fast.fermi_level_eV == pytest.approx(mu, abs=1e-10)
        assert fast.band_energy_eV == pytest.approx(energy, abs=1e-10)
        assert np.allclose(fast.occupations, occ, rtol=0, atol=1e-10)


def test_fused_blochl_weights_equal_the_separate_formulas():
    # one pass over the pieces must give exactly _tet_weights + Blöchl's correction with the mean of _tet_dos at
    # ε ∓ h (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), eq. 22), also for corners within h of ε
    from screener.bz.tetrahedron import _tet_dos, _tet_weights_blochl

    rng = np.random.default_rng(SEED + 3)
    e = np.sort(np.round(rng.normal(size=(4000, 4)), 2), axis=1)
    h = 1e-9
    for eps in (0.0, 0.13, -0.5 + 0.5e-9, 1.7):
        d_f = 0.5 * (_tet_dos(e, eps - h) + _tet_dos(e, eps + h))
        ref = _tet_weights(e, eps) + d_f[:, None] / 40.0 * (e.sum(1, keepdims=True) - 4 * e)
        assert np.array_equal(_tet_weights_blochl(e, eps, h), ref)
