"""Report folder of a batch: counts per verdict, a ΔE histogram, the most unstable structures, ΔE against a descriptor.

Written from the result store alone (`screener batch ... --report DIR`), so it can be made again at any time.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import numpy as np

from screener.errors import ParameterError

#: Descriptors ΔE can be plotted against: name -> (axis label, function of the stored rank JSON).
DESCRIPTORS = {
    "volume-per-atom": ("volume per atom (Å³)", lambda r: r.get("volume_per_atom_A3")),
    "electrons-per-atom": ("valence electrons per atom",
                           lambda r: r["valence_electrons_per_cell"] / r["n_atoms"] if r.get("n_atoms") else None),
    "electronegativity-difference": ("mean electronegativity difference |Δχ| (Pauling units)",
                                     lambda r: _delta_chi(r.get("formula"))),
}


def _delta_chi(formula):
    from screener.errors import ScreenerError
    from screener.structure.elements import mean_electronegativity_difference, parse_formula

    if not formula:
        return None
    try:
        return mean_electronegativity_difference(parse_formula(formula))
    except ScreenerError:
        return None
#: Colour per verdict (Okabe & Ito 2008 colour-blind-safe set).
VERDICT_COLOURS = {"unstable": "#D55E00", "marginal": "#E69F00", "stable": "#0072B2"}


def _rows(store):
    p = Path(store)
    if not p.is_file():
        raise ParameterError(f"no result store at {p}")
    conn = sqlite3.connect(p)
    try:
        return conn.execute(
            "SELECT path, formula, space_group, status, verdict, generator, q_label, delta_E_meV_per_atom, "
            "delta_E_low_meV_per_atom, delta_E_high_meV_per_atom, error, result_json FROM structures ORDER BY id"
        ).fetchall()
    finally:
        conn.close()


def write_batch_report(store, out, descriptor: str = "volume-per-atom", top: int = 20) -> Path:
    """summary.txt (counts, the ``top`` most unstable, errors), most_unstable.csv, delta_E_histogram.png and
    delta_E_vs_<descriptor>.png in folder ``out``."""
    import pandas as pd

    from screener.show.figures import _new_figure, _save

    if descriptor not in DESCRIPTORS:
        raise ParameterError(f"unknown descriptor {descriptor!r}; choose one of {', '.join(DESCRIPTORS)}")
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    rows = _rows(store)
    cols = ["path", "formula", "space_group", "status", "verdict", "generator", "q", "delta_E_meV_per_atom",
            "delta_E_low_meV_per_atom", "delta_E_high_meV_per_atom", "error"]
    table = pd.DataFrame([r[:11] for r in rows], columns=cols)
    results = [json.loads(r[11]) if r[11] else None for r in rows]
    ranked = table[table.status == "ranked"]
    counts = ranked.verdict.value_counts().reindex(["unstable", "marginal", "stable"], fill_value=0)
    worst = ranked.sort_values("delta_E_meV_per_atom").head(top)
    worst.to_csv(out / "most_unstable.csv", index=False)
    lines = [f"result store: {store}", f"structures: {len(table)} ({len(ranked)} ranked, "
             f"{int((table.status == 'error').sum())} errors)", ""]
    lines += [f"{v:9s} {int(n)}" for v, n in counts.items()]
    lines += ["", f"the {min(top, len(worst))} largest gains (headline candidate, meV/atom):"]
    with pd.option_context("display.width", 200, "display.max_colwidth", 50):
        lines.append(worst[["path", "formula", "space_group", "verdict", "generator", "q", "delta_E_meV_per_atom",
                            "delta_E_low_meV_per_atom", "delta_E_high_meV_per_atom"]].to_string(index=False)
                     if len(worst) else "(none)")
    errors = table[table.status == "error"]
    if len(errors):
        lines += ["", "errors:"] + [f"  {r.error}" for r in errors.itertuples()]
    lines += ["", "A screen, not a substitute for DFT or experiment."]
    (out / "summary.txt").write_text("\n".join(lines) + "\n", encoding="utf-8")

    fig = _new_figure((6.4, 4.2))
    ax = fig.subplots()
    values = ranked.delta_E_meV_per_atom.to_numpy(dtype=float)
    if len(values):
        ax.hist(values, bins=max(5, min(40, len(values) // 2)), color="#0072B2", edgecolor="white")
    ax.set_xlabel("headline ΔE (meV/atom)")
    ax.set_ylabel("structures")
    ax.set_title("gain of the headline candidate")
    _save(fig, out / "delta_E_histogram.png")

    label, fn = DESCRIPTORS[descriptor]
    fig = _new_figure((6.4, 4.2))
    ax = fig.subplots()
    for verdict, colour in VERDICT_COLOURS.items():
        pick = [(fn(r), row.delta_E_meV_per_atom) for r, row in zip(results, table.itertuples(), strict=True)
                if r is not None and row.verdict == verdict and fn(r) is not None]
        if pick:
            x, y = np.array(pick, dtype=float).T
            ax.scatter(x, y, s=18, color=colour, label=verdict)
    ax.axhline(0.0, color="0.4", lw=0.8)
    ax.set_xlabel(label)
    ax.set_ylabel("headline ΔE (meV/atom)")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=8)
    _save(fig, out / f"delta_E_vs_{descriptor.replace('-', '_')}.png")
    return out
