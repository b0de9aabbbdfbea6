"""The same crystal gives the same verdict however it is written: origin, atom order, cell choice, orientation."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from screener.screen.generators import default_candidates
from screener.screen.parent import build_parent
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.tb.param_file import parameters_from_dict

# coarse but identical numerical settings for every writing of a crystal (common practice, no source)
SETTINGS = ScreenSettings(k_step_per_A=0.3, max_refinements=2, convergence_meV_per_atom=2.0)
FCC = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])


def _rotation(seed=7):
    q, _ = np.linalg.qr(np.random.default_rng(seed).normal(size=(3, 3)))
    return q * np.sign(np.linalg.det(q))


def sc_bi(a=3.2834):
    # Bi at the volume per atom of its A7 phase (tests/data/known_phases/Bi_simple_cubic_parent.cif)
    return Crystal(np.eye(3) * a, [[0, 0, 0]], ["Bi"])


def writings_of_simple_cubic():
    c = sc_bi()
    a = c.lattice_A[0, 0]
    yield "as given", c
    yield "origin at (1/2,1/2,1/2)", Crystal(c.lattice_A, [[0.5, 0.5, 0.5]], ["Bi"])
    yield "2x2x2 supercell", c.supercell(2)
    # a face-centred-type 2-atom cell of the same simple-cubic lattice: vectors (0,a,a),(a,0,a),(a,a,0)
    yield "2-atom fcc-type cell", Crystal(np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]]) * a,
                                         [[0, 0, 0], [0.5, 0.5, 0.5]], ["Bi", "Bi"])
    yield "rotated frame", Crystal(c.lattice_A @ _rotation().T, c.frac, c.species)


def writings_of_rocksalt():
    a = 5.993  # GeTe at the volume of its rhombohedral phase (tests/data/known_phases/GeTe_rocksalt_parent.cif)
    yield "as given", Crystal(FCC * a, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Ge", "Te"])
    yield "origin moved by 1/4, Te first", Crystal(FCC * a, [[0.25, 0.25, 0.25], [0.75, 0.75, 0.75]], ["Te", "Ge"])
    yield "8-atom conventional cell", Crystal(np.eye(3) * a, [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0],
                                                             [.5, .5, .5], [.5, 0, 0], [0, .5, 0], [0, 0, .5]],
                                              ["Ge"] * 4 + ["Te"] * 4)
    yield "rotated frame", Crystal(FCC * a @ _rotation(3).T, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Ge", "Te"])
    # a 2×1×1 cell of the primitive cell: its lattice keeps only 12 of the crystal's 48 rotations, which the
    # symmetry search of the cell as given lists (arithmetic of the fcc lattice)
    yield "2x1x1 cell of the primitive cell", Crystal(FCC * a, [[0, 0, 0], [0.5, 0.5, 0.5]],
                                                      ["Ge", "Te"]).supercell(np.diag([2, 1, 1]))


SSH = {  # Su, Schrieffer & Heeger, PRB 22, 2099 (1980): polyacetylene chain parameters
    "species": {"C": {"orbitals": ["pz"], "onsite_eV": {"pz": 0.0}, "valence_electrons": 1}},
    "bond": {"C-C": {"law": "linear", "r0_A": 1.22, "V_eV": {"pp_pi": -2.5}, "slope_eV_per_A": {"pp_pi": 4.1},
                     "cutoff_A": 1.6, "spring_eV_per_A2": 21.0}},
}


def writings_of_chain():
    lat = np.diag([1.22, 10.0, 10.0])
    yield "as given", Crystal(lat, [[0, 0, 0]], ["C"])
    yield "origin shifted", Crystal(lat, [[0.37, 0.5, 0.5]], ["C"])
    yield "doubled cell", Crystal(np.diag([2.44, 10.0, 10.0]), [[0, 0, 0], [0.5, 0, 0]], ["C", "C"])


def _headline(crystal, params=None):
    result = rank(crystal, params, settings=SETTINGS, progress=False)
    best = result.candidates[0]
    # the whole candidate list, not only the headline: the same distortions, each with the same verdict
    others = sorted((c.generator, c.supercell_atoms, c.verdict) for c in result.candidates)
    return best.verdict, best.delta_E_meV_per_atom, best.space_group_number, best.generator, others


@pytest.mark.parametrize("family", ["simple cubic", "rocksalt", "chain"])
def test_verdict_and_delta_E_do_not_depend_on_how_the_crystal_is_written(family):
    writings = {"simple cubic": writings_of_simple_cubic, "rocksalt": writings_of_rocksalt,
                "chain": writings_of_chain}[family]()
    params = parameters_from_dict(SSH, ["C"]) if family == "chain" else None
    results = {name: _headline(c, params) for name, c in writings}
    ref = results["as given"]
    for name, (verdict, dE, sg, gen, others) in results.items():
        assert (verdict, sg, gen) == (ref[0], ref[2], ref[3]), \
            f"{family}, {name}: {verdict} {sg} {gen} vs {ref}"
        assert others == ref[4], f"{family}, {name}: candidates {others} vs {ref[4]}"
        assert dE == pytest.approx(ref[1], abs=1.0), f"{family}, {name}: ΔE {dE} vs {ref[1]}"


_SUPERCELLS = st.lists(st.integers(-2, 2), min_size=9, max_size=9).map(lambda v: np.array(v).reshape(3, 3)).filter(
    lambda m: 2 <= round(abs(np.linalg.det(m))) <= 4)


@settings(max_examples=12, derandomize=True, deadline=None)
@given(_SUPERCELLS)
def test_any_supercell_gives_the_parent_its_full_symmetry_and_the_same_candidates(matrix):
    # the crystal is the same whatever cell it is written in (fcc rocksalt, point group m-3m of order 48:
    # International Tables A, No. 225), so its parent context and candidate families must be too, however skewed
    # the supercell's lattice (candidate families only, no band energies: fast)
    if np.linalg.det(matrix) < 0:
        matrix = matrix * np.array([[-1], [1], [1]])
    a = 5.993
    prim = Crystal(FCC * a, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Ge", "Te"])
    ref, sup = build_parent(prim), build_parent(prim.supercell(matrix))
    assert len(np.unique(sup.symmetry.rotations, axis=0)) == len(np.unique(ref.symmetry.rotations, axis=0)) == 48
    key = sorted((f.generator, f.n_atoms) for f in default_candidates(ref))
    assert sorted((f.generator, f.n_atoms) for f in default_candidates(sup)) == key


def test_a_supercell_input_reports_each_wave_vector_as_the_crystal_s_own():
    # simple cubic written as 2×2×2: the R, X and M waves are integers in the supercell's reciprocal basis
    # (q_in = q_prim Mᵀ with M = 2·1, arithmetic), not all (0, 0, 0) as a reduction modulo that finer lattice gives
    prim = {c.generator: c for c in rank(sc_bi(), settings=SETTINGS, progress=False).candidates}
    sup = {c.generator: c for c in rank(sc_bi().supercell(2), settings=SETTINGS, progress=False).candidates}
    assert set(sup) == set(prim)
    for gen, c in sup.items():
        q_back = np.asarray(c.q_frac) / 2.0
        diff = q_back - np.asarray(prim[gen].q_frac)
        assert np.allclose(diff, np.round(diff), atol=1e-9), (gen, c.q_label, prim[gen].q_label)
        assert np.any(np.asarray(c.q_frac) != 0), (gen, c.q_label)
