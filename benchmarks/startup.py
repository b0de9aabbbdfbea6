"""Start-up time of the command line: `screener --help` and `screener info` against `python -c "import numpy"`.

Each command runs as a whole process, interleaved over rounds; medians and the ratios to the numpy import are
printed (ratios from the same run, so a loaded machine affects both sides alike).

    python benchmarks/startup.py [--rounds 7]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=7)
    args = ap.parse_args(argv)
    demo = ROOT / "demo_structures" / "GeTe_rocksalt.cif"
    commands = {
        "import numpy": [sys.executable, "-c", "import numpy"],
        "screener --help": [sys.executable, "-m", "screener.show.cli", "--help"],
        "screener info": [sys.executable, "-m", "screener.show.cli", "info", str(demo)],
    }
    times = {k: [] for k in commands}
    for _ in range(args.rounds):
        for name, cmd in commands.items():
            t = time.perf_counter()
            subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            times[name].append(time.perf_counter() - t)
    ref = statistics.median(times["import numpy"])
    for name, ts in times.items():
        med = statistics.median(ts)
        print(f"{name:18s} median {med:6.3f} s   ratio to numpy import {med / ref:5.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
