"""Hostile and extreme input (issue 14): a k-mesh whose points times the cell's orbitals exceed the limit is refused
before any work, by bands and rank alike (one check, screener.bz.kmesh.check_mesh_size)."""


import numpy as np
import pytest

from screener.bz.bands import band_structure
from screener.bz.integrate import solve_on_mesh
from screener.bz.kmesh import MAX_ORBITAL_KPOINTS, check_mesh_size, mesh_from_spacing, orbital_kpoints
from screener.errors import ParameterError
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.show.cli import main
from screener.structure.crystal import Crystal
from screener.structure.formats import write_structure
from screener.tb.model import build_model
from screener.tb.params import default_parameters


def simple_cubic(a=2.9, el="As"):
    return Crystal(np.eye(3) * a, [[0, 0, 0]], [el])


def test_limit_is_on_the_product_and_inclusive():
    # the rule of issue 14: refuse when orbitals × full-mesh points > 10⁶ (common practice, no source)
    assert MAX_ORBITAL_KPOINTS == 1_000_000
    assert orbital_kpoints((100, 100, 25), 4) == 1_000_000  # arithmetic
    check_mesh_size((100, 100, 25), 4)  # exactly at the limit: allowed
    with pytest.raises(ParameterError) as exc:
        check_mesh_size((100, 100, 26), 4, "the test cell")
    msg = str(exc.value)
    # one line naming the mesh, the orbital count, the product and the way out
    assert "\n" not in msg
    for part in ("100×100×26 k-mesh of the test cell", "4 orbitals", "1.04e+06", "coarser --k-step"):
        assert part in msg


def _no_mesh_work(*args, **kwargs):
    raise AssertionError("the k-mesh was built: the guard must refuse before any mesh or diagonalisation work")


def test_tiny_k_step_is_refused_before_any_diagonalisation(monkeypatch):
    crystal = simple_cubic()
    model = build_model(crystal, default_parameters(["As"]))
    # |b| = 2π/a = 2.167 Å⁻¹ for a = 2.9 Å, so a step of 1e-3 Å⁻¹ needs ceil(2166.6) = 2167 points a direction
    # (Monkhorst–Pack sizes from a spacing, arithmetic): 2167³ ≈ 1.0e10 points × 4 sp³ orbitals (s, px, py, pz)
    assert mesh_from_spacing(crystal, 1e-3) == (2167, 2167, 2167)
    assert model.n_orbitals == 4
    # nothing is allocated for the mesh (it alone would need hundreds of GB): refused before it is built
    monkeypatch.setattr("screener.bz.kmesh.irreducible_mesh", _no_mesh_work)
    with pytest.raises(ParameterError, match=r"2167×2167×2167 k-mesh .* × 4 orbitals = 4.07e\+10"):
        solve_on_mesh(model, k_step_per_A=1e-3)


def test_bands_and_explicit_meshes_use_the_same_check():
    # 6×6×6 = 216-atom supercell of simple-cubic As (864 orbitals), a = 17.4 Å: the fixed bands step of
    # 0.15 Å⁻¹ gives ceil(2π/17.4/0.15) = 3 points per direction, 27 × 864 = 23 328, far below the limit;
    # the guard is on the product, so it lets such a cell through (arithmetic, see the report of issue 14)
    big = simple_cubic().supercell(np.diag([6, 6, 6]))
    model = build_model(big, default_parameters(["As"]))
    assert orbital_kpoints(mesh_from_spacing(big, 0.15, model.periodic), model.n_orbitals) == 27 * 864
    # a mesh given explicitly is checked too: 40³ points × 864 orbitals = 5.5e7 > 10⁶
    with pytest.raises(ParameterError, match="40×40×40 k-mesh"):
        solve_on_mesh(model, (40, 40, 40))
    # and band_structure (screener bands) uses the same check: its default mesh on the 1-atom cell is fine
    bs = band_structure(simple_cubic())
    assert bs.ground_state.mesh == mesh_from_spacing(simple_cubic(), 0.15)


def test_rank_with_a_tiny_k_step_is_refused_at_once(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr("screener.bz.kmesh.irreducible_mesh", _no_mesh_work)
    with pytest.raises(ParameterError, match="coarser --k-step"):
        rank(simple_cubic(), settings=ScreenSettings(k_step_per_A=1e-3), progress=False)
    # the CLI contract: a user error is one line on stderr and exit code 2 (common practice, no source)
    path = tmp_path / "As.cif"
    write_structure(simple_cubic(), path)
    assert main(["rank", str(path), "--k-step", "1e-3", "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "orbitals" in err and "coarser --k-step" in err


def test_diagonalisation_work_limit_refuses_large_cells_on_many_k_points():
    # a 500-atom sp cell (2000 orbitals) along a 347-point band route: ~2.8e12 n³ of eigensolver work, hours;
    # the 8-atom Bi cell of the recorded values (32 orbitals) on a 24³ mesh is far below (common practice, no source)
    from screener.bz.kmesh import MAX_DIAGONALISATION_WORK, check_diagonalisation_work

    with pytest.raises(ParameterError, match="2000-orbital matrices"):
        check_diagonalisation_work(347, 2000, "the band route of As500")
    check_diagonalisation_work(24**3, 32, "the mesh of Bi8")
    assert 32**3 * 24**3 < MAX_DIAGONALISATION_WORK < 2000**3 * 347
