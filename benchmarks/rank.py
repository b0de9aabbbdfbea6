"""Time of a default `rank` per bundled demo structure and for an 8-atom supercell (simple-cubic Bi, 2×2×2), as a
ratio to a reference workload timed in the same run: numpy.linalg.eigvalsh of 13,824 Hermitian 8×8 matrices, ten
times (one BLAS thread, as rank uses). The machine may be shared: quote the ratios, not the seconds.

Targets (issue 13): 1–2-atom parents ≤ 1.5, the 8-atom cell ≤ 2 (it is ranked in its 1-atom primitive cell).

Usage: python benchmarks/rank.py [--rounds 3]
"""

from __future__ import annotations

import argparse
import statistics
import time
from pathlib import Path

import numpy as np

from screener.screen.rank import rank
from screener.structure.formats import read_structure
from screener.tb.model import single_blas_thread

ROOT = Path(__file__).resolve().parents[1]


def reference_workload(rng=np.random.default_rng(13)) -> float:
    """Seconds for eigvalsh of 13,824 random Hermitian 8×8 matrices, ten times."""
    a = rng.standard_normal((13824, 8, 8)) + 1j * rng.standard_normal((13824, 8, 8))
    h = a + np.conj(np.swapaxes(a, 1, 2))
    with single_blas_thread():
        t0 = time.perf_counter()
        for _ in range(10):
            np.linalg.eigvalsh(h)
        return time.perf_counter() - t0


def inputs():
    for path in sorted((ROOT / "demo_structures").glob("*.cif")):
        yield path.name, read_structure(path)
    bi = read_structure(ROOT / "tests" / "data" / "known_phases" / "Bi_simple_cubic_parent.cif")
    yield "Bi simple cubic 2x2x2", bi.supercell(np.diag([2, 2, 2]))


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3, help="interleaved rounds; medians are printed")
    args = ap.parse_args(argv)
    cases = list(inputs())
    times = {name: [] for name, _ in cases}
    ref = []
    for _ in range(args.rounds):
        ref.append(reference_workload())
        for name, crystal in cases:
            t0 = time.perf_counter()
            rank(crystal, progress=False)
            times[name].append(time.perf_counter() - t0)
    r = statistics.median(ref)
    print(f"reference workload (eigvalsh 13824 x 8x8, ten times): median {r:.3f} s")
    print(f"{'structure':<26} {'atoms':>5} {'seconds':>8} {'ratio':>6}")
    for name, crystal in cases:
        t = statistics.median(times[name])
        print(f"{name:<26} {crystal.n_atoms:>5} {t:8.2f} {t / r:6.2f}")


if __name__ == "__main__":
    main()
