"""Command-line interface: parses arguments, calls the library, formats results. One function per subcommand."""

from __future__ import annotations

import argparse
import contextlib
import json
import sys
from pathlib import Path

from screener.errors import ScreenerError, StructureError


def _finite_float(text: str) -> float:
    """argparse type: a finite number (inf, nan and numbers beyond the float range are refused)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    return value


def _add_structure_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", help="structure file (CIF or screener JSON)")
    p.add_argument("--format", choices=["cif", "json"], help="override the format guessed from the name")
    p.add_argument("--symprec", type=_finite_float, default=1e-3, help="symmetry tolerance in Å (default 1e-3)")
    p.add_argument("--max-atoms", type=int, default=None,
                   help="largest number of atoms the structure may have after symmetry expansion (default 2000)")
    p.add_argument("--strict", action="store_true",
                   help="treat doubts about the structure file (merged listed sites, an assumed origin choice, "
                        "implausibly short contacts, missing or inconsistent symmetry) as errors")


def _read(args):
    """Read the structure; its reading warnings are shown only when the read succeeds (an error says enough),
    kept as ``args.read_notes`` for the JSON output, and with ``--strict`` they are errors."""
    import warnings

    from screener.errors import StructureWarning
    from screener.structure.formats import read_structure

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        crystal = read_structure(args.file, format=args.format, max_atoms=args.max_atoms)
    args.read_notes = []
    for w in caught:
        if issubclass(w.category, StructureWarning):
            if getattr(args, "strict", False):
                raise StructureError(f"{w.message} (an error with --strict)")
            args.read_notes.append({"kind": w.message.kind, "message": str(w.message), **w.message.details})
        warnings.showwarning(w.message, w.category, w.filename, w.lineno)
    return crystal


def _print_json(obj) -> None:
    try:
        text = json.dumps(obj, indent=2, allow_nan=False)
    except ValueError:
        raise ScreenerError("the result contains a non-finite number (NaN or infinity); the input or the "
                            "settings are outside what the model can handle") from None
    print(text)


# ---------------------------------------------------------------------------------------------- info
def cmd_info(args) -> int:
    """Structure summary. ``--json`` prints one object with the keys

    ``file``, ``formula`` (this cell), ``n_atoms``, ``space_group`` {``symbol``, ``number``}, ``symprec_A``,
    ``primitive_atoms``, ``lattice_A`` (rows, Å), ``cell`` {``a_A`` … ``gamma_deg``, ``volume_A3``,
    ``volume_per_atom_A3``}, ``sites`` [{``label``, ``element``, ``frac``, ``wyckoff`` (multiplicity + letter
    in the conventional cell), ``orbit`` (label of the first symmetry-equivalent atom)}], ``valence_electrons``
    (per cell, default counts), ``neighbour_shells_A`` [{``distance_A``, ``count_per_atom``}] (shells up to 1.6 ×
    the shortest contact, counts averaged over all atoms), ``merged_sites`` [{``labels``, ``distance_A``}] (distinct
    listed sites read as one atom) and ``read_notes`` [{``kind``, ``message``, …}] (every doubt about the file, as
    also printed on stderr). The object also reads back as a screener JSON structure.
    """
    import numpy as np

    from screener.structure.elements import valence_electrons
    from screener.structure.formats.cif import cell_parameters
    from screener.structure.symmetry import analyse

    crystal = _read(args)
    sym = analyse(crystal, symprec=args.symprec)
    n_conventional = sym.conventional_atoms  # one symmetry search serves the group, the sites and this count
    a, b, c, alpha, beta, gamma = cell_parameters(crystal.lattice_A)
    orbit_size = {int(r): int(n) for r, n in zip(*np.unique(sym.equivalent_atoms, return_counts=True), strict=True)}
    # Wyckoff multiplicity counts the orbit in the conventional cell: the orbit's share of atoms is cell-independent
    mult = {r: round(n * n_conventional / crystal.n_atoms) for r, n in orbit_size.items()}
    wyckoff = [f"{mult[int(r)]}{w}" for r, w in zip(sym.equivalent_atoms, sym.wyckoff, strict=True)]
    shells = crystal.neighbour_shells()
    n_val = float(sum(valence_electrons(s) for s in crystal.species))
    summary = {
        "file": str(args.file),
        "formula": crystal.formula,
        "n_atoms": crystal.n_atoms,
        "space_group": {"symbol": sym.symbol, "number": sym.number},
        "symprec_A": sym.symprec_A,
        "primitive_atoms": sym.primitive_atoms,
        "lattice_A": crystal.lattice_A.tolist(),
        "cell": {"a_A": a, "b_A": b, "c_A": c, "alpha_deg": alpha, "beta_deg": beta, "gamma_deg": gamma,
                 "volume_A3": crystal.volume_A3, "volume_per_atom_A3": crystal.volume_A3 / crystal.n_atoms},
        "sites": [
            {"label": lab, "element": el, "frac": f.tolist(), "wyckoff": w,
             "orbit": crystal.labels[int(r)]}
            for lab, el, f, w, r in zip(crystal.labels, crystal.species, crystal.frac, wyckoff,
                                        sym.equivalent_atoms, strict=True)
        ],
        "valence_electrons": n_val,
        "neighbour_shells_A": [{"distance_A": s.distance_A, "count_per_atom": s.count_per_atom} for s in shells],
        "merged_sites": [{"labels": n["labels"], "distance_A": n["distance_A"]}
                         for n in args.read_notes if n["kind"] == "merged_sites"],
        "read_notes": args.read_notes,
    }
    if args.json:
        _print_json(summary)
        return 0
    out = [
        f"file              {args.file}",
        f"formula           {crystal.formula}  ({crystal.n_atoms} atoms in this cell, "
        f"{sym.primitive_atoms} in the primitive cell)",
        f"space group       {sym.symbol} (No. {sym.number}), symprec {sym.symprec_A:g} Å",
        f"cell              a={a:.4f} b={b:.4f} c={c:.4f} Å   α={alpha:.3f} β={beta:.3f} γ={gamma:.3f}°",
        f"volume            {crystal.volume_A3:.3f} Å^3  ({crystal.volume_A3 / crystal.n_atoms:.3f} Å^3 per atom)",
        f"valence electrons {n_val:g} per cell ({n_val / crystal.n_atoms:g} per atom, default counts)",
        "",
        "symmetry-distinct sites",
        f"  {'label':<10} {'element':<7} {'Wyckoff':<7} {'in cell':>7}   {'x':>8} {'y':>8} {'z':>8}",
    ]
    for r in orbit_size:
        x, y, z = crystal.frac[r]
        out.append(f"  {crystal.labels[r]:<10} {crystal.species[r]:<7} {wyckoff[r]:<7} {orbit_size[r]:>7}   "
                   f"{x:8.5f} {y:8.5f} {z:8.5f}")
    out += ["", "neighbour shells (averaged over atoms)", f"  {'distance (Å)':>12} {'neighbours per atom':>20}"]
    out += [f"  {s.distance_A:12.4f} {s.count_per_atom:20g}" for s in shells]
    print("\n".join(out))
    return 0


# ---------------------------------------------------------------------------------------------- bands
#: Bands listed per special point in the text table; more would not fit a terminal line.
_BANDS_SHOWN = 12


def _bands_text(args, crystal, model, path, energies, result, params_note, bs) -> str:
    import numpy as np

    ef = result.fermi_level_eV
    if bs.all_bands_filled:
        gap = "none in the basis: every band is filled (an insulator; its gap lies beyond the model's orbitals)"
    elif bs.gap_eV > 0:
        gap = f"{bs.gap_eV:.4f} eV (band edges over the mesh and the route)"
    else:
        gap = "0 (metal or partly filled band)"
    route = " | ".join("–".join(lab for lab in piece) for piece in _path_pieces(path))
    out = [
        f"file              {args.file}",
        f"formula           {crystal.formula}  ({crystal.n_atoms} atoms, {model.n_orbitals} orbitals, "
        f"{model.n_electrons:g} valence electrons per cell)",
        f"parameters        {params_note}",
        f"path              {path.lattice_type}: {route}  ({len(path.kfrac)} k-points)",
        f"k-mesh            {'×'.join(str(m) for m in result.mesh)} ({result.n_kpoints_irreducible} irreducible), "
        f"{result.method}",
        f"Fermi level       {ef:.4f} eV",
        f"band energy       {result.band_energy_eV:.4f} eV per cell ({result.band_energy_eV / crystal.n_atoms:.4f} "
        "eV per atom)",
        f"gap               {gap}",
        "",
    ]
    nb = energies.shape[1]
    lo = 0
    if nb > _BANDS_SHOWN:
        # the bands nearest E_F matter most: centre the window on the last band below it
        below = int(np.searchsorted(np.sort(energies.mean(axis=0)), ef))
        lo = int(np.clip(below - _BANDS_SHOWN // 2, 0, nb - _BANDS_SHOWN))
    hi = min(nb, lo + _BANDS_SHOWN)
    which = f"bands {lo + 1}–{hi} of {nb}" if (lo, hi) != (0, nb) else f"all {nb} bands"
    out.append(f"energies at the special points, E − E_F in eV ({which})")
    out.append(f"  {'point':<8} {'k (fractions of reciprocal vectors)':<26}  energies")
    seen = set()
    for idx, label in path.vertices:
        if label in seen:
            continue
        seen.add(label)
        k = " ".join(f"{x:8.4f}" for x in path.kfrac[idx])
        e = " ".join(f"{x:8.3f}" for x in energies[idx, lo:hi] - ef)
        out.append(f"  {label:<8} {k:<26}  {e}")
    return "\n".join(out)


def _path_pieces(path):
    pieces = []
    for start, stop in path.segments:
        pieces.append([lab for idx, lab in path.vertices if start <= idx < stop])
    return pieces


def cmd_bands(args) -> int:
    """Band structure along a path (default: special points of the lattice type), Fermi level, DOS figure.

    JSON: k-points are fractions of the input cell's reciprocal vectors, energies absolute and ascending; labels
    spell Γ as "Γ" (JSON-escaped as \\u0393), other labels as in Setyawan & Curtarolo (2010) with plain digits.
    """
    import numpy as np

    from screener.bz.bands import band_structure
    from screener.show.figures import plot_band_structure

    if args.plot:
        _check_output_file(args.plot, "--plot")
    crystal = _read(args)
    params = _parameters_for(crystal, args.params)
    bs = band_structure(crystal, params, kpoints=args.kpoints, symprec=args.symprec)
    model, path, energies, character, shells, result = (bs.model, bs.path, bs.energies_eV, bs.character,
                                                         list(bs.shells), bs.ground_state)
    params_note = f"{args.params}" if args.params else "built-in universal parameters"
    if args.plot:
        plot_band_structure(bs, args.plot)
    if args.json:
        _print_json({
            "file": str(args.file),
            "formula": crystal.formula,
            "lattice_type": path.lattice_type,
            "parameters": params_note,
            "fermi_level_eV": result.fermi_level_eV,
            "band_energy_eV": result.band_energy_eV,
            "gap_eV": None if bs.all_bands_filled else bs.gap_eV,
            "all_bands_filled": bs.all_bands_filled,
            "n_electrons": model.n_electrons,
            "mesh": list(result.mesh),
            "n_kpoints_irreducible": result.n_kpoints_irreducible,
            "integration": result.method,
            "labels": [{"index": int(i), "label": lab} for i, lab in path.vertices],
            "kpoints_frac": path.kfrac.tolist(),
            "x_inv_A": path.x_inv_A.tolist(),
            "energies_eV": energies.tolist(),
            "orbital_groups": shells,
            "character": np.round(character, 5).tolist(),
            **({"plot": str(args.plot)} if args.plot else {}),
        })
        return 0
    print(_bands_text(args, crystal, model, path, energies, result, params_note, bs))
    if args.plot:
        print(f"\nwrote {args.plot}")
    return 0


# ---------------------------------------------------------------------------------------------- rank
def _parse_q(text: str):
    from fractions import Fraction

    from screener.errors import ParameterError

    try:
        q = [float(Fraction(x.strip())) for x in text.split(",")]
    except (ValueError, ZeroDivisionError):
        q = []
    if len(q) != 3:
        raise ParameterError(f'--q must be three numbers or fractions like "1/2,0,0", got {text!r}')
    return q


def _screen_settings(args):
    from screener.screen.settings import ScreenSettings

    return ScreenSettings(
        k_step_per_A=args.k_step,
        pair_exponent=args.pair_exponent,
        closure=args.closure,
        bulk_modulus_GPa=args.bulk_modulus_GPa,
        threshold_meV_per_atom=args.threshold_meV,
        symprec_A=args.symprec,
        max_supercell_atoms=args.max_supercell_atoms,
    )


def _parameters_for(crystal, path):
    from screener.tb.param_file import load_parameters
    from screener.tb.params import default_parameters

    elements = sorted(set(crystal.species))
    return load_parameters(path, elements) if path else default_parameters(elements)


def cmd_rank(args) -> int:
    """Rank candidate distortions of one structure; table on stdout (or JSON with --json)."""
    from screener.screen.rank import rank
    from screener.show.report import format_rank_text, write_optimum_structures

    if args.csv:
        _check_output_file(args.csv, "--csv")
    if args.write_structures:

        _check_output_folder(args.write_structures, "--write-structures", "the CIFs")
    crystal = _read(args)
    params = _parameters_for(crystal, args.params)
    q_extra = [_parse_q(q) for q in (args.q or [])]
    result = rank(crystal, params, generators=args.generator, extra_q=q_extra, settings=_screen_settings(args),
                  progress=not args.json and not args.quiet, relax_cell=args.relax_cell, n_electrons=args.electrons)
    if args.csv:
        _write_atomically(args.csv, result.table().to_csv(index=False))
    written = write_optimum_structures(result, args.write_structures) if args.write_structures else []
    if args.json:
        out = result.to_dict()
        out["file"] = str(args.file)
        out["read_notes"] = args.read_notes
        if written:
            out["structures_written"] = [str(p) for p in written]
        _print_json(out)
    else:
        print(format_rank_text(result, source=str(args.file)))
        for p in written:
            print(f"wrote {p}")
    return 0


# ---------------------------------------------------------------------------------------------- batch
def cmd_batch(args) -> int:
    """Rank many structures into one store; a summary line per run, the table as CSV on request."""
    from screener.run.batch import run_batch
    from screener.run.store import load_store

    if args.csv:
        _check_output_file(args.csv, "--csv")
    if args.export:
        _check_export(args.export)
    if args.report:
        _check_output_folder(args.report, "--report", "the report")
    if args.params:
        from pathlib import Path

        if not Path(args.params).is_file():
            raise ScreenerError(f"--params {args.params}: no such file")
    summary = run_batch(args.inputs, store=args.store, workers=args.workers, dask=args.dask,
                        progress=not args.quiet, params=args.params, generators=args.generator,
                        extra_q=[_parse_q(q) for q in (args.q or [])], settings=_screen_settings(args),
                        relax_cell=args.relax_cell)
    line = (f"batch: {summary.ranked} ranked, {summary.failed} failed, {summary.skipped} skipped "
            f"(already in {summary.store} with these settings) in {summary.seconds:.1f} s")
    if summary.ranked == 0 and summary.failed == 0:
        line += " — nothing to do"
    print(line)
    if args.csv:
        _write_atomically(args.csv, load_store(args.store).to_csv(index=False))
        print(f"wrote {args.csv}")
    if args.export:
        _export(load_store(args.store), args.export)
        print(f"wrote {args.export}")
    if args.report:
        from screener.show.batch_report import write_batch_report

        print(f"report written to {write_batch_report(args.store, args.report, args.descriptor)}/")
    if summary.interrupted:
        print("screener batch: stopped before the end; run the same command again to finish", file=sys.stderr)
        return 143 if _TERMINATED else 130
    return 0


def _check_export(path) -> None:
    """Before the batch: the export's format is known, its writer available, its place writable."""
    suffix = Path(path).suffix.lower()
    if suffix not in (".csv", ".parquet"):
        raise ScreenerError(f"--export {path}: the name must end in .csv or .parquet")
    if suffix == ".parquet":
        import importlib.util

        if importlib.util.find_spec("pyarrow") is None:
            raise ScreenerError(f"--export {path}: writing .parquet needs the optional pyarrow package "
                                "(pip install pyarrow); or export to .csv")
    _check_output_file(path, "--export")


def _export(table, path) -> None:
    """Write the store's table as CSV or Parquet, atomically (temporary file, then rename)."""
    p = Path(path)
    if p.suffix.lower() == ".csv":
        _write_atomically(p, table.to_csv(index=False))
        return
    with _atomic_path(p) as tmp:
        table.to_parquet(tmp, index=False)


def _write_structure_atomically(crystal, path, **options) -> None:
    """Write a structure file through a temporary file beside ``path`` and a rename: never half-written."""
    from screener.structure.formats import write_structure

    with _atomic_path(path) as tmp:
        write_structure(crystal, tmp, **options)


def _write_atomically(path, text: str) -> None:
    """Write ``text`` to a temporary file beside ``path``, then rename it: never a half-written file."""
    with _atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)


@contextlib.contextmanager
def _atomic_path(path):
    """A temporary file name beside ``path`` (same ending, so writers that look at it choose the same format);
    renamed onto ``path`` when the block succeeds, removed whatever happens."""
    import os
    import tempfile

    p = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.stem}-", suffix=p.suffix, dir=p.resolve().parent)
    os.close(fd)
    try:
        yield tmp
        os.replace(tmp, p)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


def _check_output_file(path, option: str) -> None:
    """Before any work: ``path`` can be written as a file (not a folder; its folder exists and takes files)."""
    from pathlib import Path

    p = Path(path)
    if p.is_dir():
        raise ScreenerError(f"{option} {p} is a folder; give a file name")
    if not p.parent.exists():
        raise ScreenerError(f"{option} {p}: the folder {p.parent} does not exist")
    _check_writable(p.parent, option, p)


def _check_output_folder(path, option: str, what: str = "the output") -> None:
    """Before any work: ``path`` is a folder or can be made one (not a file; its nearest existing folder takes
    files)."""
    from pathlib import Path

    p = Path(path)
    if p.exists() and not p.is_dir():
        raise ScreenerError(f"{option} {p} is a file; give a folder for {what}")
    base = p
    while not base.exists():
        base = base.parent
    if not base.is_dir():
        raise ScreenerError(f"{option} {p}: {base} is a file, so the folder cannot be made")
    _check_writable(base, option, p)


def _check_writable(folder, option: str, target) -> None:
    import tempfile

    try:
        with tempfile.TemporaryDirectory(prefix=".screener-check-", dir=folder):
            pass
    except OSError as exc:
        raise ScreenerError(f"{option} {target}: cannot write in {folder} ({exc.strerror or exc})") from None


# ---------------------------------------------------------------------------------------------- demo
def cmd_demo(args) -> int:
    """Rank every bundled (invented) demo structure and write a report folder."""
    from screener.show.report import run_demo

    _check_output_folder(args.out, "--out", "the report")
    run_demo(args.out, progress=not args.quiet)
    return 0


def _add_rank_options(p: argparse.ArgumentParser) -> None:
    """Options of how a structure is ranked (shared by rank and batch)."""
    p.add_argument("--params", help="TOML parameter file overriding the built-in parameters")
    from screener.screen import GENERATORS

    p.add_argument("--generator", action="append", metavar="NAME",
                   help=f"candidate generator to run, one of {', '.join(GENERATORS)} (repeatable; default: all but soft-mode, that "
                        "apply)")
    p.add_argument("--q", action="append", help='extra modulation wave-vector "qx,qy,qz" (repeatable)')
    p.add_argument("--pair-exponent", type=_finite_float, default=4.0, help="exponent m of the pair repulsion (default 4)")
    p.add_argument("--bulk-modulus-GPa", type=_finite_float,
                   help="the parent's bulk modulus in GPa (default: bundled table of measured values, else an estimate)")
    p.add_argument("--closure", choices=["bulk-modulus", "equilibrium"], default="bulk-modulus",
                   help="elastic closure: fitted to equilibrium and the bulk modulus (default), or to equilibrium "
                        "alone with the fixed --pair-exponent")
    p.add_argument("--k-step", type=_finite_float, default=0.2,
                   help="starting step between k-points along each reciprocal vector, 1/Å with 2π included "
                        "(default 0.2)")
    p.add_argument("--threshold-meV", type=_finite_float, default=1.0,
                   help="gain (meV/atom) beyond which a converged candidate is 'unstable' (default 1)")
    p.add_argument("--relax-cell", action="store_true",
                   help="relax the rhombohedral angle together with the rhombohedral split (slower)")
    p.add_argument("--max-supercell-atoms", type=int, default=64,
                   help="refuse a --q whose supercell has more atoms than this (default 64)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


def build_parser() -> argparse.ArgumentParser:
    from screener import __version__

    parser = argparse.ArgumentParser(
        prog="screener",
        description="Screen crystal structures for band-driven (Peierls-type) bond-alternation instabilities.",
    )
    parser.add_argument("--version", action="version", version=f"screener {__version__}",
                        help="print the version and exit")
    parser.add_argument("--debug", action="store_true", help="show full tracebacks on errors")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("info", help="structure summary: formula, cell, space group, Wyckoff sites, neighbour shells")
    _add_structure_args(p)
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.set_defaults(func=cmd_info)

    p = sub.add_parser("bands", help="tight-binding band structure and DOS")
    _add_structure_args(p)
    p.add_argument("--params", help="TOML parameter file overriding the built-in parameters")
    p.add_argument("--kpoints", help='explicit k-points as "x,y,z;x,y,z;..." (fractions of reciprocal vectors)')
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--plot", help="write a band-structure + DOS figure to this PNG file")
    p.set_defaults(func=cmd_bands)

    p = sub.add_parser("rank", help="rank candidate bond-alternating distortions by energy gain")
    _add_structure_args(p)
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--csv", help="also write the ranked table to this CSV file")
    p.add_argument("--write-structures", help="write each optimum as CIF into this folder")
    p.add_argument("--electrons", type=_finite_float, default=None,
                   help="valence electrons per primitive cell of the parent (default: the neutral atoms' count); "
                        "fills the same bands rigidly, e.g. to see a doped or hypothetical filling")
    _add_rank_options(p)
    p.set_defaults(func=cmd_rank)

    p = sub.add_parser("batch", help="rank many structures into one resumable result store (SQLite)")
    p.add_argument("inputs", nargs="+", help="structure files, folders (searched recursively) or .txt lists of paths")
    p.add_argument("--store", default="results.sqlite", help="result store (SQLite file, default results.sqlite)")
    p.add_argument("--workers", type=int, help="local worker processes (default: the number of cores)")
    p.add_argument("--dask", metavar="ADDRESS", help="send the work to this Dask scheduler (screener[cluster] extra)")
    p.add_argument("--csv", help="write one row per stored structure to this CSV file (same as --export FILE.csv)")
    p.add_argument("--report", metavar="DIR", help="write a report folder: counts, ΔE histogram, most unstable, "
                                                   "ΔE against a descriptor")
    p.add_argument("--export", metavar="FILE",
                   help="write one row per stored structure (headline verdict, top candidate, ΔE and its range) to "
                        "FILE: .csv, or .parquet when the pyarrow package is installed")
    p.add_argument("--descriptor", choices=["volume-per-atom", "electrons-per-atom", "electronegativity-difference"],
                   default="volume-per-atom", help="descriptor of the report's ΔE plot (default volume-per-atom)")
    p.add_argument("--symprec", type=_finite_float, default=1e-3, help="symmetry tolerance in Å (default 1e-3)")
    _add_rank_options(p)
    p.set_defaults(func=cmd_batch)

    p = sub.add_parser("demo", help="rank every bundled invented demo structure and write a report folder")
    p.add_argument("--out", default="screener-report", help="report folder (default ./screener-report)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_demo)
    p = sub.add_parser("explain", help="is an observed bond alternation driven by the bands? parent, path, bonds")
    _add_structure_args(p)
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--parent", help="parent structure file (default: the highest-symmetry parent found)")
    p.add_argument("--write-parent", metavar="FILE",
                   help="write the parent found (positions and cell idealised, in the observed structure's cell and "
                        "atom order) to FILE (.cif or .json)")
    p.add_argument("--params", help="TOML parameter file overriding the built-in parameters")
    p.add_argument("--plot", metavar="DIR", help="write the path-energy and bond figures into this folder")
    p.add_argument("--max-displacement", type=_finite_float, default=None,
                   help="largest atomic displacement to the parent, Å (default 0.4)")
    p.add_argument("--max-strain", type=_finite_float, default=None, help="largest lattice strain to the parent (default 0.08)")
    p.add_argument("--soft-modes", action="store_true",
                   help="also split the distortion on the parent's soft-mode patterns (a stiffness survey first)")
    p.set_defaults(func=cmd_explain)

    p = sub.add_parser("modes", help="stiffness Φ(q), soft patterns and χ0 of the parent over a q grid")
    _add_structure_args(p)
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--plot", help="write χ0 and the lowest stiffness along the special-point route to this PNG file "
                                  "(with --no-path: per searched q)")
    p.add_argument("--q-grid", type=int, default=4, help="largest denominator of q along each direction (default 4)")
    p.add_argument("--no-path", action="store_true",
                   help="skip the special-point route (χ0 and the lowest stiffness at the mesh points it passes)")
    p.add_argument("--route-points", type=int, default=None, metavar="N",
                   help="sample each leg of the route at N + 1 evenly spaced points, rounded onto the mesh (default: "
                        "every mesh point the route passes; fewer is faster)")
    p.add_argument("--electrons", type=_finite_float, help="valence electrons per primitive cell (rigid-band filling)")
    p.set_defaults(func=cmd_modes)
    return parser


# ---------------------------------------------------------------------------------------------- explain
def cmd_explain(args) -> int:
    """Is an observed distortion driven by the bands? Parent, path energies, bond shares and an attribution."""
    from pathlib import Path

    import numpy as np

    from screener.screen.explain import bond_curves, explain
    from screener.structure.formats import read_structure

    if args.plot:
        _check_output_folder(args.plot, "--plot", "the figures")
    if args.write_parent:
        if Path(args.write_parent).suffix.lower() not in (".cif", ".json"):
            raise ScreenerError(f"--write-parent {args.write_parent}: the name must end in .cif or .json")
        _check_output_file(args.write_parent, "--write-parent")
    crystal = _read(args)
    parent = read_structure(args.parent) if args.parent else None
    params = _parameters_for(crystal, args.params)
    from screener.screen.settings import ScreenSettings

    settings = ScreenSettings(symprec_A=args.symprec)
    result = explain(crystal, parent=parent, params=params, settings=settings,
                     max_displacement_A=args.max_displacement, max_strain=args.max_strain,
                     soft_modes=args.soft_modes)
    written = []
    if args.write_parent:
        _write_structure_atomically(result.parent_structure, args.write_parent,
                                    title=f"{result.parent_structure.formula}_parent_{result.parent_symbol}")
    if args.plot:
        from screener.show.figures import plot_bond_curves, plot_explain_path

        out = Path(args.plot)
        out.mkdir(parents=True, exist_ok=True)
        written.append(plot_explain_path(result, out / "path_energy.png"))
        grid, ef, curves = bond_curves(result, params, settings)
        written.append(plot_bond_curves(grid, ef, curves, out / "bond_curves.png"))
    if args.json:
        d = result.as_dict()
        d["file"] = str(args.file)
        if written:
            d["figures"] = [str(w) for w in written]
        if args.write_parent:
            d["parent_file"] = str(args.write_parent)
        _print_json(d)
        return 0
    def _decomposition_lines(dec) -> list[str]:
        """Table: pattern, q, amplitude (norm over the observed cell's atoms, Å), share of |d|² (%)."""
        if dec is None:
            return []
        rows = [(c.generator, c.q_label, f"{c.amplitude_A:.4f}", f"{100 * c.share:.1f}")
                for c in dec.components if c.commensurate]
        rows.append(("residual", "", f"{dec.residual_A:.4f}", f"{100 * dec.residual_share:.1f}"))
        head = ("pattern", "q", "amplitude Å", "share %")
        w = [max(len(r[k]) for r in [head, *rows]) for k in range(4)]
        fmt = lambda r: "  " + "  ".join(x.ljust(w[k]) if k < 2 else x.rjust(w[k])  # noqa: E731
                                         for k, x in enumerate(r))
        out = [f"distortion on the parent's patterns (|d| = {dec.displacement_A:.4f} Å over the cell's atoms, "
               "uniform translation removed; amplitude = norm of each orthonormalised component):",
               fmt(head), *map(fmt, rows)]
        out += [f"  {c.generator} q={c.q_label}: {c.note}" for c in dec.components if not c.commensurate]
        e = np.linalg.eigvalsh(np.asarray(dec.strain))
        out.append("cell strain (principal, observed vs parent): " + ", ".join(f"{100 * x:+.2f} %" for x in e)
                   + f"; volume {100 * (np.linalg.det(np.eye(3) + dec.strain) - 1):+.2f} %")
        return out

    p = result.path
    i1 = p.lambda_.index(1.0)
    lines = [f"{args.file}: parent {result.parent_symbol} (index {result.index}; chain "
             + " → ".join(f"{s} [{i}]" for s, i in result.chain) + ")",
             "distortion by site orbit: " + ", ".join(f"{n} {a:.3f} Å" for n, a in result.modes)]
    lines += _decomposition_lines(result.decomposition)
    lines += [f"path λ = 1 (observed): ΔE band {p.delta_E_band_meV_per_atom[i1]:+.1f}, elastic "
             f"{p.delta_E_elastic_meV_per_atom[i1]:+.1f}, total {p.delta_E_meV_per_atom[i1]:+.1f} meV/atom; "
             f"model optimum λ = {p.optimum_lambda:.2f}",
             "bonds (length parent → observed, share of the band energy, character at E_F):"]
    for b in result.bonds:
        lines.append(f"  {b['pair']} ×{b['count_per_cell']}: {b['length_parent_A']:.3f} → "
                     f"{b['length_observed_A']:.3f} Å,"
                     f" {b['bond_energy_eV']['parent']:.2f} → {b['bond_energy_eV']['observed']:.2f} eV,"
                     f" {b['bond_character_at_EF']['parent']} → {b['bond_character_at_EF']['observed']}")
    lines.append(f"attribution: {result.attribution}")
    lines += [f"  - {r}" for r in result.reasons]
    if args.write_parent:
        lines.append(f"wrote the parent ({result.parent_symbol}) to {args.write_parent}")
    lines += [f"wrote {w}" for w in written]
    print("\n".join(lines))
    return 0


class Terminated(KeyboardInterrupt):
    """SIGTERM received: stop as on Ctrl-C (work in flight is abandoned cleanly), exit 143 (128 + 15)."""


#: set once a SIGTERM arrived: a batch catches the interrupt to store the work in flight, and still owes the
#: caller the exit status of the signal that stopped it
_TERMINATED: list[int] = []


def _on_sigterm(signum, frame):
    _TERMINATED.append(signum)
    raise Terminated()


#: Modules each command needs, imported before it runs (where a signal is only noted, see main): the compiled
#: libraries every command reaches (an interrupt raised inside their import can abort the interpreter), then the
#: command's own modules.
_COMPILED_MODULES = ("numpy", "spglib", "gemmi")
_NUMERICAL_MODULES = ("scipy.linalg", "scipy.optimize")  # every command but info diagonalises or minimises
_COMMAND_MODULES = {
    "info": ("screener.structure.symmetry",),
    "bands": ("screener.bz.bands",),
    "rank": ("screener.screen.rank", "screener.show.report"),
    "batch": ("screener.run.batch", "screener.screen.rank"),
    "demo": ("screener.show.report", "screener.screen.rank"),
    "explain": ("screener.screen.explain",),
    "modes": ("screener.screen.modes", "screener.screen.parent"),
}
#: Added when the command will draw figures (the plotting library is compiled too).
_FIGURE_MODULES = ("matplotlib.figure", "matplotlib.backends.backend_agg", "matplotlib.collections")


def _modules_for(args) -> tuple[str, ...]:
    if args.command not in _COMMAND_MODULES:
        return ()
    draws = args.command == "demo" or getattr(args, "plot", None) or getattr(args, "report", None)
    numerical = () if args.command == "info" else _NUMERICAL_MODULES
    return _COMPILED_MODULES + numerical + _COMMAND_MODULES[args.command] + (_FIGURE_MODULES if draws else ())


def main(argv=None) -> int:
    import importlib
    import signal
    import warnings

    # While the numerical stack is imported, a signal only takes note: an interrupt raised inside a compiled
    # module's import can abort the interpreter instead of unwinding
    pending: list[int] = []
    try:
        signal.signal(signal.SIGINT, lambda signum, frame: pending.append(signum))
        signal.signal(signal.SIGTERM, lambda signum, frame: pending.append(signum))
        main_thread = True
    except ValueError:
        main_thread = False  # not the main thread (e.g. called from a library's worker thread): keep the defaults
    try:
        parser = build_parser()  # imports the generator registry, i.e. the numerical stack
        args = parser.parse_args(argv)
        for name in _modules_for(args):
            importlib.import_module(name)
    finally:
        if main_thread:
            signal.signal(signal.SIGINT, signal.default_int_handler)
            signal.signal(signal.SIGTERM, _on_sigterm)
    if pending:
        return _interrupted(Terminated() if pending[0] == signal.SIGTERM else KeyboardInterrupt())

    def one_line_warning(message, category, filename, lineno, file=None, line=None):
        print(f"screener {args.command}: warning: {message}", file=sys.stderr)

    try:
        with warnings.catch_warnings():
            warnings.showwarning = one_line_warning
            return int(args.func(args) or 0)
    except ScreenerError as exc:
        if args.debug:
            raise
        msg = " ".join(str(exc).split("\n"))
        # every error names the input it is about, even when raised deep inside the library
        inputs = [str(x) for x in (getattr(args, "file", None), getattr(args, "params", None)) if x]
        if inputs and not any(x in msg or Path(x).name in msg for x in inputs):
            msg = f"{inputs[0]}: {msg}"
        print(f"screener {args.command}: error: {msg}", file=sys.stderr)
        return 2
    except MemoryError:
        print(f"screener {args.command}: error: out of memory: the input needs larger arrays than this machine "
              "holds; use a smaller cell or a coarser --k-step", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:
        return _interrupted(exc)
    except BrokenPipeError:
        # output piped into e.g. `head`, which stopped reading: not an error of ours
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:
        # a file system refusal the up-front checks could not foresee (disk full, permissions changed meanwhile)
        if args.debug:
            raise
        where = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        print(f"screener {args.command}: error: cannot read or write{where}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    except Exception as exc:  # noqa: BLE001 - the last net: a bug of ours must still end in one line
        if args.debug:
            raise
        reason = str(exc).splitlines()[0][:200] if str(exc) else ""
        print(f"screener {args.command}: internal error ({type(exc).__name__}{': ' + reason if reason else ''}) on "
              f"{getattr(args, 'file', None) or 'this input'}; please report it with the input file (--debug shows "
              "where it happened)", file=sys.stderr)
        return 3


def _interrupted(exc) -> int:
    """One line, and the conventional exit status: 143 after SIGTERM, 130 after Ctrl-C (128 + signal number)."""
    if isinstance(exc, Terminated):
        print("screener: terminated", file=sys.stderr)
        return 143
    print("screener: interrupted", file=sys.stderr)
    return 130


# ---------------------------------------------------------------------------------------------- modes
def _route_text(route) -> str:
    """The route table of ``modes``: every q used (as multiples of 1/N of the mesh), χ0 and the lowest stiffness,
    then the χ0 maxima along the route."""
    import numpy as np

    mesh = np.asarray(route.kmesh)
    names = "–".join(route.tick_labels)
    lines = [f"along the route {names} ({route.lattice_type}): {len(route.q_frac)} q, the route's points rounded onto "
             f"the {'×'.join(map(str, route.kmesh))} mesh (q = n/N in fractions of the reciprocal vectors)"]
    far = float(np.max(route.off_route_inv_A)) if len(route.q_frac) else 0.0
    if far > 1e-9:
        lines.append(f"  largest distance of a q from the route: {far:.3f} Å⁻¹ (where the route crosses the mesh "
                     "obliquely or a special point is off the mesh)")
    lines.append(f"  {'q (n/N)':<24} {'point':<6} {'path (Å⁻¹)':>10} {'χ0 (states/eV)':>15} {'χ0, overlaps 1':>15} "
                 f"{'lowest (eV/Å²)':>15}")
    for a, q in enumerate(route.q_frac):
        n = np.round(q * mesh).astype(int)
        frac = "(" + ", ".join(f"{x}/{m}" if m > 1 else str(x) for x, m in zip(n, mesh, strict=True)) + ")"
        lines.append(f"  {frac:<24} {route.labels[a]:<6} {route.distance_inv_A[a]:10.3f} "
                     f"{route.chi0_with_overlaps[a]:15.3f} {route.chi0_without_overlaps[a]:15.3f} "
                     f"{route.lowest_stiffness_eV_per_A2[a]:15.3f}")
    maxima = route.maxima(5)
    if maxima:
        lines.append("χ0 maxima along the route: " + "; ".join(
            f"{m['chi0_with_overlaps']:.3f} at ({', '.join(f'{x:.3g}' for x in m['q_frac'])})"
            + (f" {m['label']}" if m["label"] else "") for m in maxima))
    soft = int(np.argmin(route.lowest_stiffness_eV_per_A2))
    lines.append(f"lowest stiffness along the route: {route.lowest_stiffness_eV_per_A2[soft]:.3f} eV/Å² at "
                 f"({', '.join(f'{x:.3g}' for x in route.q_frac[soft])})"
                 + (f" {route.labels[soft]}" if route.labels[soft] else ""))
    return "\n".join(lines)


def cmd_modes(args) -> int:
    """Stiffness of the parent over a q grid. ``--json`` prints ``q_points`` [{``q_frac``,
    ``stiffness_eV_per_A2`` (ascending), ``patterns`` (in words), ``chi0`` {``with_overlaps``,
    ``without_overlaps``} (states/eV per cell)}], ``soft`` (negative stiffnesses, most negative first), ``searched``
    (the q list), ``kmesh``, ``fermi_level_eV``, ``electrons_per_cell`` and, for 3-D periodic cells at the default
    filling, ``strain`` {``elastic_constants_GPa`` (6 × 6, Voigt), ``eigenvalues_GPa``, ``bulk_modulus_GPa``,
    ``instabilities`` (in words), ``kmesh``} and, unless ``--no-path``, ``path`` {``q_frac`` (the q used: the
    special-point route rounded onto the same k-mesh), ``distance_inv_A``, ``labels`` (special point per q or
    ""), ``ticks`` [{``label``, ``distance_inv_A``}], ``chi0_with_overlaps``, ``chi0_without_overlaps``,
    ``lowest_stiffness_eV_per_A2``, ``off_route_inv_A``, ``lattice_type``, ``kmesh``, ``maxima`` (local χ0 maxima,
    largest first)}."""
    import numpy as np

    from screener.screen.modes import (
        cubic_summary,
        describe_pattern,
        describe_strain,
        path_survey,
        strain_stiffness,
        survey,
    )
    from screener.screen.parent import build_parent
    from screener.screen.settings import ScreenSettings

    if args.route_points is not None and args.route_points < 1:
        from screener.errors import ParameterError

        raise ParameterError(f"--route-points must be a positive integer (intervals per leg of the route), "
                             f"got {args.route_points}")
    if args.plot:
        _check_output_file(args.plot, "--plot")
    parent = build_parent(_read(args), settings=ScreenSettings(symprec_A=args.symprec))
    res = survey(parent, args.q_grid, n_electrons=args.electrons)
    points, soft = [], []
    for s, chi in zip(res.stiffness, res.chi0_states_per_eV, strict=True):
        vals = s.eigenvalues_eV_per_A2
        words = [describe_pattern(parent.crystal, s.patterns[:, a], s.q_frac) for a in range(len(vals))]
        points.append({"q_frac": list(s.q_frac), "stiffness_eV_per_A2": [float(v) for v in vals],
                       "patterns": words, "chi0": {"with_overlaps": chi[0], "without_overlaps": chi[1]}})
        # below this a "negative" stiffness is rounding of a zero (uniform translation at Γ; common practice)
        scale = 1e-6 * max(1.0, float(np.max(np.abs(vals))))
        soft += [{"q_frac": list(s.q_frac), "stiffness_eV_per_A2": float(v), "pattern": w}
                 for v, w in zip(vals, words, strict=True) if v < -scale]
    soft.sort(key=lambda x: x["stiffness_eV_per_A2"])
    out = {"file": str(args.file), "q_points": points, "soft": soft, "searched": [list(q) for q in res.searched],
           "kmesh": list(res.kmesh), "fermi_level_eV": res.fermi_level_eV, "electrons_per_cell": res.n_electrons}
    route = None
    if not args.no_path:
        route = path_survey(parent, mesh=res.kmesh, n_electrons=args.electrons, n_per_leg=args.route_points)
        out["path"] = {
            "q_frac": route.q_frac.tolist(),
            "distance_inv_A": route.distance_inv_A.tolist(),
            "labels": list(route.labels),
            "ticks": [{"label": lab, "distance_inv_A": float(x)}
                      for lab, x in zip(route.tick_labels, route.tick_x, strict=True)],
            "chi0_with_overlaps": route.chi0_with_overlaps.tolist(),
            "chi0_without_overlaps": route.chi0_without_overlaps.tolist(),
            "lowest_stiffness_eV_per_A2": route.lowest_stiffness_eV_per_A2.tolist(),
            "off_route_inv_A": route.off_route_inv_A.tolist(),
            "lattice_type": route.lattice_type,
            "kmesh": list(route.kmesh),
            "maxima": route.maxima(),
        }
    strain = None
    if all(parent.model.periodic) and args.electrons is None:
        strain = strain_stiffness(parent)
        out["strain"] = {
            "elastic_constants_GPa": strain.elastic_constants_GPa.tolist(),
            "eigenvalues_GPa": strain.eigenvalues_GPa.tolist(),
            "bulk_modulus_GPa": strain.bulk_modulus_GPa,
            "instabilities": [describe_strain(u) for u in strain.unstable],
            "cubic": cubic_summary(strain),
            "kmesh": list(strain.kmesh),
        }
    if args.plot:
        from screener.show.figures import plot_modes

        plot_modes(res, args.plot, title=parent.crystal.formula, path=route)
    if args.json:
        _print_json(out)
        return 0
    lines = [f"file              {args.file}",
             f"k-mesh            {'×'.join(map(str, res.kmesh))} (one set of parent eigenvectors for every q)",
             f"electrons         {res.n_electrons:g} per primitive cell",
             f"searched          {len(res.searched)} q (denominators up to {args.q_grid}, one per star)", ""]
    lines.append(f"  {'q':<22} {'lowest stiffnesses (eV/Å²)':<34} χ0 (states/eV)")
    for pnt in points:
        q = "(" + ", ".join(f"{x:.3g}" for x in pnt["q_frac"]) + ")"
        low = " ".join(f"{v:8.3f}" for v in pnt["stiffness_eV_per_A2"][:3])
        lines.append(f"  {q:<22} {low:<34} {pnt['chi0']['with_overlaps']:.3f}")
    lines.append("")
    if soft:
        lines.append("soft patterns (most negative first)")
        lines += [f"  {x['stiffness_eV_per_A2']:9.3f} eV/Å²  {x['pattern']}" for x in soft[:10]]
    else:
        lines.append("no soft pattern on the searched q")
    chis = sorted(points, key=lambda x: -x["chi0"]["with_overlaps"])[:3]
    lines.append("χ0 maxima: " + "; ".join(f"{c['chi0']['with_overlaps']:.3f} at "
                                           f"({', '.join(f'{x:.3g}' for x in c['q_frac'])})" for c in chis))
    if route is not None:
        lines += ["", _route_text(route)]
    if strain is not None:
        c = strain.elastic_constants_GPa
        lines += ["", "homogeneous strain: clamped-ion elastic constants of the model (GPa, Voigt xx yy zz yz xz xy)"]
        lines += ["  " + " ".join(f"{x:8.1f}" for x in row) for row in c]
        lines.append(f"  eigenvalues {' '.join(f'{x:.1f}' for x in strain.eigenvalues_GPa)} GPa; Voigt bulk modulus "
                     f"{strain.bulk_modulus_GPa:.1f} GPa")
        if cubic_summary(strain):
            lines.append("  " + cubic_summary(strain))
        if strain.unstable:
            lines += [f"  unstable strain: {describe_strain(u)}" for u in strain.unstable]
        else:
            lines.append("  no strain instability")
    elif args.electrons is not None:
        lines.append("homogeneous strain: not computed with --electrons (the elastic closure belongs to the default "
                     "filling)")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())
