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
    """Structure summary. ``--json`` prints one object with the keys

    ``file``, ``formula`` (this cell), ``n_atoms``, ``space_group`` {``symbol``, ``number``}, ``symprec_A``,
    ``primitive_atoms``, ``lattice_A`` (rows, Å), ``cell`` {``a_A`` … ``gamma_deg``, ``volume_A3``,
    ``volume_per_atom_A3``}, ``sites`` [{``label``, ``element``, ``frac``, ``wyckoff`` (multiplicity + letter
    in the conventional cell), ``orbit`` (label of the first symmetry-equivalent atom)}], ``valence_electrons``
    (per cell, default counts), ``neighbour_shells_A`` [{``distance_A``, ``count_per_atom``}] (shells up to 1.6 ×
    the shortest contact, counts averaged over all atoms). The object also reads back as a screener JSON structure.
    """
    import numpy as np

    from .elements import valence_electrons
    from .io.cif import cell_parameters
    from .symmetry import analyse, standard_cell

    crystal = _read(args)
    sym = analyse(crystal, symprec=args.symprec)
    n_conventional = standard_cell(crystal, symprec=args.symprec).n_atoms
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
