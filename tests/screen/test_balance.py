"""The energy comparator and ranked verdicts against published models and theorems."""

from pathlib import Path

import numpy as np
import pytest

from screener.errors import ParameterError
from screener.screen.balance import evaluate_family
from screener.screen.closure import (
    ElasticModel,
    exponent_for_bulk_modulus,
    pair_repulsion_prefactor_eV,
)
from screener.screen.generators import dimerise, rhombohedral_split
from screener.screen.parent import build_parent
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.tb.param_file import load_parameters
from screener.tb.params import default_parameters

# Su, Schrieffer & Heeger, PRB 22, 2099 (1980): polyacetylene chain parameters
# the SSH chain of the shared test data file, with a variable electron count
SSH_TOML = (Path(__file__).parents[1] / "data" / "params" / "ssh_polyacetylene.toml").read_text().replace(
    "{", "{{").replace("}", "}}").replace("valence_electrons = 1", "valence_electrons = {electrons}")


def ssh_chain():
    # one site per cell along x; 10 Å of vacuum isolates the chain (no hopping crosses y or z)
    return Crystal(np.diag([1.22, 10.0, 10.0]), [[0, 0, 0]], ["C"])


def ssh_params(tmp_path, electrons=1):
    p = tmp_path / f"ssh_{electrons}.toml"
    p.write_text(SSH_TOML.format(electrons=electrons))
    return load_parameters(p, ["C"])


def screen_chain(tmp_path, electrons):
    chain = ssh_chain()
    params = ssh_params(tmp_path, electrons)
    context = build_parent(chain, params, ScreenSettings())
    (fam,) = dimerise(context)
    return evaluate_family(fam, context)


def test_ssh_chain_dimerisation_matches_published_values(tmp_path):
    res = screen_chain(tmp_path, electrons=1)
    # Su, Schrieffer & Heeger, PRB 22, 2099 (1980): u0 ≈ 0.04 Å, gap 2Δ = 8 α u0 ≈ 1.3–1.4 eV,
    # condensation energy ≈ 13–15 meV per site (values as quoted in the project issue from that paper)
    assert res.verdict == "unstable" and res.converged
    assert 0.035 < res.amplitude_A < 0.045
    assert res.gap_eV == pytest.approx(8 * 4.1 * res.amplitude_A, rel=0.03)
    assert 1.2 < res.gap_eV < 1.5
    assert -16.0 < res.delta_E_meV_per_atom < -12.0
    # bonds alternate 1.22 ∓ 2 u0
    short, long_ = res.shell_distances_A
    assert short == pytest.approx(1.22 - 2 * res.amplitude_A, abs=1e-3)
    assert long_ == pytest.approx(1.22 + 2 * res.amplitude_A, abs=1e-3)
    # the harmonic lattice term of the SSH model: K/2 (2u)^2 per site
    assert res.delta_E_elastic_meV_per_atom == pytest.approx(1e3 * 0.5 * 21.0 * (2 * res.amplitude_A) ** 2, rel=1e-6)
    assert res.space_group_number == 123  # P4/mmm: the dimerised chain in its square box (International Tables A)


@pytest.mark.parametrize("electrons", [0, 2])
def test_full_or_empty_band_does_not_dimerise(tmp_path, electrons):
    # Peierls theorem (Peierls 1955): only a partly filled band gains; a full or empty one does not
    res = screen_chain(tmp_path, electrons)
    assert res.verdict == "stable"
    assert res.amplitude_A == 0.0
    assert res.delta_E_band_meV_per_atom == pytest.approx(0.0, abs=1e-9)


def simple_cubic(a_A, element="As"):
    return Crystal(np.eye(3) * a_A, [[0, 0, 0]], [element])


# volume per atom of A7 arsenic from its hexagonal cell a = 3.7598 Å, c = 10.5475 Å, Z = 6
# (Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969)) -> 21.52 Å^3, simple-cubic a = 2.781 Å
A_SC_AS = (np.sqrt(3) / 2 * 3.7598**2 * 10.5475 / 6) ** (1 / 3)
# A7 bismuth a = 4.546 Å, c = 11.862 Å, Z = 6 (Cucka & Barrett, Acta Cryst. 15, 865 (1962); from memory)
A_SC_BI = (np.sqrt(3) / 2 * 4.546**2 * 11.862 / 6) ** (1 / 3)


@pytest.mark.parametrize("element, a_A, published_ratio", [
    # As: 2.517 / 3.120 Å (Schiferl & Barrett 1969) -> 1.240; the screen gives about 2.53 / 3.09 Å -> 1.22,
    # i.e. the long/short ratio about 2 % below the published one
    ("As", A_SC_AS, 3.120 / 2.517),
    # Bi: 3.07 / 3.53 Å (Cucka & Barrett 1962; from memory) -> 1.15; the screen gives about 2.99 / 3.64 Å -> 1.22,
    # i.e. the alternation about 6 % too strong
    ("Bi", A_SC_BI, 3.53 / 3.07),
])
def test_group15_simple_cubic_splits_into_A7(element, a_A, published_ratio):
    result = rank(simple_cubic(a_A, element), generators=["rhombohedral-split", "dimerise"], progress=False)
    best = result.candidates[0]
    # Peierls picture of the A7 structure: a half-filled p shell on a simple-cubic lattice splits into
    # 3 short + 3 long bonds, R-3m (International Tables A, No. 166)
    assert best.generator == "rhombohedral-split"
    assert best.verdict == "unstable"
    assert (best.space_group_symbol, best.space_group_number) == ("R-3m", 166)
    short, long_ = best.shell_distances_A
    ratio = long_ / short
    # the screen's ratio depends on the repulsion exponent and the universal parameters: assert a physically
    # sensible range and closeness to the published ratio within 10 %
    assert 1.0 < ratio < 1.4
    assert ratio == pytest.approx(published_ratio, rel=0.10)


def test_group16_filling_does_not_split():
    # alpha-Po is simple cubic: a two-thirds-filled p shell gains nothing from the rhombohedral split
    # (common practice, no source); Te valence (6 electrons) at the A7-like volume per atom
    result = rank(simple_cubic(A_SC_AS, "Te"), generators=["rhombohedral-split"], progress=False)
    assert result.candidates[0].verdict != "unstable"


def test_pair_repulsion_holds_parent_in_equilibrium():
    # Chadi, PRL 41, 1062 (1978): the repulsion is fixed so the parent is stationary under uniform scaling
    from screener.bz.integrate import solve_on_mesh
    from screener.tb.bonds import find_bonds
    from screener.tb.model import build_model

    crystal = simple_cubic(A_SC_AS)
    params = default_parameters(["As"])
    parent = build_parent(crystal, params, ScreenSettings()).energetics
    assert parent.repulsion_eV > 0
    bonds = find_bonds(crystal, params)
    mesh = parent.kmesh
    from screener.screen.closure import elastic_model_for

    el = elastic_model_for(crystal, params, bonds, parent.repulsion_eV, parent.pair_exponent, parent.bending_eV)

    def total(s):
        c = crystal.replace(lattice_A=crystal.lattice_A * (1 + s))
        e_band = solve_on_mesh(build_model(c, params, bonds=bonds), mesh).band_energy_eV
        return e_band + el.energy_eV(c.lattice_A, c.frac)

    h = 0.002
    slope = (total(h) - total(-h)) / (2 * h)
    assert abs(slope) < 0.02 * parent.band_slope_eV_per_atom * crystal.n_atoms


def test_elastic_helpers_validate_and_follow_formulae():
    # harmonic spring: ½ K (d − d0)^2 (common practice, no source)
    el = ElasticModel(np.array([0]), np.array([0]), np.array([[1, 0, 0]]), np.array([2.0]), np.array([0.0]),
                      np.array([10.0]), 4.0)
    assert el.energy_eV(np.eye(3) * 2.1, np.zeros((1, 3))) == pytest.approx(0.5 * 10 * 0.1**2)
    assert pair_repulsion_prefactor_eV(-1.0, 3, 4.0) == 0.0
    with pytest.raises(ParameterError, match="exponent must be positive"):
        pair_repulsion_prefactor_eV(1.0, 3, 0.0)
    with pytest.raises(ParameterError, match="bulk modulus must be positive"):
        exponent_for_bulk_modulus(-5, 20.0, 1.0, 0.0)
    with pytest.raises(ParameterError, match="does not favour compression"):
        exponent_for_bulk_modulus(50, 20.0, -1.0, 0.0)
    with pytest.raises(ParameterError, match="k_step_per_A must be a positive number"):
        ScreenSettings(k_step_per_A=0)


def test_rhombohedral_split_only_for_cubic_networks():
    chain = ssh_chain()
    assert rhombohedral_split(chain) == []


def fcc_rocksalt(a_A, cation, anion):
    lat = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * a_A
    return Crystal(lat, [[0, 0, 0], [0.5, 0.5, 0.5]], [cation, anion])


def test_closed_shell_rocksalt_is_not_flagged_unstable():
    # NaCl keeps the rocksalt structure (Fm-3m, a = 5.64 Å) at ambient conditions (handbook value, from memory).
    # The closure is fitted to its measured bulk modulus (24.6 GPa, Overton & Swim, Phys. Rev. 84, 758 (1951), via
    # the bundled table) and no member of its ±25 % range may gain.
    result = rank(fcc_rocksalt(5.64, "Na", "Cl"), progress=False)
    assert result.parent.gap_eV > 1.0
    assert result.parent.closure == "bulk-modulus" and result.parent.bulk_modulus_GPa == pytest.approx(24.6)
    assert all(c.verdict != "unstable" for c in result.candidates)
    assert all(c.delta_E_range_meV_per_atom[0] > -1.0 for c in result.candidates)


def test_simple_cubic_polonium_is_not_flagged_unstable():
    # alpha-Po is simple cubic, a = 3.359 Å (Desando & Lange, J. Inorg. Nucl. Chem. 28, 1837 (1966); from memory)
    result = rank(simple_cubic(3.359, "Po"), progress=False)
    assert result.candidates[0].verdict != "unstable"


def test_relaxed_rhombohedral_angle_lowers_energy_and_elongates_the_diagonal():
    crystal = simple_cubic(A_SC_AS)
    params = default_parameters(["As"])
    settings = ScreenSettings(k_step_per_A=0.3, max_refinements=1)
    context = build_parent(crystal, params, settings)
    (fixed,) = rhombohedral_split(context)
    (relaxed,) = rhombohedral_split(context, relax_cell=True)
    # the strained cell keeps its volume and the R-3m symmetry (International Tables A, No. 166)
    c = relaxed.at(0.1, strain=0.1)
    assert c.volume_A3 == pytest.approx(relaxed.reference.volume_A3, rel=1e-12)
    from screener.structure.symmetry import analyse

    assert analyse(c).number == 166
    r_fixed = evaluate_family(fixed, context)
    r_relaxed = evaluate_family(relaxed, context)
    # relaxing one more degree of freedom can only lower the optimum (variational, common practice, no source)
    assert r_relaxed.delta_E_meV_per_atom <= r_fixed.delta_E_meV_per_atom + 0.5
    # A7 arsenic's rhombohedral angle (54.1°) is below the 60° of the doubled simple-cubic cell: the body
    # diagonal is elongated (Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969); angle from memory)
    assert r_relaxed.cell_strain > 0
    assert r_fixed.cell_strain == 0.0


def test_tiny_amplitudes_are_not_folded_with_the_parent_symmetry():
    # Brillouin-zone folding may only use symmetries the distorted structure has (common practice, no source):
    # at λ = 1e-4 Å the symmetry-reduced band energy must equal the full-mesh one
    from screener.bz.integrate import solve_on_mesh
    from screener.screen.balance import _Evaluator
    from screener.tb.model import build_model

    crystal = simple_cubic(2.78)
    params = default_parameters(["As"])
    (fam,) = rhombohedral_split(crystal)
    ev = _Evaluator(fam, params, 2.6, 4.0, ScreenSettings())
    band, _, res = ev.energies_at(1e-4, 0.0, (12, 12, 12))
    full = solve_on_mesh(build_model(fam.at(1e-4), params, bonds=ev.bonds), (12, 12, 12), use_symmetry=False)
    assert band * fam.n_atoms == pytest.approx(full.band_energy_eV, abs=1e-9)
    assert res.n_kpoints_irreducible > 72  # 72 would be the parent's wedge of this mesh


def test_amplitude_polish_takes_the_parabola_vertex_only_when_it_really_is_lower():
    # the vertex of y = a (x - x0)² + c lies at x0 (elementary algebra, from memory); the polish calls the energy
    # once per distinct point and returns a point whose exact energy it has evaluated
    from screener.screen.balance import _polish

    calls = []

    def counted(f):
        def energy(x):
            calls.append(float(x))
            return f(x)
        return energy

    assert _polish([0.1, 0.2, 0.3], counted(lambda x: 3.0 * (x - 0.23) ** 2 - 1.0)) == pytest.approx(0.23, abs=1e-12)
    assert len(calls) == 4  # three points and the vertex
    # a curve whose true value at the parabola's vertex is above the best sample (a bump between the samples):
    # the best sample, although the parabola promised less
    calls.clear()
    samples = (0.1, 0.2, 0.3)
    bumpy = counted(lambda x: 10.0 * (x - 0.22) ** 2 if min(abs(x - s) for s in samples) < 1e-12 else 1.0)
    assert _polish(list(samples), bumpy) == 0.2
    assert len(calls) == 4
    # no minimum inside the bracket (concave, or monotonic beyond it): the best sample, no extra evaluation
    calls.clear()
    assert _polish([0.1, 0.2, 0.3], counted(lambda x: -((x - 0.2) ** 2))) in (0.1, 0.3)
    assert len(calls) == 3
    # points clipped onto each other: fewer than three distinct points, the best of them
    calls.clear()
    assert _polish([0.2, 0.3, 0.3], counted(lambda x: (x - 0.26) ** 2)) == 0.3
    assert len(calls) == 2
