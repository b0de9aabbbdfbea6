"""Mutation fuzzing at scale: ten thousand structure and five hundred parameter mutants through the CLI.

    python benchmarks/fuzz.py [--structures 10000] [--params 500] [--seed N] [--workers 2]

Prints the counts (ok / rejected / defects) and every defect with its mutant's name; the mutants are written to a
temporary folder that is kept when there are defects, so each can be rerun with `screener info FILE`.
"""

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from fuzzing import DEFAULT_SEED, make_param_mutants, make_structure_mutants, run_mutants, summary  # noqa: E402


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--structures", type=int, default=10000)
    ap.add_argument("--params", type=int, default=500)
    ap.add_argument("--seed", type=int, default=DEFAULT_SEED)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--timeout-s", type=float, default=60.0)
    args = ap.parse_args()
    t0 = time.perf_counter()
    mutants = make_structure_mutants(args.structures, args.seed) + make_param_mutants(args.params, args.seed)
    folder = Path(tempfile.mkdtemp(prefix="screener-fuzz-"))

    def progress(n):
        if n % 500 == 0:
            print(f"  {n}/{len(mutants)} ({time.perf_counter() - t0:.0f} s)", file=sys.stderr)

    results = run_mutants(mutants, folder, workers=args.workers, timeout_s=args.timeout_s, progress=progress)
    counts = summary(results)
    for kind in ("structure", "params"):
        sub = summary([r for r in results if r[0].kind == kind])
        print(f"{kind:9s} mutants {sum(sub.values()):6d}: ok {sub['ok']}, rejected {sub['rejected']}, "
              f"defects {sub['defect']}")
    for m, outcome, detail in results:
        if outcome == "defect":
            print(f"DEFECT {folder / m.name}: {detail}")
    print(f"defects {counts['defect']} of {len(mutants)} mutants (seed {args.seed}) in "
          f"{time.perf_counter() - t0:.0f} s")
    if counts["defect"] == 0:
        shutil.rmtree(folder)
    return 1 if counts["defect"] else 0


if __name__ == "__main__":
    sys.exit(main())
