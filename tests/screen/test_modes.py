"""Force constants Φ(q) of the parent from the tight-binding model (screener.screen.modes)."""

import numpy as np
import pytest

from screener.bz.integrate import solve_on_mesh
from screener.errors import ParameterError
from screener.screen.modes import band_force_constants, mesh_states, stiffness
from screener.screen.parent import build_parent
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.tb.model import build_model
from screener.tb.params import BondParams, ParameterSet, default_species


def _chain(a=3.0, params=None):
    cr = Crystal(np.diag([a, 12.0, 12.0]), [[0, 0, 0]], ("Li",))
    return build_parent(cr, params, ScreenSettings(closure="equilibrium"), standardise=False)


def _ssh_params():
    # Su, Schrieffer & Heeger, PRL 42, 1698 (1979): t0 = 2.5 eV, α = 4.1 eV/Å, K = 21 eV/Å² (polyacetylene)
    bond = BondParams(pair=("Li", "Li"), law="linear", r0_A=1.22, V_eV={"ss_sigma": -2.5},
                      slope_eV_per_A={"ss_sigma": 4.1}, spring_eV_per_A2=21.0, cutoff_A=1.5)
    return ParameterSet(species_params={"Li": default_species("Li")}, bond_params={("Li", "Li"): bond})


def _fd_free_energy(parent, q, e, mesh_super, width, h=0.01):
    """Second difference of the band free energy per primitive cell along u_s(L) = e_s Re exp(2πi q·L)."""
    cr = parent.crystal
    den = int(round(1 / q[0]))
    m = np.diag([den, 1, 1])
    ref = cr.supercell(m)
    bonds = parent.supercell_bonds(m, ref)
    cells = ref.frac @ m - cr.frac[np.repeat(np.arange(cr.n_atoms), den)]
    wave = np.real(np.exp(2j * np.pi * (cells @ q)))

    def free(lam):
        u = lam * wave[:, None] * np.repeat(e.reshape(-1, 3), den, axis=0)
        c2 = Crystal(ref.lattice_A, ref.frac + u @ np.linalg.inv(ref.lattice_A), ref.species)
        r = solve_on_mesh(build_model(c2, parent.params, bonds=bonds), mesh_super, method="fermi-dirac",
                          width_eV=width, use_symmetry=False)
        return r.free_energy_eV / den

    return (free(h) - 2 * free(0.0) + free(-h)) / h**2


def test_band_part_matches_finite_difference_in_supercell():
    # analytic: second-order perturbation theory equals the second derivative of the smeared free energy
    # (Mermin, Phys. Rev. 137, A1441 (1965): F is stationary in the occupations, so ∂²F = Hellmann–Feynman + response)
    p = _chain()
    q = np.array([0.5, 0, 0])
    st = mesh_states(p.model, (40, 1, 1), width_eV=0.1)
    phi = band_force_constants(p.model, st, q)
    fd = _fd_free_energy(p, q, np.array([1.0, 0, 0]), (20, 1, 1), 0.1)
    assert phi[0, 0].real == pytest.approx(fd, rel=0.01)


def test_ssh_chain_soft_at_half_and_perturbative_equals_finite_difference():
    # Su, Schrieffer & Heeger, PRL 42, 1698 (1979): the half-filled chain dimerises (soft at q = 1/2)
    p = _chain(1.22, _ssh_params())
    q = np.array([0.5, 0, 0])
    s = stiffness(p, q, mesh=(60, 1, 1), width_eV=0.05)
    fd_band = _fd_free_energy(p, q, np.array([1.0, 0, 0]), (30, 1, 1), 0.05, h=0.001)
    assert s.band_eV_per_A2[0, 0].real == pytest.approx(fd_band, rel=0.01)
    # spring: 2 bonds' worth of (c = −2)² K / 2 per cell → 4 K along the chain (analytic)
    assert s.elastic_eV_per_A2[0, 0].real == pytest.approx(4 * 21.0, rel=1e-9)
    assert s.eigenvalues_eV_per_A2[0] < 0
    assert abs(s.patterns[0, 0]) == pytest.approx(1.0, abs=1e-6)


def test_half_filled_chain_softens_as_the_mesh_is_refined():
    # Peierls, Quantum Theory of Solids (1955): the response at 2k_F diverges logarithmically as T → 0; with a
    # smearing shrinking with the mesh step (σ = 30 eV / n, about two level spacings at E_F) it grows more
    # negative, by a similar step for each factor 4 of the mesh (logarithmic)
    p = _chain()
    q = np.array([0.5, 0, 0])
    vals = [band_force_constants(p.model, mesh_states(p.model, (n, 1, 1), width_eV=30.0 / n), q)[0, 0].real
            for n in (32, 128, 512)]
    assert vals[0] > vals[1] > vals[2]
    assert (vals[1] - vals[2]) == pytest.approx(vals[0] - vals[1], rel=0.3)


def test_two_thirds_filling_softest_at_one_third():
    # analytic (Peierls 1955): 2 k_F = 2/3 · ½ ·2 → q = 1/3 for 2/3 electron per site
    p = _chain()
    st = mesh_states(p.model, (96, 1, 1), width_eV=0.02, n_electrons=2 / 3)
    qs = [np.array([x, 0, 0]) for x in (1 / 6, 1 / 4, 1 / 3, 5 / 12, 1 / 2)]
    long_ = [band_force_constants(p.model, st, q)[0, 0].real for q in qs]
    assert int(np.argmin(long_)) == 2


def test_acoustic_sum_rule_at_gamma():
    # analytic: a rigid translation costs nothing (acoustic sum rule)
    from pathlib import Path

    from screener.structure.formats import read_structure

    cr = read_structure(Path(__file__).parents[1] / "data" / "Si_diamond_primitive.cif")
    p = build_parent(cr)
    s = stiffness(p, (0, 0, 0), mesh=(6, 6, 6), width_eV=0.1)
    trans = np.kron(np.ones((p.crystal.n_atoms, 1)), np.eye(3)) / np.sqrt(p.crystal.n_atoms)
    phi = s.total_eV_per_A2
    assert np.max(np.abs(phi @ trans)) < 1e-4 * np.max(np.abs(phi))


def test_q_off_the_mesh_is_refused():
    p = _chain()
    st = mesh_states(p.model, (10, 1, 1))
    with pytest.raises(ParameterError, match="not on the"):
        band_force_constants(p.model, st, (1 / 3, 0, 0))


def test_simple_cubic_as_softest_at_R_with_the_body_diagonal_alternation_soft():
    # A7 arsenic as a pairing distortion of simple cubic along a body diagonal at R = (½,½,½) (Schiferl & Barrett,
    # J. Appl. Cryst. 2, 30 (1969); Sci. Rep. 6, 20337 (2016)); the three R patterns are degenerate in Pm-3m, so
    # the body diagonal lies in the soft subspace
    from pathlib import Path

    from screener.screen.modes import mesh_states as states_of
    from screener.structure.formats import read_structure

    p = build_parent(read_structure(Path(__file__).parents[1] / "data" / "known_phases" /
                                    "As_simple_cubic_parent.cif"))
    st = states_of(p.model, (8, 8, 8))
    qs = [(0.5, 0.5, 0.5), (0.5, 0.5, 0), (0.5, 0, 0), (0.25, 0.25, 0.25)]
    low = [stiffness(p, q, states=st).eigenvalues_eV_per_A2[0] for q in qs]
    assert int(np.argmin(low)) == 0 and low[0] < 0
    s = stiffness(p, qs[0], states=st)
    soft = s.patterns[:, np.abs(s.eigenvalues_eV_per_A2 - low[0]) < 1e-6 * abs(low[0])]
    diag = np.ones(3) / np.sqrt(3)
    assert np.linalg.norm(soft.conj().T @ diag) == pytest.approx(1.0, abs=1e-6)


def test_cli_modes_json_keys(capsys):
    import json
    from pathlib import Path

    from screener.show.cli import main

    f = Path(__file__).parents[1] / "data" / "known_phases" / "As_simple_cubic_parent.cif"
    assert main(["modes", str(f), "--json", "--q-grid", "2"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert {"q_points", "soft", "searched"} <= set(out)
    first = out["q_points"][0]
    assert {"q_frac", "stiffness_eV_per_A2", "patterns", "chi0"} <= set(first)
    assert first["stiffness_eV_per_A2"] == sorted(first["stiffness_eV_per_A2"])
    # Pm-3m has four stars among {0, ½}³: Γ, X, M, R (International Tables for Crystallography A, No. 221)
    assert len(out["searched"]) == 4
    assert out["soft"][0]["q_frac"] == [0.5, 0.5, 0.5]
