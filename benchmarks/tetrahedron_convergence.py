"""Convergence of the band energy with k-mesh size: linear tetrahedron (with and without Blöchl's correction)
against Gaussian and Methfessel–Paxton smearing, for the s band of a simple-cubic lattice at a non-symmetric
filling, and the integration time per method. Prints a table; run with ``python benchmarks/tetrahedron_convergence.py``.

Reference: the same integral on a dense mesh with the tetrahedron method (Blöchl, Jepsen & Andersen, PRB 49,
16223 (1994)), cross-checked against Methfessel–Paxton smearing with a small width.
"""

from __future__ import annotations

import time

import numpy as np

from screener.bz.integrate import integrate
from screener.bz.kmesh import irreducible_mesh
from screener.structure.crystal import Crystal

ONSITE_EV, V_EV, N_ELECTRONS = 0.3, -1.0, 0.6
CRYSTAL = Crystal(np.eye(3) * 3.0, [[0.0, 0.0, 0.0]], ["Po"])


def eigenvalues(kfrac):
    """sc s band, E = ε + 2V Σ cos 2πk_i (one orbital per cell)."""
    return (ONSITE_EV + 2 * V_EV * np.cos(2 * np.pi * np.asarray(kfrac)).sum(1))[:, None]


def band_energy(n, method, width_eV=0.1, blochl=True):
    km = irreducible_mesh(CRYSTAL, (n, n, n))
    e = eigenvalues(km.kfrac)
    t0 = time.perf_counter()
    r = integrate(e, km, N_ELECTRONS, method=method, width_eV=width_eV, reciprocal_A=CRYSTAL.reciprocal_A,
                  blochl=blochl)
    return r, time.perf_counter() - t0


def main():
    ref, _ = band_energy(96, "tetrahedron")
    mp_ref, _ = band_energy(96, "methfessel-paxton", width_eV=0.03)
    print(f"reference E_band (tetrahedron 96³) = {ref.band_energy_eV:.7f} eV; "
          f"Methfessel–Paxton σ=0.03 eV on 96³ = {mp_ref.band_energy_eV:.7f} eV")
    print(f"{'mesh':>6} {'N_ir':>6} | {'tetra+Blöchl':>13} {'tetra plain':>12} {'Gauss σ=.1':>12} "
          f"{'Gauss σ=.05':>12} {'MP1 σ=.1':>12} | errors in meV per cell; integration time s (tetra)")
    for n in (6, 8, 12, 16, 24, 32, 48):
        rows = []
        tb, t_tet = band_energy(n, "tetrahedron")
        rows.append(tb)
        rows.append(band_energy(n, "tetrahedron", blochl=False)[0])
        rows.append(band_energy(n, "gaussian", 0.1)[0])
        rows.append(band_energy(n, "gaussian", 0.05)[0])
        rows.append(band_energy(n, "methfessel-paxton", 0.1)[0])
        errs = " ".join(f"{1e3 * (r.band_energy_eV - ref.band_energy_eV):>12.4f}" for r in rows)
        print(f"{n:>5}³ {tb.n_kpoints_irreducible:>6} | {errs} | {t_tet:.3f}")

    # cost of the tetrahedron integration with many bands (a supercell-sized problem)
    rng = np.random.default_rng(0)
    for n, nb in ((12, 32), (16, 64)):
        km = irreducible_mesh(CRYSTAL, (n, n, n), use_symmetry=False)
        shifts = np.sort(rng.normal(scale=3.0, size=nb))
        e = eigenvalues(km.kfrac) + shifts[None, :]
        e.sort(axis=1)
        t0 = time.perf_counter()
        integrate(e, km, nb * 0.9, method="tetrahedron", reciprocal_A=CRYSTAL.reciprocal_A)
        print(f"tetrahedron integration, full {n}³ mesh × {nb} bands: {time.perf_counter() - t0:.2f} s")


if __name__ == "__main__":
    main()
