"""Human-readable output of a screen: text table, report folder with CSV and figures, the bundled demo."""

from __future__ import annotations

import json
from pathlib import Path

from screener.screen.rank import CAUTION, RankResult, rank, verdict_summary

_STRUCTURE_ENDINGS = (".cif", ".json")


def _closure_line(parent) -> str:
    if parent.closure == "bulk-modulus":
        line = (f"closure: fitted to equilibrium and B = {parent.bulk_modulus_GPa:.1f} GPa ± 25 % "
                f"({parent.bulk_modulus_source})")
    else:
        ms = "/".join(f"{member[2]:g}" for member in parent.ensemble)
        line = f"closure: fitted to equilibrium only, m = {ms} ({parent.bulk_modulus_source})"
    shear = getattr(parent, "shear_source", "")
    return f"{line}\nshear: {shear}" if shear else line


def format_rank_text(result: RankResult, source: str = "") -> str:
    """The ranked table as plain text with a header, the verdict line and the cautions."""
    import pandas as pd

    head = [
        f"{source + ': ' if source else ''}{result.formula}  {result.space_group_symbol} "
        f"({result.space_group_number}),  {result.n_atoms} atoms/cell,  "
        f"{result.valence_electrons_per_cell:g} valence electrons/cell",
        f"parent: E_F = {result.fermi_level_eV:.3f} eV, gap {result.parent.gap_eV:.3f} eV, "
        f"pair repulsion A = {result.parent.repulsion_eV:.3f} eV per bond, m = {result.parent.pair_exponent:.2f}",
        _closure_line(result.parent),
        "",
    ]
    table = result.table()
    if table.empty:
        body = "no applicable candidate distortion"
    else:
        cols = ["rank", "generator", "q", "space_group", "displacement_A", "delta_E_meV_per_atom",
                "delta_E_band_meV_per_atom", "delta_E_elastic_meV_per_atom", "delta_E_range_meV_per_atom", "gap_eV",
                "shell_distances_A", "verdict", "kmesh"]
        show = table[cols].rename(columns={
            "displacement_A": "λ (Å)", "delta_E_meV_per_atom": "ΔE (meV/at)",
            "delta_E_band_meV_per_atom": "band", "delta_E_elastic_meV_per_atom": "elastic",
            "gap_eV": "gap (eV)", "shell_distances_A": "nn bonds (Å)", "space_group": "product",
            "delta_E_range_meV_per_atom": "ΔE range",
        })
        with pd.option_context("display.width", 200, "display.max_columns", 20, "display.max_colwidth", 40):
            body = show.to_string(index=False)
        notes = [f"  {r['rank']}. {r['note']}" for _, r in table.iterrows() if r["note"]]
        if notes:
            body += "\nnotes:\n" + "\n".join(notes)
    if result.notes:
        body += "\n" + "\n".join(f"  - {n}" for n in result.notes)
    tail = ["", verdict_summary(result), "", CAUTION]
    if result.safety:
        tail.append(result.safety)
    return "\n".join(head) + body + "\n" + "\n".join(tail)


def write_optimum_structures(result: RankResult, folder, stem: str = "candidate") -> list[Path]:
    """Write each candidate's optimum structure as CIF into ``folder``; returns the paths."""
    from screener.structure.formats import write_structure

    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    for n, c in enumerate(result.candidates, start=1):
        p = out / f"{stem}_{n}_{c.generator}_{c.space_group_number}.cif"
        write_structure(c.structure, p, format="cif")
        paths.append(p)
    return paths


def demo_folder() -> Path:
    """The bundled invented demo structures (installed with the package, or the source tree's folder)."""
    import importlib.util

    spec = importlib.util.find_spec("screener.demo_structures")
    for location in (spec.submodule_search_locations or []) if spec else []:
        p = Path(location)
        if p.is_dir() and any(p.iterdir()):
            return p
    return Path(__file__).resolve().parents[2] / "demo_structures"


def check_report_folder(out) -> Path:
    """``out`` as a report folder that may be (re)written: refused before any work when it is a file, holds
    something other than a report of ours, or its parent folder cannot be written."""
    import os

    from screener.errors import ParameterError

    out = Path(out)
    if out.exists() and not out.is_dir():
        raise ParameterError(f"--out {out} is a file; give a folder for the report")
    if out.is_dir() and any(out.iterdir()) and not (out / "summary.txt").is_file():
        raise ParameterError(f"--out {out} exists and is not a screener report folder; give a new or empty folder")
    parent = out.resolve().parent
    if not parent.is_dir() or not os.access(parent, os.W_OK):
        raise ParameterError(f"--out {out}: cannot write in {parent}; choose a folder you can write to")
    return out


def write_report(results: dict[str, RankResult], out) -> Path:
    """Report folder: summary.txt, ranked.csv (all structures), results.json, E(λ) curves and band plots (PNG).

    Written into a temporary folder beside ``out`` and renamed when complete, so an interrupted run never leaves
    a half-written report; an earlier report in ``out`` is replaced.
    """
    import shutil
    import tempfile

    final = check_report_folder(out)
    tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}-", dir=final.resolve().parent))
    try:
        _write_report_files(results, tmp)
        if final.exists():
            shutil.rmtree(final)
        tmp.rename(final)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
    return final


def _write_report_files(results: dict[str, RankResult], out: Path) -> Path:
    import pandas as pd

    from screener.show import figures

    frames, texts, blob = [], [], {}
    for name, res in results.items():
        t = res.table()
        t.insert(0, "structure", name)
        t.insert(1, "formula", res.formula)
        t.insert(2, "parent_space_group", f"{res.space_group_symbol} ({res.space_group_number})")
        frames.append(t)
        texts.append(format_rank_text(res, source=name))
        blob[name] = res.to_dict()
        stem = Path(name).stem
        curves = list(res.candidates)
        if curves:
            figures.plot_energy_curves(curves, out / f"{stem}_energy_curves.png", show_parts=False,
                                     title=f"{res.formula} ({name}): candidate distortions")
        _band_plot(res, out / f"{stem}_bands_parent.png", parent=True, title=f"{res.formula} parent")
        if res.candidates and res.candidates[0].verdict != "stable":
            _band_plot(res, out / f"{stem}_bands_best.png", parent=False,
                       title=f"{res.formula} → {res.candidates[0].space_group_symbol} (best candidate)")
    table = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    table.to_csv(out / "ranked.csv", index=False)
    (out / "results.json").write_text(json.dumps(blob, indent=2))
    (out / "summary.txt").write_text("\n\n".join(texts) + "\n")
    return out


def _band_plot(res: RankResult, path: Path, parent: bool, title: str) -> None:
    """Band structure with DOS of the parent or of the best candidate's optimum."""
    from screener.bz.bands import band_structure
    from screener.show.figures import plot_band_structure

    # the best candidate keeps the parent's bonds (as in the comparator), so its bands match its energy
    best = res.candidates[0]
    crystal, bonds = (res.parent_structure, None) if parent else (best.structure, best.bonds)
    bs = band_structure(crystal, res.params, symprec=res.settings.symprec_A, bonds=bonds)
    plot_band_structure(bs, path, title=title)


def run_demo(out="screener-report", progress: bool = True) -> dict[str, RankResult]:
    """Rank every demo structure, print a summary and write the report folder."""
    from screener.structure.formats import read_structure

    check_report_folder(out)  # before the work, not after it
    folder = demo_folder()
    files = sorted(p for p in folder.iterdir() if p.suffix.lower() in _STRUCTURE_ENDINGS)
    print(f"Screening {len(files)} invented demo structures from {folder} (built-in universal parameters)", flush=True)
    results = {}
    for p in files:
        crystal = read_structure(p)
        results[p.name] = rank(crystal, progress=progress)
        print(f"{p.name}: {verdict_summary(results[p.name])}", flush=True)
    path = write_report(results, out)
    print()
    print(f"ranked table, E(λ) curves and band plots written to {path}/ (summary.txt, ranked.csv, *.png)")
    print("Demo structures are invented candidate phases, not real materials.")
    print(CAUTION)
    for line in dict.fromkeys(r.safety for r in results.values() if r.safety):
        print(line)
    return results
