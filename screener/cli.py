"""Command-line interface: parses arguments, calls the library, formats results. One function per subcommand."""

from __future__ import annotations

import argparse
import json
import sys

from .errors import ScreenerError


def _add_structure_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", help="structure file (CIF, POSCAR/CONTCAR/.vasp, or screener JSON)")
    p.add_argument("--format", choices=["cif", "poscar", "json"], help="override the format guessed from the name")
    p.add_argument("--species", help="comma-separated element symbols for an old-style POSCAR without a species line")
    p.add_argument("--symprec", type=float, default=1e-3, help="symmetry tolerance in Å (default 1e-3)")


def _read(args):
    from .io import read_structure

    options = {}
    if getattr(args, "species", None):
        options["species"] = [s.strip() for s in args.species.split(",") if s.strip()]
    return read_structure(args.file, format=args.format, **options)


def _print_json(obj) -> None:
    print(json.dumps(obj, indent=2))


# ---------------------------------------------------------------------------------------------- info
def cmd_info(args) -> int:
    raise NotImplementedError("screener info is being written")


# ---------------------------------------------------------------------------------------------- bands
def cmd_bands(args) -> int:
    raise NotImplementedError("screener bands is being written")


# ---------------------------------------------------------------------------------------------- rank
def cmd_rank(args) -> int:
    raise NotImplementedError("screener rank is being written")


# ---------------------------------------------------------------------------------------------- demo
def cmd_demo(args) -> int:
    raise NotImplementedError("screener demo is being written")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="screener",
        description="Screen crystal structures for band-driven (Peierls-type) bond-alternation instabilities.",
    )
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
    p.add_argument("--params", help="TOML parameter file overriding the built-in parameters")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--csv", help="also write the ranked table to this CSV file")
    p.add_argument("--generator", action="append", help="candidate generator(s) to run (repeatable)")
    p.add_argument("--q", action="append", help='extra modulation wave-vector "qx,qy,qz" (repeatable)')
    p.add_argument("--pair-exponent", type=float, default=4.0, help="exponent m of the pair repulsion (default 4)")
    p.add_argument("--write-structures", help="write each optimum as CIF into this folder")
    p.set_defaults(func=cmd_rank)

    p = sub.add_parser("demo", help="rank every bundled invented demo structure and write a report folder")
    p.add_argument("--out", default="screener-report", help="report folder (default ./screener-report)")
    p.set_defaults(func=cmd_demo)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except ScreenerError as exc:
        if args.debug:
            raise
        print(f"screener {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("screener: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
