"""Time of the commensurate-supercell construction for a large index: q = (1/11, 1/12, 0) on a 3 Å cubic lattice
(index 132). The requirement (issue 14) is "well under a second"; the earlier box search took about 10 s.

    python benchmarks/supercell.py [--rounds 5]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

from screener.screen.generators import commensurate_supercell


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5)
    args = ap.parse_args(argv)
    times = []
    for _ in range(args.rounds):
        t = time.perf_counter()
        m = commensurate_supercell((1 / 11, 1 / 12, 0), np.eye(3) * 3.0)
        times.append(time.perf_counter() - t)
    print(f"commensurate_supercell q=(1/11, 1/12, 0), index {round(np.linalg.det(m))}: "
          f"median {statistics.median(times) * 1e3:.1f} ms over {args.rounds} rounds")


if __name__ == "__main__":
    main()
