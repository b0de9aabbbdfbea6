"""Mutation fuzzing of the structure and parameter readers, shared by tests/test_fuzz.py and benchmarks/fuzz.py.

Mutants are made from the repository's own test and demo structures (CIF, and JSON written from them) and from the
parameter files in tests/data/params, with a seeded random generator, so a run is reproducible from its seed. Each
mutant is run through the command line in a worker process with a memory limit and a time limit, and the outcome is
classified:

* ``ok`` — exit 0, and any JSON printed is valid (no NaN or infinity);
* ``rejected`` — exit 2 with exactly one error line on stderr that names the file (warning lines allowed);
* anything else is a defect: a traceback or unexpected exception, another exit code, a message that does not name
  the file or runs over several lines, invalid JSON, a hang or a memory blow-up.

Which mutations to make (byte flips, truncation, number and tag mutations, odd element symbols, huge cells, many
atoms, malformed symmetry operators, deep JSON nesting, huge integers) follows the defects listed in the issue that
asked for this harness; the proportions are common practice, no source.
"""

from __future__ import annotations

import io
import json
import multiprocessing as mp
import random
import re
import sys
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
STRUCTURE_SEEDS = sorted([*(ROOT / "tests" / "data").glob("*.cif"), *(ROOT / "tests" / "data" / "known_phases").glob(
    "*.cif"), *(ROOT / "demo_structures").glob("*.cif")])
#: structure the parameter mutants are applied to (a one-atom chain: fast), per parameter seed's stem prefix
PARAM_STRUCTURES = {"chain": ROOT / "demo_structures" / "Sb_linear_chain.cif",
                    "sp": ROOT / "tests" / "data" / "known_phases" / "Si_diamond.cif"}
#: parameter seed files: those whose stem prefix names a structure above (other test parameter files are not seeds)
PARAM_SEEDS = sorted(p for p in (ROOT / "tests" / "data" / "params").glob("*.toml")
                     if p.stem.split("_")[0] in PARAM_STRUCTURES)

DEFAULT_SEED = 20261202

_NUMBER = re.compile(rb"(?<![A-Za-z_])[-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?(?:\(\d+\))?")
_ELEMENT = re.compile(rb"(?<=\s)[A-Z][a-z]?(?=\d*\s)")
_OPERATOR = re.compile(rb"^'?[-+xyz0-9/., ]*[xyz][-+xyz0-9/., ]*'?$", re.M)

_NUMBER_REPLACEMENTS = [b"0", b"-0", b"1e6", b"1e20", b"1e308", b"1e309", b"-1e10", b"1e-20", b"inf", b"nan",
                        b"NaN", b"-inf", b"?", b".", b"0,5", b"half", b"2", b"1.5", b"9" * 400, b"1" * 5000,
                        b"0.134", b"1e10", b"1e15", b"0.5(", b"1/3", b"--1"]
_ELEMENT_REPLACEMENTS = [b"Xx", b"Q", b"al", b"AL", b"Uuo", b"D", b"H", b"Og", b"Fe3+", b"As-", b"12", b"?", b"."]
_OPERATOR_REPLACEMENTS = [b"'x+1/3,y,z'", b"'x,x,z'", b"'2x,y,z'", b"'x,y'", b"'a,b,c'", b"'x,y,z,w'", b"'-x,-y,-z'",
                          b"'x+1/0,y,z'", b"'x,y,z+1e400'", b"''", b"'y,z,x'"]
_TAG_REPLACEMENTS = [b"_symmetry_space_group_name_H-M 'P m -3 x'", b"_symmetry_Int_Tables_number 0",
                     b"_symmetry_Int_Tables_number 999", b"_space_group_IT_number -5",
                     b"_symmetry_space_group_name_H-M 'F m -3 m'", b"_symmetry_space_group_name_H-M ''",
                     b"_cell_length_a 1e12", b"_cell_angle_gamma 179.9", b"_cell_angle_alpha 0",
                     b"_cell_angle_beta 200", b"_atom_site_occupancy 0.5", b"_atom_site_fract_x 0.25",
                     b"_cell_length_b -3", b"loop_", b"data_", b"_symmetry_equiv_pos_as_xy"]


@dataclass(frozen=True)
class Mutant:
    """One mutated input file."""

    name: str          #: file name (stem tells the seed file and the mutation)
    data: bytes        #: the file's bytes
    kind: str          #: "structure" or "params"
    structure: str     #: for params mutants: the structure file they are used with


# ---------------------------------------------------------------------------------------------- mutations
def _flip(rng, b):
    i = rng.randrange(len(b))
    return b[:i] + bytes([rng.randrange(256)]) + b[i + 1:]


def _truncate(rng, b):
    return b[:rng.randrange(len(b))]


def _lines(b):
    return b.split(b"\n")


def _duplicate_line(rng, b):
    lines = _lines(b)
    i = rng.randrange(len(lines))
    return b"\n".join(lines[:i + 1] + [lines[i]] + lines[i + 1:])


def _swap_lines(rng, b):
    lines = _lines(b)
    i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
    lines[i], lines[j] = lines[j], lines[i]
    return b"\n".join(lines)


def _delete_line(rng, b):
    lines = _lines(b)
    del lines[rng.randrange(len(lines))]
    return b"\n".join(lines)


def _sub_random(rng, pattern, b, replacements):
    hits = list(pattern.finditer(b))
    if not hits:
        return _flip(rng, b)
    m = rng.choice(hits)
    return b[:m.start()] + rng.choice(replacements) + b[m.end():]


def _number(rng, b):
    return _sub_random(rng, _NUMBER, b, _NUMBER_REPLACEMENTS)


def _element(rng, b):
    return _sub_random(rng, _ELEMENT, b, _ELEMENT_REPLACEMENTS)


def _operator(rng, b):
    return _sub_random(rng, _OPERATOR, b, _OPERATOR_REPLACEMENTS)


def _tag(rng, b):
    lines = _lines(b)
    i = rng.randrange(len(lines))
    return b"\n".join(lines[:i] + [rng.choice(_TAG_REPLACEMENTS)] + lines[i + 1:])


def _bom(rng, b):
    return b"\xef\xbb\xbf" + b


def _many_atoms(rng, b, n=None):
    """Repeat the last atom row n times with random coordinates (a many-site CIF)."""
    lines = [ln for ln in _lines(b)]
    rows = [i for i, ln in enumerate(lines) if _ELEMENT.search(b" " + ln + b" ") and len(ln.split()) >= 4
            and not ln.startswith((b"_", b"#", b"'"))]
    if not rows:
        return _flip(rng, b)
    last = lines[rows[-1]].split()
    n = n or rng.choice([50, 300, 1700, 2500])
    extra = []
    for k in range(n):
        row = list(last)
        row[0] = row[0] + b"x" + str(k).encode()
        for j in (2, 3, 4):
            if j < len(row):
                row[j] = f"{rng.random():.5f}".encode()
        extra.append(b" ".join(row))
    return b"\n".join(lines[:rows[-1] + 1] + extra + lines[rows[-1] + 1:])


CIF_MUTATIONS = {"flip": _flip, "truncate": _truncate, "dupline": _duplicate_line, "swap": _swap_lines,
                 "delline": _delete_line, "number": _number, "element": _element, "operator": _operator,
                 "tag": _tag, "bom": _bom, "atoms": _many_atoms}
#: relative frequency of each mutation (common practice, no source: mostly cheap local edits)
CIF_WEIGHTS = {"flip": 3, "truncate": 2, "dupline": 2, "swap": 2, "delline": 2, "number": 5, "element": 2,
               "operator": 2, "tag": 3, "bom": 1, "atoms": 1}


def _cif_to_json(path: Path) -> bytes | None:
    """The seed as screener JSON (via the tool's own reader and writer), or None if it does not read."""
    from screener.structure.formats import read_structure

    try:
        c = read_structure(path)
    except Exception:  # noqa: BLE001 - a seed that does not read is simply not used for JSON mutants
        return None
    sites = [{"element": s, "frac": [float(x) for x in f], "label": lab}
             for s, f, lab in zip(c.species, c.frac, c.labels, strict=True)]
    return json.dumps({"lattice_A": c.lattice_A.tolist(), "sites": sites}, indent=1).encode()


def _json_mutation(rng, b):
    choice = rng.randrange(8)
    if choice == 0:
        depth = rng.choice([100, 5000, 200000])
        return b'{"lattice_A": ' + b"[" * depth + b"1" + b"]" * depth + b', "sites": []}'
    if choice == 1:
        return b.replace(b"[", b"[" + b"7" * rng.choice([400, 5000]) + b", ", 1)
    if choice == 2:
        return _number(rng, b)
    if choice == 3:
        return b.replace(b'"element": "', b'"element": "' + rng.choice([b"Xx", b"", b"1", b"Q"]), 1)
    if choice == 4:
        return b.replace(b'"sites"', b'"sitez"')
    if choice == 5:
        return _bom(rng, b)
    if choice == 6:
        return b.replace(b"]", b"", 1)
    return _flip(rng, b)


def _param_mutation(rng, b):
    choice = rng.randrange(9)
    if choice == 0:
        return b.replace(b"cutoff_A = ", b"cutoff_A = " + rng.choice([b"100", b"1000", b"1e9", b"inf", b"-1"]) + b" #",
                         1) if b"cutoff_A" in b else b + b'\n[bond."Sb-Sb"]\ncutoff_A = 500\n'
    if choice == 1:
        return b + rng.choice([b"\nshells = 1000000000\n", b"\nshells = -1\n", b"\nshells = 0\n"])
    if choice == 2:
        return b + b"\n[species.Xe]\norbitals = [\"s\"]\nvalence_electrons = 8\n"
    if choice == 3:
        return b.replace(b"= ", b"= " + b"9" * 400 + b" #", 1)
    if choice == 4:
        i = rng.randrange(len(b))
        return b[:i] + b"\xff\xfe" + b[i:]
    if choice == 5:
        return b.replace(b"exponent = 2", b"exponent = " + rng.choice([b"0", b"-2", b"nan", b"1e308"])) \
            if b"exponent = 2" in b else b + b"\nexponent = -3\n"
    if choice == 6:
        return _number(rng, b)
    if choice == 7:
        return _truncate(rng, b)
    return rng.choice([_flip, _duplicate_line, _swap_lines, _delete_line])(rng, b)


def make_structure_mutants(n: int, seed: int = DEFAULT_SEED) -> list[Mutant]:
    """n mutated structure files (about 3/4 CIF, 1/4 JSON), reproducible from seed."""
    rng = random.Random(seed)
    seeds = [(p, p.read_bytes()) for p in STRUCTURE_SEEDS]
    json_seeds = [(p, j) for p in STRUCTURE_SEEDS[:12] if (j := _cif_to_json(p)) is not None]
    names, weights = zip(*CIF_WEIGHTS.items(), strict=True)
    out = []
    for i in range(n):
        if json_seeds and rng.random() < 0.25:
            p, b = rng.choice(json_seeds)
            out.append(Mutant(f"{i:05d}_{p.stem}_json.json", _json_mutation(rng, b), "structure", ""))
            continue
        p, b = rng.choice(seeds)
        k = 1 if rng.random() < 0.7 else 2
        tags = []
        for _ in range(k):
            name = rng.choices(names, weights)[0]
            b = CIF_MUTATIONS[name](rng, b) if b else b
            tags.append(name)
        out.append(Mutant(f"{i:05d}_{p.stem}_{'+'.join(tags)}.cif", b, "structure", ""))
    return out


def make_param_mutants(n: int, seed: int = DEFAULT_SEED) -> list[Mutant]:
    """n mutated parameter files, each paired with the structure of its seed, reproducible from seed."""
    rng = random.Random(seed + 1)
    seeds = [(p, p.read_bytes()) for p in PARAM_SEEDS]
    out = []
    for i in range(n):
        p, b = rng.choice(seeds)
        structure = PARAM_STRUCTURES[p.stem.split("_")[0]]
        out.append(Mutant(f"{i:05d}_{p.stem}.toml", _param_mutation(rng, b), "params", str(structure)))
    return out


# ---------------------------------------------------------------------------------------------- running
def command_for(m: Mutant, path: Path) -> list[str]:
    """The command-line arguments a mutant is run with."""
    if m.kind == "structure":
        return ["info", str(path), "--json"]
    return ["bands", m.structure, "--params", str(path), "--kpoints", "0,0,0;0.5,0,0", "--json"]


def _limit_memory(limit_bytes: int) -> None:
    import resource

    resource.setrlimit(resource.RLIMIT_AS, (limit_bytes, limit_bytes))


def _reject_constant(name):
    raise ValueError(f"non-finite number {name} in JSON output")


def run_one(argv: list[str], timeout_s: float) -> tuple[str, str]:
    """Run the command line in this process; return (outcome, detail)."""
    import signal
    import warnings

    from screener.show.cli import main

    file_name = Path(argv[3] if argv[0] == "bands" else argv[1]).name

    class _Hang(BaseException):
        pass

    def on_alarm(signum, frame):
        raise _Hang

    out, err = io.StringIO(), io.StringIO()
    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.setitimer(signal.ITIMER_REAL, timeout_s)
    try:
        # the interpreter's own warning filters, as a user's run would have them
        with redirect_stdout(out), redirect_stderr(err), warnings.catch_warnings():
            try:
                code = main(argv)
            except SystemExit as exc:
                code = exc.code
    except _Hang:
        return "defect", f"no answer within {timeout_s:g} s"
    except MemoryError:
        return "defect", "MemoryError escaped"
    except BaseException as exc:  # noqa: BLE001 - any escape is the defect we are looking for
        return "defect", f"{type(exc).__name__} escaped: {str(exc)[:200]}"
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
    stderr = err.getvalue()
    if "Traceback" in stderr:
        return "defect", "traceback on stderr"
    lines = [ln for ln in stderr.splitlines() if ln.strip()]
    errors = [ln for ln in lines if "warning:" not in ln.lower()]
    if code == 0:
        if errors:
            return "defect", f"exit 0 with stray stderr: {errors[0][:200]}"
        try:
            json.loads(out.getvalue(), parse_constant=_reject_constant)
        except ValueError as exc:
            return "defect", f"exit 0 with invalid JSON: {str(exc)[:200]}"
        return "ok", ""
    if code != 2:
        return "defect", f"exit code {code!r}"
    if len(errors) != 1:
        return "defect", f"{len(errors)} error lines: {' | '.join(errors)[:300]}"
    if file_name not in errors[0]:
        return "defect", f"message does not name {file_name}: {errors[0][:200]}"
    return "rejected", errors[0][:200]


def _worker(job):
    argv, timeout_s = job
    return run_one(argv, timeout_s)


def run_mutants(mutants: list[Mutant], folder: Path, *, workers: int = 2, timeout_s: float = 20.0,
                memory_limit_GB: float = 4.0, progress=None) -> list[tuple[Mutant, str, str]]:
    """Write the mutants into folder and run each through the CLI; returns (mutant, outcome, detail) per mutant.

    Workers are separate processes with an address-space limit (a memory blow-up becomes a MemoryError there) and
    a per-mutant alarm; a worker that dies is reported as a defect of the mutant it was running.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    jobs = []
    for m in mutants:
        path = folder / m.name
        path.write_bytes(m.data)
        jobs.append((command_for(m, path), timeout_s))
    ctx = mp.get_context("spawn")
    results = []
    limit = int(memory_limit_GB * 2**30)
    with ctx.Pool(workers, initializer=_limit_memory, initargs=(limit,), maxtasksperchild=200) as pool:
        pending = [pool.apply_async(_worker, (job,)) for job in jobs]
        for m, p in zip(mutants, pending, strict=True):
            try:
                outcome, detail = p.get(timeout=timeout_s * 3 + 60)
            except mp.TimeoutError:
                outcome, detail = "defect", "worker did not answer"
            except Exception as exc:  # noqa: BLE001 - a dead worker is a defect of this mutant
                outcome, detail = "defect", f"worker failed: {type(exc).__name__}: {exc}"
            results.append((m, outcome, detail))
            if progress:
                progress(len(results))
    return results


def summary(results) -> dict[str, int]:
    """Counts per outcome."""
    counts = {"ok": 0, "rejected": 0, "defect": 0}
    for _, outcome, _ in results:
        counts[outcome] += 1
    return counts


if __name__ == "__main__":  # pragma: no cover - handy for a single mutant: python tests/fuzzing.py info FILE
    print(run_one(sys.argv[1:], 60.0))
