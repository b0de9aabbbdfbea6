"""Fuzz test: a few hundred mutated structure and parameter files through the command line.

Every mutant must end in exit 0 (valid JSON, nothing on stderr but warnings) or exit 2 with one error line naming
the file — never a traceback, another exit code, a hang or a memory blow-up (tests/fuzzing.py says how mutants are
made and judged). The seed is fixed so a failure is reproducible; set SCREENER_FUZZ_SEED to explore other seeds and
SCREENER_FUZZ_N to change the number of structure mutants. benchmarks/fuzz.py runs ten thousand and more.

Sources of the expectations: JSON without NaN or Infinity is RFC 8259 section 6; exit 2 with one line naming the
file is this tool's own command-line contract (common practice, no source).
"""

import os

from fuzzing import DEFAULT_SEED, make_param_mutants, make_structure_mutants, run_mutants, summary

SEED = int(os.environ.get("SCREENER_FUZZ_SEED", DEFAULT_SEED))
N_STRUCTURES = int(os.environ.get("SCREENER_FUZZ_N", 240))
N_PARAMS = max(N_STRUCTURES // 4, 20)


def test_mutated_inputs_are_read_or_rejected_in_one_line(tmp_path):
    mutants = make_structure_mutants(N_STRUCTURES, SEED) + make_param_mutants(N_PARAMS, SEED)
    results = run_mutants(mutants, tmp_path, workers=2, timeout_s=30.0)
    defects = [f"{m.name}: {detail}" for m, outcome, detail in results if outcome == "defect"]
    counts = summary(results)
    assert counts["ok"] + counts["rejected"] + counts["defect"] == len(mutants)
    # both outcomes occur: the mutants exercise the readers' acceptance and their error paths
    assert counts["ok"] > 0 and counts["rejected"] > 0, counts
    assert not defects, f"seed {SEED}: {len(defects)} defects\n" + "\n".join(defects[:40])
