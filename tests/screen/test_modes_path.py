"""χ0 and the lowest stiffness along the special-point route (screener.screen.modes.path_survey)."""

import json
from pathlib import Path

import numpy as np
import pytest

from screener.screen.modes import mesh_states, path_survey, route_on_mesh, survey
from screener.screen.parent import build_parent
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.tb.params import BondParams, ParameterSet, default_species

AS_CUBIC = Path(__file__).parents[1] / "data" / "known_phases" / "As_simple_cubic_parent.cif"
HOP_EV = 2.5


def _chain():
    """One s orbital per site, nearest neighbours only: ε(k) = 2 V cos(2πk) with V = −2.5 eV at d = r0.

    Su, Schrieffer & Heeger, PRL 42, 1698 (1979): t0 = 2.5 eV, α = 4.1 eV/Å, K = 21 eV/Å² (polyacetylene)."""
    bond = BondParams(pair=("Li", "Li"), law="linear", r0_A=1.22, V_eV={"ss_sigma": -HOP_EV},
                      slope_eV_per_A={"ss_sigma": 4.1}, spring_eV_per_A2=21.0, cutoff_A=1.5)
    params = ParameterSet(species_params={"Li": default_species("Li")}, bond_params={("Li", "Li"): bond})
    cr = Crystal(np.diag([1.22, 12.0, 12.0]), [[0, 0, 0]], ("Li",))
    return build_parent(cr, params, ScreenSettings(closure="equilibrium"), standardise=False)


def test_chain_route_is_every_mesh_point_from_gamma_to_the_zone_boundary():
    # analytic: the periodic direction of a chain runs from Γ to the zone boundary q = ½ along it; on an N-point
    # mesh the route passes q = n/N, n = 0 … N/2, each once and in order
    p = _chain()
    q, dist, labels, miss, segments, _ = route_on_mesh(p, (40, 1, 1))
    assert np.allclose(q[:, 0] * 40, np.arange(21)) and np.allclose(q[:, 1:], 0)
    assert labels[0] == "Γ" and labels[-1] != "" and all(lab == "" for lab in labels[1:-1])
    # path length: |q| in Å⁻¹ with 2π, i.e. 2π n / (N a) (analytic)
    assert np.allclose(dist, 2 * np.pi * np.arange(21) / (40 * 1.22))
    assert np.allclose(miss, 0) and segments == ((0, 21),)


def test_half_filled_chain_chi0_peaks_at_two_k_f_and_equals_the_dos_at_gamma():
    # Peierls, Quantum Theory of Solids (1955); Lindhard (1954): the 1-D χ0 of a half-filled band has its
    # (log-divergent) maximum at 2k_F = ½ (from memory)
    p = _chain()
    st = mesh_states(p.model, (240, 1, 1), width_eV=0.15)
    r = path_survey(p, states=st)
    assert r.kmesh == (240, 1, 1) and len(r.q_frac) == 121
    top = r.maxima()[0]
    assert top["q_frac"] == pytest.approx([0.5, 0.0, 0.0])
    assert int(np.argmax(r.chi0_with_overlaps)) == len(r.q_frac) - 1
    # one orbital per cell: every overlap factor is 1, both forms agree (analytic)
    assert np.allclose(r.chi0_with_overlaps, r.chi0_without_overlaps, rtol=1e-12, atol=1e-12)
    # χ0(q = 0) = N(E_F); for ε = 2V cos ka at half filling N(E_F) = 1/(π|V|) per cell, both spins (from memory:
    # the 1-D tight-binding density of states 1/(π √(4V² − E²)) per spin); smearing and mesh cost below 1 %
    assert r.chi0_with_overlaps[0] == pytest.approx(1 / (np.pi * HOP_EV), rel=0.01)
    # Su, Schrieffer & Heeger (1979): the half-filled chain is softest at q = ½ (dimerisation), and unstable there
    assert int(np.argmin(r.lowest_stiffness_eV_per_A2)) == len(r.q_frac) - 1
    assert r.lowest_stiffness_eV_per_A2[-1] < 0


def test_two_thirds_filled_chain_chi0_peaks_at_one_third():
    # analytic: 2 k_F = 1/3 for 2/3 electron per site of a one-orbital chain (both spins)
    p = _chain()
    st = mesh_states(p.model, (240, 1, 1), width_eV=0.15, n_electrons=2 / 3)
    r = path_survey(p, states=st)
    assert r.maxima()[0]["q_frac"] == pytest.approx([1 / 3, 0.0, 0.0])


def test_chain_route_values_equal_the_survey_at_its_grid_points():
    # the route is evaluated on the survey's own mesh and eigenvectors: at q on the survey's grid the values must be
    # the survey's (consistency of the two entry points; the survey's grid is Γ, ¼, ⅓, ½ here)
    p = _chain()
    res = survey(p, 4)
    r = path_survey(p, 4)
    assert r.kmesh == res.kmesh
    matched = 0
    for q, s, chi in zip(res.searched, res.stiffness, res.chi0_states_per_eV, strict=True):
        a = np.flatnonzero(np.all(np.abs(r.q_frac - np.asarray(q)) < 1e-12, axis=1))
        assert len(a) == 1
        matched += 1
        assert r.lowest_stiffness_eV_per_A2[a[0]] == pytest.approx(s.eigenvalues_eV_per_A2[0], rel=1e-10, abs=1e-10)
        assert r.chi0_with_overlaps[a[0]] == pytest.approx(chi[0], rel=1e-12)
        assert r.chi0_without_overlaps[a[0]] == pytest.approx(chi[1], rel=1e-12)
    assert matched == 4


def _same_star(q1, q2, rotations) -> bool:
    """q2 ≡ Rᵀ q1 or −Rᵀ q1 modulo the reciprocal lattice for a rotation R of the parent."""
    star = np.einsum("nji,j->ni", rotations, np.asarray(q1, dtype=float))
    diff = np.concatenate([star, -star]) - np.asarray(q2, dtype=float)
    return bool(np.any(np.all(np.abs(diff - np.round(diff)) < 1e-9, axis=1)))


def test_simple_cubic_route_values_equal_the_survey_on_its_grid():
    # Φ(q)'s eigenvalues and χ0 are the same for every q of a star (the parent's rotations map one onto the other;
    # time reversal q → −q), so each route point on the survey's grid must carry the survey's values (International
    # Tables for Crystallography A, No. 221: Γ, X, M, R are the stars of {0, ½}³ in Pm-3m)
    from screener.structure.formats import read_structure

    p = build_parent(read_structure(AS_CUBIC))
    res = survey(p, 2)
    r = path_survey(p, 2, n_per_leg=1)
    rots = np.asarray(p.symmetry.rotations)
    found = set()
    for a, q in enumerate(r.q_frac):
        for b, qs in enumerate(res.searched):
            if _same_star(qs, q, rots):
                found.add(b)
                low = res.stiffness[b].eigenvalues_eV_per_A2[0]
                assert r.lowest_stiffness_eV_per_A2[a] == pytest.approx(low, rel=1e-8, abs=1e-8)
                assert r.chi0_with_overlaps[a] == pytest.approx(res.chi0_states_per_eV[b][0], rel=1e-8)
                assert r.chi0_without_overlaps[a] == pytest.approx(res.chi0_states_per_eV[b][1], rel=1e-8)
    assert found == {0, 1, 2, 3}
    # and the labels of the route are those special points
    assert set(r.tick_labels) >= {"Γ", "X", "M", "R"}


def test_cli_modes_path_json_text_and_plot(tmp_path, capsys):
    from matplotlib.image import imread

    from screener.show.cli import main

    out_png = tmp_path / "route.png"
    assert main(["modes", str(AS_CUBIC), "--q-grid", "2", "--json", "--plot", str(out_png)]) == 0
    data = json.loads(capsys.readouterr().out)
    path = data["path"]
    keys = {"q_frac", "distance_inv_A", "labels", "chi0_with_overlaps", "chi0_without_overlaps",
            "lowest_stiffness_eV_per_A2", "maxima"}
    assert keys <= set(path)
    n = len(path["q_frac"])
    assert n > 4 and all(len(path[k]) == n for k in keys - {"maxima"})
    # every q used is on the k-mesh reported (q · N integer: the constraint of a one-mesh Lindhard sum)
    qn = np.asarray(path["q_frac"]) * np.asarray(data["kmesh"])
    assert np.allclose(qn, np.round(qn))
    # distances along the route never decrease (common practice for band-route axes, no source)
    assert np.all(np.diff(path["distance_inv_A"]) >= -1e-12)
    # the largest χ0 maximum is the largest χ0 value on the route (analytic: a global maximum is a local one)
    assert path["maxima"][0]["chi0_with_overlaps"] == pytest.approx(max(path["chi0_with_overlaps"]))
    img = imread(out_png)  # a readable PNG of a sensible size (PNG specification: the reader checks the signature)
    assert img.ndim == 3 and img.shape[0] > 400 and img.shape[1] > 400
    assert out_png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"

    assert main(["modes", str(AS_CUBIC), "--q-grid", "2"]) == 0
    text = capsys.readouterr().out
    assert "χ0 maxima along the route:" in text and "along the route Γ–X–M–Γ–R–X|M–R" in text

    assert main(["modes", str(AS_CUBIC), "--q-grid", "2", "--json", "--no-path"]) == 0
    assert "path" not in json.loads(capsys.readouterr().out)


def test_fewer_route_points_are_a_subset_with_the_same_values():
    # analytic: n intervals per leg on Γ–½ of an N-point chain mesh give q = (N/2n)·j/N, j = 0 … n, and every value
    # is the one of the full route at the same q (same mesh, same eigenvectors)
    p = _chain()
    st = mesh_states(p.model, (40, 1, 1), width_eV=0.15)
    full = path_survey(p, states=st)
    few = path_survey(p, states=st, n_per_leg=4)
    assert np.allclose(few.q_frac[:, 0] * 40, [0, 5, 10, 15, 20])
    idx = np.round(few.q_frac[:, 0] * 40).astype(int)
    assert np.allclose(few.chi0_with_overlaps, full.chi0_with_overlaps[idx], rtol=1e-12)
    assert np.allclose(few.lowest_stiffness_eV_per_A2, full.lowest_stiffness_eV_per_A2[idx], rtol=1e-10, atol=1e-10)
    assert np.allclose(few.distance_inv_A, full.distance_inv_A[idx])


def test_cli_route_points_must_be_positive(capsys):
    # the tool's error convention: one line, exit status 2 (project rule, no source)
    from screener.show.cli import main

    assert main(["modes", str(AS_CUBIC), "--route-points", "0"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--route-points must be a positive integer" in err[0]
