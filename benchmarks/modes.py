"""Time `screener.screen.modes.survey` (Φ(q) and χ0 on the default q grid) for small parents; prints seconds."""

import time
from pathlib import Path

from screener.screen.modes import survey
from screener.screen.parent import build_parent
from screener.structure.formats import read_structure

DATA = Path(__file__).parents[1] / "tests" / "data" / "known_phases"

for name in ("As_simple_cubic_parent", "Al_fcc", "NaCl_rocksalt", "Si_diamond"):
    parent = build_parent(read_structure(DATA / f"{name}.cif"))
    parent.energetics  # closure fitted first: not part of the survey
    t = time.perf_counter()
    res = survey(parent)
    dt = time.perf_counter() - t
    low = min(s.eigenvalues_eV_per_A2[0] for s in res.stiffness)
    print(f"{name:<24} {parent.crystal.n_atoms} atoms  {len(res.searched):3d} q  mesh {res.kmesh}  {dt:6.1f} s  "
          f"lowest stiffness {low:8.3f} eV/Å²")
