"""Throughput of `screener batch` with 1 and 2 local workers on the same inputs (prints structures per second and
the ratio). Inputs: the quick undistorted cases of tests/data/known_phases, each copied twice under another
name so there is enough work to share.

    python benchmarks/batch.py
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASES = ["K_bcc", "NaCl_rocksalt", "Si_diamond", "ZnS_zincblende", "MgO_rocksalt", "GaAs_zincblende", "KCl_rocksalt",
         "InP_zincblende", "Ge_diamond", "AlAs_zincblende"]


def main() -> int:
    from screener.run.batch import run_batch

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "inputs"
        folder.mkdir()
        for k in range(2):
            for name in CASES:
                text = (ROOT / "tests" / "data" / "known_phases" / f"{name}.cif").read_text()
                # a comment line makes each copy a distinct file (its own content hash)
                (folder / f"{name}_{k}.cif").write_text(f"# copy {k}\n{text}")
        rates = {}
        for workers in (1, 2):
            t = time.perf_counter()
            s = run_batch([folder], store=Path(tmp) / f"w{workers}.sqlite", workers=workers, progress=False)
            dt = time.perf_counter() - t
            rates[workers] = s.ranked / dt
            print(f"workers {workers}: {s.ranked} structures in {dt:.1f} s = {rates[workers]:.2f} per s")
        print(f"throughput ratio 2 workers / 1 worker: {rates[2] / rates[1]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
