"""Engine benchmark: cost of a full band-energy evaluation against bare batched diagonalisation.

Builds a realistic stack — rocksalt PbTe in its 2-atom primitive cell (a = 6.46 Å, from memory), s+p orbitals on
both atoms, built-in universal parameters — on a 24³ Γ-centred mesh and times, best of 3 in the same run:

* bare ``numpy.linalg.eigvalsh`` on the H(k) stack of the full mesh (the floor any engine must pay);
* the full evaluation ``electrons.solve_on_mesh`` without symmetry on the same mesh: H(k) build, diagonalisation,
  Fermi level and integration, for the tetrahedron method (the default) and Gaussian smearing.

It then compares the full mesh with its irreducible wedge (same band energy, far fewer diagonalisations).
Targets: overhead ratio ≤ 1.3, wedge saving ≥ 20×. The last line is ``overhead_ratio <x>`` for the default method.

Run: ``python benchmarks/engine.py [--mesh 24] [--repeat 3]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from screener import Crystal
from screener.electrons import integrate, solve_on_mesh
from screener.model import build_model
from screener.params import default_parameters
from screener.symmetry import irreducible_mesh


def rocksalt_pbte() -> Crystal:
    a = 6.46  # PbTe lattice constant, Å (from memory)
    lat = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
    return Crystal(lat, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Pb", "Te"])


def best_of(n, fn):
    times, out = [], None
    for _ in range(n):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mesh", type=int, default=24)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    crystal = rocksalt_pbte()
    model = build_model(crystal, default_parameters(sorted(set(crystal.species))))
    mesh = (args.mesh,) * 3
    full = irreducible_mesh(crystal, mesh, use_symmetry=False)
    nk = len(full.kfrac)
    print(f"structure       rocksalt PbTe, {crystal.n_atoms} atoms, {model.n_orbitals} orbitals, "
          f"{model.n_electrons:g} electrons per cell")
    print(f"mesh            {mesh[0]}x{mesh[1]}x{mesh[2]} = {nk} k-points (full, no symmetry)")

    hk = model.hamiltonian(full.kfrac)
    t_eig, _ = best_of(args.repeat, lambda: np.linalg.eigvalsh(hk))
    t_h, _ = best_of(args.repeat, lambda: model.hamiltonian(full.kfrac))
    t_modeig, eigs_full = best_of(args.repeat, lambda: model.eigenvalues(full.kfrac))
    print(f"bare eigvalsh   {t_eig * 1e3:9.2f} ms   (numpy.linalg.eigvalsh on the prebuilt H(k) stack)")
    print(f"H(k) build      {t_h * 1e3:9.2f} ms")
    print(f"model.eigenvalues {t_modeig * 1e3:7.2f} ms   (build + diagonalise, chunked)")

    ratios = {}
    results = {}
    for method in ("tetrahedron", "gaussian"):
        t_int, _ = best_of(args.repeat, lambda m=method: integrate(
            eigs_full, full, model.n_electrons, method=m, spin_degeneracy=model.spin_degeneracy,
            reciprocal_A=crystal.reciprocal_A))
        t_full, res = best_of(args.repeat, lambda m=method: solve_on_mesh(model, mesh, method=m,
                                                                          use_symmetry=False))
        ratios[method] = t_full / t_eig
        results[method] = res
        print(f"{method:<12}    full evaluation {t_full * 1e3:9.2f} ms (of which Fermi level + integration "
              f"{t_int * 1e3:.2f} ms); ratio to bare eigvalsh {ratios[method]:.3f}")

    # where the tetrahedron time goes (private pieces of screener.electrons, timed for the owner's benefit)
    from screener.electrons import _TetrahedronGrid

    t_grid, grid = best_of(args.repeat, lambda: _TetrahedronGrid(eigs_full, full, crystal.reciprocal_A))
    t_mu, mu = best_of(args.repeat, lambda: grid.fermi_level(model.n_electrons, model.spin_degeneracy))
    t_occ, _ = best_of(args.repeat, lambda: grid.occupations(mu))
    t_cnt, _ = best_of(args.repeat, lambda: grid.count(mu))
    print(f"  tetrahedron parts: grid setup (row corner extremes) {t_grid * 1e3:.2f} ms, Fermi level {t_mu * 1e3:.2f} ms "
          f"(one count over {grid.n_rows} band-tetrahedra {t_cnt * 1e3:.2f} ms), occupations {t_occ * 1e3:.2f} ms")

    t_sym, res_sym = best_of(args.repeat, lambda: solve_on_mesh(model, mesh, use_symmetry=True))
    res_full = results["tetrahedron"]
    saving = nk / res_sym.n_kpoints_irreducible
    print(f"irreducible wedge {res_sym.n_kpoints_irreducible} of {nk} k-points: {saving:.1f}x fewer "
          f"diagonalisations (target >= 20x), {t_sym * 1e3:.2f} ms with symmetry")
    print(f"band energy     full mesh {res_full.band_energy_eV:.10f} eV, wedge {res_sym.band_energy_eV:.10f} eV, "
          f"difference {abs(res_full.band_energy_eV - res_sym.band_energy_eV):.2e} eV")
    print(f"Fermi level     full mesh {res_full.fermi_level_eV:.10f} eV, wedge {res_sym.fermi_level_eV:.10f} eV")
    print(f"overhead_ratio {ratios['tetrahedron']:.3f}")


if __name__ == "__main__":
    main()
