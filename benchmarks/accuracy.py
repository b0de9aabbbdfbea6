"""Accuracy of the verdicts on the labelled literature set tests/data/known_phases/ (prints a confusion matrix).

Every structure is ranked with default settings; a case counts as predicted 'unstable' when the headline verdict
is 'unstable', otherwise as 'not unstable' (stable or marginal). For the parents that really distort and are called
unstable, it also counts whether the lead candidate's space group is the observed phase's (its Hermann–Mauguin
symbol, from spglib's tables, found in the `observed_ambient_phase` column). The last line is `accuracy x/y`.

    python benchmarks/accuracy.py [--only NAME ...] [--soft-modes]

``--soft-modes`` adds the soft-mode generator (soft Φ(q) patterns and strain instabilities) to the default set.
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FOLDER = ROOT / "tests" / "data" / "known_phases"


def cases():
    with open(FOLDER / "known_phases.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


def _symbols_by_number() -> dict[int, set[str]]:
    """Space-group number → its short Hermann–Mauguin symbols (spglib's tables, every setting; underscores and
    spaces dropped), with the older 'e'-less symbols of the five glide-e groups (Cmce was written Cmca)."""
    import spglib

    out: dict[int, set[str]] = {}
    for hall in range(1, 531):
        t = spglib.get_spacegroup_type(hall)
        out.setdefault(t.number, set()).add(t.international_short.replace("_", "").replace(" ", ""))
    out[64] |= {"Cmca"}
    return out


def observed_group_matches(number: int, observed_text: str, table) -> bool:
    """Whether one of the symbols of space group ``number`` appears as a word of ``observed_text``."""
    import re

    words = {w.replace("_", "") for w in re.findall(r"[A-Za-z0-9_/\-]+", observed_text)}
    return bool(table.get(number, set()) & words)


def predict(path: Path, generators=None):
    from screener.screen.rank import rank
    from screener.structure.formats import read_structure

    result = rank(read_structure(path), progress=False, generators=generators)
    best = result.candidates[0] if result.candidates else None
    return result, best


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", nargs="*", default=None, help="file stems to run")
    ap.add_argument("--soft-modes", action="store_true", help="add the soft-mode generator to the default set")
    args = ap.parse_args(argv)
    generators = None
    if args.soft_modes:
        from screener.screen.generators import DEFAULT_GENERATORS

        generators = (*DEFAULT_GENERATORS, "soft-mode")
    rows = [r for r in cases() if args.only is None or Path(r["file"]).stem in args.only]
    matrix = {(e, p): 0 for e in ("unstable", "stable") for p in ("unstable", "not unstable")}
    right = 0
    groups = _symbols_by_number()
    lead_right, lead_total, lead_wrong = 0, 0, []
    errors: list[str] = []
    print(f"{'file':34s} {'expected':9s} {'verdict':9s} {'ΔE (meV/at)':>12s} {'range':>16s}  s  best")
    for r in rows:
        t0 = time.perf_counter()
        try:
            result, best = predict(FOLDER / r["file"], generators)
        except Exception as exc:  # a failure is a wrong answer, shown, and the run goes on
            # an error is a wrong answer, kept out of the matrix and listed
            print(f"{r['file']:34s} {r['expected']:9s} ERROR     {type(exc).__name__}: {exc}"[:200])
            errors.append(r["file"])
            continue
        verdict = best.verdict if best else "stable"
        pred = "unstable" if verdict == "unstable" else "not unstable"
        matrix[(r["expected"], pred)] += 1
        ok = (pred == "unstable") == (r["expected"] == "unstable")
        right += ok
        if ok and pred == "unstable":
            lead_total += 1
            if observed_group_matches(best.space_group_number, r["observed_ambient_phase"], groups):
                lead_right += 1
            else:
                lead_wrong.append(f"{Path(r['file']).stem} ({best.space_group_symbol})")
        rng = f"{best.delta_E_range_meV_per_atom[0]:.1f}…{best.delta_E_range_meV_per_atom[1]:.1f}" if best else ""
        dE = f"{best.delta_E_meV_per_atom:.1f}" if best else ""
        desc = f"{best.generator} → {best.space_group_symbol}" if best else "no candidate"
        print(f"{r['file']:34s} {r['expected']:9s} {verdict:9s} {dE:>12s} {rng:>16s} {time.perf_counter() - t0:3.0f} "
              f"{desc}{'' if ok else '   <-- wrong'}", flush=True)
    print()
    print("confusion matrix (rows: expected; columns: predicted)")
    print(f"{'':10s} {'unstable':>10s} {'not unstable':>13s}")
    for e in ("unstable", "stable"):
        print(f"{e:10s} {matrix[(e, 'unstable')]:>10d} {matrix[(e, 'not unstable')]:>13d}")
    if errors:
        print(f"errors (counted wrong): {', '.join(errors)}")
    print(f"lead candidate in the observed space group: {lead_right}/{lead_total} of the distorting parents called "
          f"unstable" + (f"; not: {', '.join(lead_wrong)}" if lead_wrong else ""))
    print(f"accuracy {right}/{len(rows)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
