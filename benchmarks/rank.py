"""Seconds per default `rank` for each bundled demo structure (one run; the machine may be shared, so compare
figures from the same run rather than across runs).

Usage: python benchmarks/rank.py
"""

from __future__ import annotations

import time

from screener.screen.rank import rank
from screener.show.report import demo_folder
from screener.structure.formats import read_structure


def main() -> None:
    folder = demo_folder()
    total = 0.0
    print(f"{'structure':<24} {'atoms':>5} {'candidates':>10} {'seconds':>8}  best")
    for path in sorted(p for p in folder.iterdir() if p.suffix.lower() in (".cif", ".json")):
        crystal = read_structure(path)
        t0 = time.perf_counter()
        result = rank(crystal, progress=False)
        dt = time.perf_counter() - t0
        total += dt
        best = result.candidates[0] if result.candidates else None
        what = f"{best.generator} -> {best.space_group_symbol} ({best.verdict})" if best else "none"
        print(f"{path.name:<24} {crystal.n_atoms:>5} {len(result.candidates):>10} {dt:8.2f}  {what}")
    print(f"seconds_total {total:.2f}")


if __name__ == "__main__":
    main()
