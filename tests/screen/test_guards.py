"""Hostile and extreme input (issue 14): a requested --q whose supercell is too large is refused before any work;
a k-mesh refinement beyond the orbitals × k-points limit ends with a note (the limit: tests/bz/test_mesh_guard.py)."""


import numpy as np
import pytest

from screener.errors import ParameterError
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.show.cli import main
from screener.structure.crystal import Crystal
from screener.structure.formats import write_structure


def simple_cubic(a=2.9, el="As"):
    return Crystal(np.eye(3) * a, [[0, 0, 0]], [el])


def si_conventional(a=5.43):
    # the 8-atom conventional cell of diamond-structure Si, a = 5.43 Å (from memory)
    fcc = [[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]
    frac = fcc + [[x + 0.25, y + 0.25, z + 0.25] for x, y, z in fcc]
    return Crystal(np.eye(3) * a, frac, ["Si"] * 8)


def test_large_q_supercell_refused_before_any_work(monkeypatch):
    # q = (1/11, 1/12, 0) on a 1-atom cell needs 11·12 = 132 atoms (q·n ∈ Z needs 11 | n₁ and 12 | n₂),
    # more than the default limit of 64 (ScreenSettings.max_supercell_atoms, common practice, no source)
    def no_band_energy(*args, **kwargs):
        raise AssertionError("a band energy was computed: the supercell must be refused before any")

    # refused before any band energy is computed (the parent's own included)
    monkeypatch.setattr("screener.bz.integrate.solve_on_mesh", no_band_energy)
    with pytest.raises(ParameterError, match=r"--q \(1/11, 1/12, 0\) needs a supercell of 132 atoms") as exc:
        rank(simple_cubic(), extra_q=[(1 / 11, 1 / 12, 0)], progress=False)
    msg = str(exc.value)
    assert "\n" not in msg and "limit of 64" in msg and "--max-supercell-atoms" in msg


def test_limit_is_counted_on_the_primitive_cell():
    # Si conventional cell, q = (1/4, 0, 0) of its reciprocal vectors is the Cartesian (1/(4a), 0, 0); on the fcc
    # primitive vectors (0, a/2, a/2), (a/2, 0, a/2), (a/2, a/2, 0) it reads (0, 1/8, 1/8): index 8, so 8 × 2 = 16
    # atoms (arithmetic), though the conventional cell has 8 atoms
    with pytest.raises(ParameterError, match=r"16 atoms \(8 × the 2-atom primitive cell\), more than the limit of 10"):
        rank(si_conventional(), extra_q=[(1 / 4, 0, 0)], settings=ScreenSettings(max_supercell_atoms=10),
             progress=False)


@pytest.mark.parametrize("bad", [0, -3, 2.5, True, "64", float("inf"), float("nan")])
def test_limit_must_be_a_positive_whole_number(bad):
    # a limit below one atom or a fraction of an atom means nothing (definition of the setting)
    with pytest.raises(ParameterError, match="max_supercell_atoms must be a positive whole number"):
        ScreenSettings(max_supercell_atoms=bad)


def test_limit_accepts_whole_numbers_of_any_numeric_type():
    # a limit read back from a JSON store or a numpy array is still a whole number (definition of the setting)
    assert ScreenSettings(max_supercell_atoms=np.int64(8)).max_supercell_atoms == 8
    assert ScreenSettings(max_supercell_atoms=128.0).max_supercell_atoms == 128


def test_cli_refuses_with_one_line_and_exit_code_2(tmp_path, capsys):
    # the CLI contract: a user error is one line on stderr and exit code 2 (common practice, no source)
    path = tmp_path / "As.cif"
    write_structure(simple_cubic(), path)
    code = main(["rank", str(path), "--q", "1/11,1/12,0", "--quiet"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "132 atoms" in err and "limit of 64" in err and "--max-supercell-atoms" in err
    # the option raises the limit; a limit still below the need names the new limit
    code = main(["rank", str(path), "--q", "1/11,1/12,0", "--quiet", "--max-supercell-atoms", "100"])
    assert code == 2 and "limit of 100" in capsys.readouterr().err


def test_a_supercell_at_the_limit_is_screened():
    # "more than the limit" is refused, so q = (1/3, 0, 0) on a 1-atom cell (3 atoms) passes a limit of 3
    settings = ScreenSettings(k_step_per_A=0.35, max_refinements=1, max_supercell_atoms=3)
    result = rank(simple_cubic(), generators=["modulate"], extra_q=[(1 / 3, 0, 0)], settings=settings, progress=False)
    assert any(c.q_label == "(1/3, 0, 0)" and c.supercell_atoms == 3 for c in result.candidates)


def test_mesh_refinement_stops_at_the_orbital_kpoint_limit(monkeypatch):
    # a refinement beyond the orbitals × k-points limit is not refused mid-screen (the work done so far would be
    # lost) but ends the refinement with a note, as the existing max_kpoints limit does (issue 14). The limit
    # is lowered to the starting mesh of a candidate that needs refining: simple-cubic As at 2.78 Å splits
    # rhombohedrally (see test_balance)
    import screener.screen.balance as balance
    from screener.bz.kmesh import orbital_kpoints
    from screener.screen.generators import rhombohedral_split
    from screener.screen.parent import build_parent

    settings = ScreenSettings(k_step_per_A=0.3, max_refinements=2)
    context = build_parent(simple_cubic(2.78), settings=settings)
    (fam,) = rhombohedral_split(context)
    norb = context.model.n_orbitals * fam.n_atoms // context.crystal.n_atoms
    start = orbital_kpoints(balance.family_mesh(fam, settings.k_step_per_A, (True, True, True)), norb)
    monkeypatch.setattr(balance, "MAX_ORBITAL_KPOINTS", start)
    res = balance.evaluate_family(fam, context)
    assert "mesh refinement stopped at the limit" in res.note and "orbitals × k-points" in res.note
    assert orbital_kpoints(res.kmesh, norb) <= start
