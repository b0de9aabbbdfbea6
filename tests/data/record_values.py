"""Record ΔE and verdict of every candidate of `rank` for the bundled demo structures (and the time each took).

Writes tests/data/recorded_values.json, read by tests/screen/test_recorded_values.py. Run from the repository root
(only when a change of results is intended, and say so in the commit):

    python tests/data/record_values.py
"""

from __future__ import annotations

import json
import subprocess
import time
from pathlib import Path

import numpy as np

from screener.screen.rank import rank
from screener.structure.formats import read_structure

ROOT = Path(__file__).resolve().parents[2]


#: the extra input of the slow subset: simple-cubic Bi (known-phases set) as a 2×2×2 supercell, 8 atoms
SUPERCELL_NAME = "Bi_simple_cubic_parent.cif 2x2x2"


def inputs():
    """(name, crystal) of every recorded input: the demo structures, then the 8-atom supercell."""
    for path in sorted((ROOT / "demo_structures").glob("*.cif")):
        yield path.name, read_structure(path)
    bi = read_structure(ROOT / "tests" / "data" / "known_phases" / "Bi_simple_cubic_parent.cif")
    yield SUPERCELL_NAME, bi.supercell(np.diag([2, 2, 2]))


def candidate_key(c) -> str:
    """Identifies a candidate across runs: generator, wave-vector and supercell size."""
    return f"{c.generator} | q={c.q_label} | {c.supercell_atoms} atoms | {c.description}"


def main() -> None:
    commit = subprocess.run(["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True).stdout.strip()
    out = {"how": "tests/data/record_values.py: screener.screen.rank.rank(read_structure(file), progress=False) "
                  "with default settings, per demo structure and for simple-cubic Bi as a 2x2x2 supercell",
           "commit": commit, "structures": {}}
    for name, crystal in inputs():
        t0 = time.perf_counter()
        result = rank(crystal, progress=False)
        dt = time.perf_counter() - t0
        out["structures"][name] = {
            "seconds_when_recorded": round(dt, 2),
            "candidates": {candidate_key(c): {"delta_E_meV_per_atom": c.delta_E_meV_per_atom, "verdict": c.verdict}
                           for c in result.candidates},
        }
        print(f"{name:32s} {dt:6.2f} s  {len(result.candidates)} candidates")
    (ROOT / "tests" / "data" / "recorded_values.json").write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n")


if __name__ == "__main__":
    main()
