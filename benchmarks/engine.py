"""Engine benchmark: cost of a full band-energy evaluation against bare batched diagonalisation.

Builds a realistic stack — rocksalt PbTe in its 2-atom primitive cell (a = 6.46 Å, from memory), s+p orbitals on
both atoms, built-in universal parameters — on a 24³ Γ-centred mesh and times, in the same run:

* bare ``numpy.linalg.eigvalsh`` on the H(k) stack of the full mesh (the floor any engine must pay);
* the full evaluation ``electrons.solve_on_mesh`` without symmetry on the same mesh: H(k) build, diagonalisation,
  Fermi level and integration, for the tetrahedron method (the default) and Gaussian smearing.

All timed variants run interleaved, one of each per round in a shuffled order, for ``--repeat`` rounds (at least
7); figures are medians over rounds, so a burst of load from other processes shifts every variant alike instead of
one. The overhead ratio is the median over rounds of (full evaluation / bare eigvalsh) measured in the same round.

It then compares the full mesh with its irreducible wedge (same band energy, far fewer diagonalisations).
Targets: overhead ratio ≤ 1.3, wedge saving ≥ 20×. The last line is ``overhead_ratio <x>`` for the default method.

Run: ``python benchmarks/engine.py --pbte [--mesh 24] [--repeat 15]``.

Without ``--pbte`` it prints the integration-cost grid instead: supercells of simple-cubic As (1, 2, 4, 8, 16 atoms)
and of conventional rocksalt GeTe (8, 16 atoms), both from ``tests/data/known_phases``, s+p orbitals, built-in
parameters, on 6³, 12³, 24³ and 56³ meshes reduced by symmetry as ``solve_on_mesh`` does by default
(``--no-symmetry``: the full mesh). Per case, with BLAS held to one thread, the eigensolver
(``model.eigenvalues`` at the mesh's irreducible points) and the integration (``integrate``: Fermi level,
occupations with Blöchl's correction, band energy) are timed interleaved, ``--runs`` times (default 3), and the
medians and their ratio are printed; a case whose eigensolver takes over ``--max-eig`` seconds (default 2) is
skipped, and so are the larger meshes of that cell. "1st int" is the first integration on the mesh, which also
builds the mesh's tetrahedron tables (kept for later models on the same mesh). Target: integration ≤ 0.5 ×
eigensolver.
Run: ``python benchmarks/engine.py [--runs 3] [--meshes 6 12 24 56] [--no-symmetry]``.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from screener import Crystal, read_structure
from screener.bz.integrate import integrate, solve_on_mesh
from screener.bz.kmesh import irreducible_mesh
from screener.tb.model import build_model
from screener.tb.params import default_parameters


def rocksalt_pbte() -> Crystal:
    a = 6.46  # PbTe lattice constant, Å (from memory)
    lat = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
    return Crystal(lat, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Pb", "Te"])


def interleaved(rounds: int, tasks: dict, seed: int = 20240611) -> tuple[dict, dict]:
    """Run every task once per round for ``rounds`` rounds, in an order shuffled per round (fixed seed) so that no
    task always follows the same neighbour; per-task lists of seconds and last results."""
    times = {name: [] for name in tasks}
    out = {}
    rng = np.random.default_rng(seed)
    names = list(tasks)
    for _ in range(rounds):
        for name in rng.permutation(names):
            fn = tasks[name]
            t0 = time.perf_counter()
            out[name] = fn()
            times[name].append(time.perf_counter() - t0)
    return times, out


_PHASES = Path(__file__).resolve().parent.parent / "tests" / "data" / "known_phases"


def grid_cells() -> list[tuple[str, Crystal]]:
    """(label, crystal) of the grid: simple-cubic As supercells of 1-16 atoms, conventional rocksalt GeTe (8, 16)."""
    as_sc = read_structure(_PHASES / "As_simple_cubic_parent.cif")
    gete = read_structure(_PHASES / "GeTe_rocksalt_parent.cif")  # conventional cubic cell, 8 atoms
    cells = [("As", as_sc)] + [(f"As {'x'.join(map(str, m))}", as_sc.supercell(m))
                               for m in ((1, 1, 2), (1, 2, 2), (2, 2, 2), (2, 2, 4))]
    return cells + [("GeTe conv", gete), ("GeTe conv 1x1x2", gete.supercell((1, 1, 2)))]


def _drop_mesh_tables() -> None:
    """Forget the tetrahedron tables kept between integrations (this version's mesh tables, if it keeps any, and
    the corner table of a mesh)."""
    from screener.bz import tetra_grid, tetrahedron

    getattr(tetra_grid, "_TABLE_CACHE", []).clear()
    tetrahedron._corner_table.cache_clear()


def grid_report(runs: int, meshes, max_eig: float, use_symmetry: bool) -> None:
    """One table: eigensolver and integration medians over ``runs`` interleaved runs, and their ratio."""
    from threadpoolctl import threadpool_limits

    runs = max(1, runs)
    print(f"integration cost grid: medians of {runs} runs, BLAS on one thread, "
          f"{'symmetry-reduced' if use_symmetry else 'full'} meshes, method tetrahedron (Blöchl corrected)")
    print(f"{'cell':<16} {'atoms':>5} {'orb':>4} {'mesh':>5} {'k-pts':>7} {'eig ms':>9} {'int ms':>9} "
          f"{'int/eig':>8} {'1st int':>9}  {'band energy eV':>19} {'Fermi level eV':>17}")
    ratios = []
    with threadpool_limits(limits=1):
        for label, crystal in grid_cells():
            model = build_model(crystal, default_parameters(sorted(set(crystal.species))))
            for n in meshes:
                mesh = (int(n),) * 3
                km = irreducible_mesh(crystal, mesh, use_symmetry=use_symmetry)
                t0 = time.perf_counter()
                eigs = np.asarray(model.eigenvalues(km.kfrac))
                if time.perf_counter() - t0 > max_eig:  # larger meshes of this cell cost more still
                    print(f"{label:<16} {crystal.n_atoms:>5} {model.n_orbitals:>4} {n:>4}³ {len(km.kfrac):>7} "
                          f"skipped: eigensolver over {max_eig:g} s")
                    break

                def run_int(e=eigs, k=km, c=crystal, m=model):
                    return integrate(e, k, m.n_electrons, spin_degeneracy=m.spin_degeneracy,
                                     reciprocal_A=c.reciprocal_A)

                # the first integration on a mesh also builds its tables (kept for the next models on that mesh,
                # as in a screen): timed apart, outside the medians; any tables of this mesh built before are
                # dropped first so it is a true first call
                _drop_mesh_tables()
                t1 = time.perf_counter()
                run_int()
                t_first = time.perf_counter() - t1
                times, out = interleaved(runs, {"eig": lambda k=km, m=model: m.eigenvalues(k.kfrac), "int": run_int})
                t_eig, t_int = float(np.median(times["eig"])), float(np.median(times["int"]))
                ratios.append(t_int / t_eig)
                res = out["int"]
                print(f"{label:<16} {crystal.n_atoms:>5} {model.n_orbitals:>4} {n:>4}³ {len(km.kfrac):>7} "
                      f"{t_eig * 1e3:>9.2f} {t_int * 1e3:>9.2f} {t_int / t_eig:>8.2f} {t_first * 1e3:>9.2f}  "
                      f"{res.band_energy_eV:>19.12f} {res.fermi_level_eV:>17.12f}", flush=True)
    print(f"worst int/eig {max(ratios):.2f} (target <= 0.5)")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--pbte", action="store_true", help="the PbTe overhead report instead of the grid")
    ap.add_argument("--mesh", type=int, default=24)
    ap.add_argument("--repeat", type=int, default=15, help="interleaved rounds (at least 7)")
    ap.add_argument("--runs", type=int, default=3, help="grid: interleaved runs per case")
    ap.add_argument("--meshes", type=int, nargs="+", default=[6, 12, 24, 56], help="grid: mesh sizes")
    ap.add_argument("--max-eig", type=float, default=2.0, help="grid: skip cases whose eigensolver takes longer, s")
    ap.add_argument("--no-symmetry", action="store_true", help="grid: full meshes instead of irreducible wedges")
    args = ap.parse_args(argv)
    if not args.pbte:
        grid_report(args.runs, args.meshes, args.max_eig, not args.no_symmetry)
        return
    rounds = max(7, args.repeat)

    crystal = rocksalt_pbte()
    model = build_model(crystal, default_parameters(sorted(set(crystal.species))))
    mesh = (args.mesh,) * 3
    full = irreducible_mesh(crystal, mesh, use_symmetry=False)
    nk = len(full.kfrac)
    print(f"structure       rocksalt PbTe, {crystal.n_atoms} atoms, {model.n_orbitals} orbitals, "
          f"{model.n_electrons:g} electrons per cell")
    print(f"mesh            {mesh[0]}x{mesh[1]}x{mesh[2]} = {nk} k-points (full, no symmetry)")

    # where the tetrahedron time goes (private pieces of screener.bz, timed for the owner's benefit); each
    # round starts from a fresh grid, so work it does lazily is charged to the step that first needs it
    from screener.bz.tetra_grid import _TetrahedronGrid

    hk = model.hamiltonian(full.kfrac)
    eigs_full = model.eigenvalues(full.kfrac)
    n_el, g = model.n_electrons, model.spin_degeneracy
    parts = {}

    def tetra_parts():
        t0 = time.perf_counter()
        grid = _TetrahedronGrid(eigs_full, full, crystal.reciprocal_A)
        t1 = time.perf_counter()
        mu = grid.fermi_level(n_el, g)
        t2 = time.perf_counter()
        grid.occupations(mu)
        t3 = time.perf_counter()
        grid.count(mu)
        t4 = time.perf_counter()
        for key, dt in (("grid", t1 - t0), ("mu", t2 - t1), ("occ", t3 - t2), ("cnt", t4 - t3)):
            parts.setdefault(key, []).append(dt)
        return grid

    tasks = {
        "eig": lambda: np.linalg.eigvalsh(hk),
        "h": lambda: model.hamiltonian(full.kfrac),
        "modeig": lambda: model.eigenvalues(full.kfrac),
    }
    for method in ("tetrahedron", "gaussian"):
        tasks["int " + method] = lambda m=method: integrate(eigs_full, full, n_el, method=m, spin_degeneracy=g,
                                                            reciprocal_A=crystal.reciprocal_A)
        tasks["full " + method] = lambda m=method: solve_on_mesh(model, mesh, method=m, use_symmetry=False)
    tasks["parts"] = tetra_parts
    tasks["sym"] = lambda: solve_on_mesh(model, mesh, use_symmetry=True)
    times, out = interleaved(rounds, tasks)
    med = {name: float(np.median(v)) for name, v in times.items()}
    t_eig = med["eig"]
    print(f"timing          median of {rounds} interleaved rounds (min in brackets)")
    print(f"bare eigvalsh   {t_eig * 1e3:9.2f} ms ({min(times['eig']) * 1e3:.2f})   "
          "(numpy.linalg.eigvalsh on the prebuilt H(k) stack)")
    print(f"H(k) build      {med['h'] * 1e3:9.2f} ms ({min(times['h']) * 1e3:.2f})")
    print(f"model.eigenvalues {med['modeig'] * 1e3:7.2f} ms ({min(times['modeig']) * 1e3:.2f})   "
          "(build + diagonalise, chunked)")

    ratios = {}
    for method in ("tetrahedron", "gaussian"):
        per_round = np.asarray(times["full " + method]) / np.asarray(times["eig"])
        ratios[method] = float(np.median(per_round))
        print(f"{method:<12}    full evaluation {med['full ' + method] * 1e3:9.2f} ms (of which Fermi level + "
              f"integration {med['int ' + method] * 1e3:.2f} ms); ratio to bare eigvalsh {ratios[method]:.3f} "
              f"(per-round range {per_round.min():.3f}–{per_round.max():.3f})")

    grid = out["parts"]
    pm = {key: float(np.median(v)) * 1e3 for key, v in parts.items()}
    print(f"  tetrahedron parts: grid setup {pm['grid']:.2f} ms, Fermi level {pm['mu']:.2f} ms (incl. row corner "
          f"extremes of the bands it crosses), occupations {pm['occ']:.2f} ms, one count over the "
          f"{grid.n_rows} band-tetrahedra {pm['cnt']:.2f} ms")

    t_sym, res_sym = med["sym"], out["sym"]
    res_full = out["full tetrahedron"]
    saving = nk / res_sym.n_kpoints_irreducible
    print(f"irreducible wedge {res_sym.n_kpoints_irreducible} of {nk} k-points: {saving:.1f}x fewer "
          f"diagonalisations (target >= 20x), {t_sym * 1e3:.2f} ms with symmetry")
    print(f"band energy     full mesh {res_full.band_energy_eV:.10f} eV, wedge {res_sym.band_energy_eV:.10f} eV, "
          f"difference {abs(res_full.band_energy_eV - res_sym.band_energy_eV):.2e} eV")
    print(f"Fermi level     full mesh {res_full.fermi_level_eV:.10f} eV, wedge {res_sym.fermi_level_eV:.10f} eV")
    print(f"overhead_ratio {ratios['tetrahedron']:.3f}")


if __name__ == "__main__":
    main()
