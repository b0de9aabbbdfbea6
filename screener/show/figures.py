"""Figures (matplotlib, Agg): band structure with orbital character and DOS, and energy-versus-amplitude curves.

Figures are built on ``matplotlib.figure.Figure`` with an Agg canvas, never through pyplot, so no global figure
state is left behind and nothing needs a display."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import numpy as np

from screener.bz.bands import BandStructure, orbital_groups, shell_weights
from screener.errors import ParameterError

#: The eight colours of M. Okabe & K. Ito, "Color Universal Design" (2008): distinguishable with the common forms
#: of colour blindness.
OKABE_ITO = {
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
    "black": "#000000",
}
#: Colours of orbital-character groups in order (s, p, d, ...). Black is left out (it draws the total DOS) and
#: yellow comes last (it is faint on white).
CHARACTER_COLOURS = tuple(OKABE_ITO[c] for c in ("blue", "vermillion", "bluish green", "reddish purple", "orange",
                                                  "sky blue", "yellow"))
#: Colours of energy curves, one per candidate in order; after eight the marker shape changes as well.
CURVE_COLOURS = tuple(OKABE_ITO[c] for c in ("blue", "vermillion", "bluish green", "reddish purple", "orange",
                                              "sky blue", "black", "yellow"))
_CURVE_MARKERS = ("o", "s", "^", "D", "v")
#: Axis labels: quantity, symbol and unit.
ENERGY_LABEL = r"energy $E - E_\mathrm{F}$ (eV)"
ROUTE_LABEL = "wave vector along the route (path length, Å$^{-1}$)"
DOS_LABEL = "density of states\n(states eV$^{-1}$ per atom)"
AMPLITUDE_LABEL = "distortion amplitude λ, largest atomic displacement (Å)"
DELTA_E_LABEL = "energy change ΔE from the parent (meV/atom)"


def curve_style(index: int) -> tuple[str, str]:
    """(colour, marker) of the energy curve number ``index`` (0-based): colours first, then marker shapes."""
    n = len(CURVE_COLOURS)
    return CURVE_COLOURS[index % n], _CURVE_MARKERS[(index // n) % len(_CURVE_MARKERS)]


def _new_figure(figsize):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _save(fig, out_png) -> Path:
    out = Path(out_png)
    if out.parent and not out.parent.exists():
        raise ParameterError(f"cannot write the figure to {out}: folder {out.parent} does not exist")
    fig.savefig(out, dpi=150)
    return out


def _dos_arrays(dos):
    """(energies_eV, total, projected or None) from a DOS result object, a mapping or a tuple."""
    if dos is None:
        return None
    if isinstance(dos, Mapping):
        get = dos.get
    elif isinstance(dos, tuple | list):
        parts = list(dos) + [None] * (3 - len(dos))
        get = {"energies_eV": parts[0], "dos_per_eV": parts[1], "projected_per_eV": parts[2]}.get
    else:
        def get(name):
            return getattr(dos, name, None)
    energies = get("energies_eV")
    total = next((get(n) for n in ("dos_per_eV", "total_per_eV", "dos", "total") if get(n) is not None), None)
    projected = next((get(n) for n in ("projected_per_eV", "pdos_per_eV", "projected") if get(n) is not None),
                     None)
    if energies is None or total is None:
        raise ParameterError(
            "dos must carry energies_eV and the total DOS (dos_per_eV), e.g. a DOSResult or a tuple "
            f"(energies_eV, dos_per_eV[, projected]); got {type(dos).__name__}"
        )
    energies = np.asarray(energies, dtype=float)
    total = np.asarray(total, dtype=float)
    if total.shape != energies.shape:
        raise ParameterError(f"DOS has {total.shape} values for {energies.shape} energies")
    if projected is not None:
        projected = np.asarray(projected, dtype=float)
        if projected.ndim == 1:
            projected = projected[:, None]
        if projected.shape[0] != len(energies):
            raise ParameterError(f"projected DOS has shape {projected.shape}, expected ({len(energies)}, n)")
    return energies, total, projected


def _mix_colours(weights: np.ndarray, colours: np.ndarray) -> np.ndarray:
    """RGB colour per row of ``weights`` (…, ng): weight-averaged group colours."""
    w = np.clip(weights, 0, None)
    s = w.sum(axis=-1, keepdims=True)
    w = np.where(s > 0, w / np.where(s > 0, s, 1), 1.0 / w.shape[-1])
    return w @ colours


def plot_bands(path, energies_eV, fermi_level_eV: float, out_png, *, character=None, character_labels=None,
               dos=None, title=None, energy_window_eV=None) -> Path:
    """Band structure (left) with orbital character and DOS (right), energies relative to E_F.

    Parameters
    ----------
    path : routes.ZoneRoute
        The sampled path (x axis, ticks, continuous pieces).
    energies_eV : (n, nb) array
        Band energies at ``path.kfrac``, absolute, eV.
    fermi_level_eV : float
        Fermi level, eV; drawn dashed at zero.
    character : (n, nb, ng) array, optional
        Non-negative weight of each of ng orbital groups (e.g. s, p) in every state; lines are coloured by the
        weight-averaged group colour.
    character_labels : sequence of str, optional
        ng group names for the legend (default 'group 1', ...).
    dos : DOSResult, mapping or tuple, optional
        ``energies_eV`` (absolute), total ``dos_per_eV`` and optionally ``projected_per_eV`` (ne, ng), drawn on the
        right sharing the energy axis.
    title : str, optional
    energy_window_eV : (float, float), optional
        Energy range shown, relative to E_F; default: all bands.

    Returns
    -------
    Path of the PNG written.
    """
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    e = np.asarray(energies_eV, dtype=float)
    n = len(path.kfrac)
    if e.ndim != 2 or e.shape[0] != n:
        raise ParameterError(f"energies_eV must have shape ({n}, n_bands) to match the path, got {e.shape}")
    e = e - float(fermi_level_eV)
    nb = e.shape[1]
    if character is not None:
        character = np.asarray(character, dtype=float)
        if character.ndim != 3 or character.shape[:2] != (n, nb):
            raise ParameterError(f"character must have shape ({n}, {nb}, n_groups), got {character.shape}")
        ng = character.shape[2]
        labels = list(character_labels) if character_labels is not None else [f"group {g + 1}" for g in range(ng)]
        if len(labels) != ng:
            raise ParameterError(f"got {len(labels)} character_labels for {ng} character groups")
        from matplotlib.colors import to_rgb

        colours = np.array([to_rgb(CHARACTER_COLOURS[g % len(CHARACTER_COLOURS)]) for g in range(ng)])
    dos_data = _dos_arrays(dos)

    fig = _new_figure((8.0, 5.0) if dos_data is not None else (6.5, 5.0))
    if dos_data is not None:
        ax, axd = fig.subplots(1, 2, sharey=True, gridspec_kw={"width_ratios": [3.2, 1.0]})
    else:
        ax, axd = fig.subplots(1, 1), None

    x = np.asarray(path.x_inv_A, dtype=float)
    for start, stop in path.segments:
        if stop - start < 2:
            # a lone k-point: short level marks, so a single-point "path" still reads as a level diagram
            ax.plot(x[start:stop].repeat(nb), e[start:stop].ravel(), "_", ms=40, mew=1.6, color="k")
            continue
        xs = x[start:stop]
        # one straight piece per band and per k-step: (nb, steps, 2 points, xy)
        ys = e[start:stop].T
        pts = np.stack([np.broadcast_to(xs, ys.shape), ys], axis=-1)
        segs = np.stack([pts[:, :-1], pts[:, 1:]], axis=2).reshape(-1, 2, 2)
        if character is None:
            ax.add_collection(LineCollection(segs, colors="k", linewidths=1.2))
        else:
            w = character[start:stop].transpose(1, 0, 2)  # (nb, steps+1, ng)
            w_mid = 0.5 * (w[:, :-1] + w[:, 1:])
            ax.add_collection(LineCollection(segs, colors=_mix_colours(w_mid, colours).reshape(-1, 3),
                                             linewidths=1.6, capstyle="round"))
    if energy_window_eV is not None:
        lo, hi = energy_window_eV
    else:
        span = max(float(e.max() - e.min()), 1e-3)
        lo, hi = float(e.min()) - 0.04 * span, float(e.max()) + 0.04 * span
    ax.set_ylim(lo, hi)
    if x[-1] > x[0]:
        ax.set_xlim(x[0], x[-1])
    else:
        ax.set_xlim(x[0] - 0.5, x[0] + 0.5)
    for t in path.tick_x:
        ax.axvline(t, color="0.75", lw=0.7, zorder=0)
    ax.axhline(0.0, color="0.3", ls="--", lw=1.0, zorder=3)
    ax.set_xticks(list(path.tick_x))
    ax.set_xticklabels(list(path.tick_labels))
    ax.set_ylabel(ENERGY_LABEL)
    ax.set_xlabel(ROUTE_LABEL)
    if character is not None:
        handles = [Line2D([], [], color=colours[g], lw=2.5, label=labels[g]) for g in range(len(labels))]
        # above the axes: bands fill the whole panel, so any inside spot hides some of them
        ax.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.0, 1.0), ncol=len(handles), fontsize=8,
                  frameon=False, title="orbital character:", title_fontsize=8, alignment="left")

    if axd is not None:
        energies, total, projected = dos_data
        ed = energies - float(fermi_level_eV)
        axd.fill_betweenx(ed, 0, total, color="0.85", lw=0)
        axd.plot(total, ed, color="k", lw=1.0, label="total")
        if projected is not None:
            for g in range(projected.shape[1]):
                colour = colours[g] if character is not None and g < len(colours) else \
                    CHARACTER_COLOURS[g % len(CHARACTER_COLOURS)]
                name = labels[g] if character is not None and g < len(labels) else f"proj. {g + 1}"
                axd.plot(projected[:, g], ed, color=colour, lw=1.0, label=name)
        axd.axhline(0.0, color="0.3", ls="--", lw=1.0)
        inside = (ed >= lo) & (ed <= hi)
        top = float(total[inside].max()) if inside.any() else float(total.max())
        axd.set_xlim(0, 1.05 * top if top > 0 else 1.0)
        axd.set_xlabel(DOS_LABEL)
        axd.tick_params(labelleft=False)
        if projected is not None:
            axd.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), fontsize=7, frameon=False, ncol=1)
    if title:
        fig.suptitle(title)
    return _save(fig, out_png)


def _curve_fields(curve, index: int):
    """(label, amplitude_A, total, band or None, elastic or None, optimum (a, e) or None) of one curve."""
    if isinstance(curve, Mapping):
        def get(name):
            return curve.get(name)
    else:
        def get(name):
            return getattr(curve, name, None)
    band_range = None
    if get("scan_amplitude_A") is not None:  # a balance.CandidateResult
        gen, q = get("generator"), get("q_label")
        label = get("label") or " ".join(str(s) for s in (gen, f"q={q}" if q else None) if s) or f"candidate {index}"
        amp = get("scan_amplitude_A")
        total = get("scan_delta_E_meV_per_atom")
        band = get("scan_delta_E_band_meV_per_atom")
        elastic = get("scan_delta_E_elastic_meV_per_atom")
        if get("curve_amplitude_A"):
            # the curve on the mesh the verdict's range comes from (within the convergence tolerance of the optimum's
            # final mesh), with that range as a band
            amp, total = get("curve_amplitude_A"), get("curve_delta_E_meV_per_atom")
            band = elastic = None
            lo, hi = get("curve_range_meV_per_atom")
            band_range = (np.asarray(lo, dtype=float), np.asarray(hi, dtype=float))
        opt = (get("amplitude_A"), get("delta_E_meV_per_atom"))
        opt = None if any(v is None for v in opt) else tuple(float(v) for v in opt)
    else:
        label = get("label") or f"candidate {index}"
        amp = get("amplitude_A")
        total = get("delta_E_meV_per_atom")
        band = get("band_meV_per_atom")
        elastic = get("elastic_meV_per_atom")
        opt = None
    if amp is None or total is None:
        raise ParameterError(
            f"curve {index} ({label}) needs amplitudes and total energies: give a CandidateResult or a mapping "
            "with 'amplitude_A' and 'delta_E_meV_per_atom' (optional 'band_meV_per_atom', 'elastic_meV_per_atom')"
        )
    amp = np.asarray(amp, dtype=float)
    arrays = []
    for name, arr in (("total", total), ("band", band), ("elastic", elastic)):
        if arr is None:
            arrays.append(None)
            continue
        arr = np.asarray(arr, dtype=float)
        if arr.shape != amp.shape:
            raise ParameterError(f"curve {index} ({label}): {name} energies have shape {arr.shape}, "
                                 f"amplitudes {amp.shape}")
        arrays.append(arr)
    order = np.argsort(amp, kind="stable")
    arrays = [None if a is None else a[order] for a in arrays]
    if band_range is not None:
        band_range = (band_range[0][order], band_range[1][order])
    return str(label), amp[order], arrays[0], arrays[1], arrays[2], opt, band_range


def plot_energy_curves(curves, out_png, title=None, *, show_parts=None) -> Path:
    """ΔE(λ) of candidate distortions: amplitude (Å) against energy change (meV/atom), one colour per candidate.

    Parameters
    ----------
    curves : sequence
        ``balance.CandidateResult`` objects (their ΔE(λ) on the verdict's mesh, the range of the verdict's members
        as a shaded band, and the optimum are drawn; the coarse scan where no final curve exists) or mappings with
        ``label``, ``amplitude_A``, ``delta_E_meV_per_atom`` and optionally ``band_meV_per_atom``,
        ``elastic_meV_per_atom``.
    out_png : path
    title : str, optional
    show_parts : bool, optional
        Draw the band (dotted) and elastic (dash-dot) parts beside the total (solid). Default: only when there are
        at most three curves, where they do not crowd the figure.
    """
    from matplotlib.lines import Line2D

    data = [_curve_fields(c, i + 1) for i, c in enumerate(curves)]
    if not data:
        raise ParameterError("plot_energy_curves needs at least one curve")
    if show_parts is None:
        show_parts = len(data) <= 3
    fig = _new_figure((7.0, 4.8))
    ax = fig.subplots()
    any_parts = False
    for i, (label, amp, total, band, elastic, opt, band_range) in enumerate(data):
        colour, marker = curve_style(i)
        ax.plot(amp, total, "-", marker=marker, color=colour, ms=3.5, lw=1.6, label=label)
        if band_range is not None:
            ax.fill_between(amp, band_range[0], band_range[1], color=colour, alpha=0.15, lw=0)
        if show_parts and band is not None:
            ax.plot(amp, band, ":", color=colour, lw=1.2)
            any_parts = True
        if show_parts and elastic is not None:
            ax.plot(amp, elastic, "-.", color=colour, lw=1.0)
            any_parts = True
        if opt is not None:
            ax.plot([opt[0]], [opt[1]], "*", color=colour, ms=11, mec="k", mew=0.6, zorder=5)
    ax.axhline(0.0, color="0.4", lw=0.8)
    ax.set_xlabel(AMPLITUDE_LABEL)
    ax.set_ylabel(DELTA_E_LABEL)
    handles, names = ax.get_legend_handles_labels()
    if any_parts:
        handles += [Line2D([], [], color="0.3", ls="-", label="total"),
                    Line2D([], [], color="0.3", ls=":", label="band part"),
                    Line2D([], [], color="0.3", ls="-.", label="elastic part")]
    if any(d[5] is not None for d in data):
        handles.append(Line2D([], [], color="0.3", marker="*", ls="", ms=10, label="optimum"))
    if any(d[6] is not None for d in data):
        from matplotlib.patches import Patch

        handles.append(Patch(color="0.3", alpha=0.15, label="range of the verdict's members"))
    ax.legend(handles=handles, fontsize=8, loc="best", framealpha=0.9)
    if title:
        ax.set_title(title)
    return _save(fig, out_png)



def plot_band_structure(bs: BandStructure, out_png, title: str | None = None) -> Path:
    """Band structure coloured by orbital character with the (projected) tetrahedron DOS beside it."""
    from screener.bz.integrate import density_of_states
    from screener.show.figures import plot_bands

    result = bs.ground_state
    eig_ir = np.asarray(result.eigenvalues_eV)
    _, member = orbital_groups(bs.model)
    _, proj = shell_weights(bs.model, result.kmesh.kfrac, member)
    lo = min(float(eig_ir.min()), float(bs.energies_eV.min())) - 0.5
    hi = max(float(eig_ir.max()), float(bs.energies_eV.max())) + 0.5
    dos = density_of_states(eig_ir, result.kmesh, np.linspace(lo, hi, 401), method="tetrahedron",
                            weights_projected=proj, spin_degeneracy=bs.model.spin_degeneracy,
                            reciprocal_A=bs.crystal.reciprocal_A)
    # per atom, so a parent and its supercell candidates show comparable panels
    from dataclasses import replace

    n = bs.crystal.n_atoms
    dos = replace(dos, dos_per_eV=dos.dos_per_eV / n, states_below=dos.states_below / n,
                  projected_per_eV=None if dos.projected_per_eV is None else dos.projected_per_eV / n)
    if title is None:
        title = (f"{bs.crystal.formula} ({bs.path.lattice_type}), "
                 f"$E_\\mathrm{{F}} = {result.fermi_level_eV:.3f}$ eV")
    return plot_bands(bs.path, bs.energies_eV, result.fermi_level_eV, out_png, character=bs.character,
                      character_labels=list(bs.shells), dos=dos, title=title)


def plot_explain_path(result, out_png) -> Path:
    """Band, elastic and total energy along the path parent (λ = 0) → observed (λ = 1), observed marked."""
    p = result.path
    fig = _new_figure((6.0, 4.2))
    ax = fig.add_subplot()
    lam = np.asarray(p.lambda_)
    if p.member_delta_E_meV_per_atom:
        m = np.asarray(p.member_delta_E_meV_per_atom)
        ax.fill_between(lam, m.min(axis=0), m.max(axis=0), color=CURVE_COLOURS[0], alpha=0.2, lw=0,
                        label="total, closure range")
    for k, (y, name) in enumerate(((p.delta_E_meV_per_atom, "total"), (p.delta_E_band_meV_per_atom, "band"),
                                   (p.delta_E_elastic_meV_per_atom, "elastic"))):
        colour, marker = curve_style(k)
        ax.plot(lam, y, color=colour, marker=marker, ms=4, label=name)
    ax.axvline(1.0, color="0.3", ls="--", lw=1)
    ax.annotate("observed", (1.0, ax.get_ylim()[1]), xytext=(3, -12), textcoords="offset points", fontsize=8)
    if p.optimum_lambda > 0:
        ax.axvline(p.optimum_lambda, color=CURVE_COLOURS[0], ls=":", lw=1, label=f"model optimum λ = "
                   f"{p.optimum_lambda:.2f}")
    ax.axhline(0.0, color="0.6", lw=0.6)
    ax.set_xlabel("path coordinate λ (0 parent, 1 observed)")
    ax.set_ylabel(DELTA_E_LABEL)
    ax.set_title(f"{result.parent_symbol} parent → observed: {result.attribution}", fontsize=10)
    ax.legend(fontsize=8)
    return _save(fig, out_png)


def plot_bond_curves(energies_eV, fermi_level_eV: float, curves, out_png) -> Path:
    """Energy-resolved band-energy share (bond population) of bonds against energy; negative = bonding."""
    fig = _new_figure((4.8, 5.0))
    ax = fig.add_subplot()
    for k, (label, y) in enumerate(curves):
        colour, _ = curve_style(k)
        ax.plot(-np.asarray(y), energies_eV, color=colour, label=label)
    ax.axhline(fermi_level_eV, color="0.3", ls="--", lw=1)
    ax.annotate("$E_\\mathrm{F}$", (ax.get_xlim()[1], fermi_level_eV), xytext=(-18, 3), textcoords="offset points")
    ax.axvline(0.0, color="0.6", lw=0.6)
    ax.set_xlabel("− bond population (eV per eV per cell; right = bonding)")
    ax.set_ylabel("energy E (eV)")
    ax.legend(fontsize=7, loc="lower right")
    return _save(fig, out_png)


#: Axis labels of the route figure of ``modes``.
Q_ROUTE_LABEL = "wave vector q along the route (path length, Å$^{-1}$)"
CHI0_LABEL = "χ$_0$ (states/eV per cell)"
STIFFNESS_LABEL = "lowest stiffness (eV/Å$^2$)"


def plot_modes(result, out_png, title: str | None = None, *, path=None) -> Path:
    """Lowest stiffness eigenvalue and χ0 per searched q (a ModesResult of screener.screen.modes); with ``path``
    (a PathModes of screener.screen.modes), χ0 and the lowest stiffness along the special-point route instead."""
    if path is not None:
        return _plot_modes_route(path, out_png, title)
    low = [float(s.eigenvalues_eV_per_A2[0]) for s in result.stiffness]
    chi = [c[0] for c in result.chi0_states_per_eV]
    labels = ["(" + ",".join(f"{x:.2g}" for x in q) + ")" for q in result.searched]
    fig = _new_figure((max(6.0, 0.35 * len(labels)), 5.0))
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    x = np.arange(len(labels))
    ax1.bar(x, low, color=curve_style(0)[0])
    ax1.axhline(0.0, color="0.3", lw=0.8)
    ax1.set_ylabel("lowest stiffness (eV/Å²)")
    ax2.plot(x, chi, marker="o", color=curve_style(1)[0])
    ax2.set_ylabel("χ₀ (states/eV per cell)")
    ax2.set_xticks(x)
    ax2.set_xticklabels(labels, rotation=90, fontsize=7)
    ax2.set_xlabel("q (fractions of the reciprocal vectors)")
    if title:
        ax1.set_title(title)
    return _save(fig, out_png)


def _plot_modes_route(path, out_png, title: str | None = None) -> Path:
    """Two panels along the route: χ0 with and without overlap factors (top), the lowest stiffness with a zero line
    (bottom); a marker at every q evaluated (the mesh points the route passes), special points on the x axis."""
    x = np.asarray(path.distance_inv_A, dtype=float)
    if len(x) == 0:
        raise ParameterError("the route has no q point to plot")
    fig = _new_figure((7.0, 5.6))
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [1.0, 1.0]})
    with_c, without_c, stiff_c = OKABE_ITO["blue"], OKABE_ITO["orange"], OKABE_ITO["bluish green"]
    low = np.asarray(path.lowest_stiffness_eV_per_A2, dtype=float)
    for n, (start, stop) in enumerate(path.segments):
        xs = x[start:stop]
        first = n == 0
        # the with-overlaps curve wider and below, so it still shows where both coincide (one orbital per cell)
        top.plot(xs, path.chi0_with_overlaps[start:stop], "-o", color=with_c, ms=4.5, lw=3.0, zorder=2,
                 label="with orbital overlaps" if first else None)
        top.plot(xs, path.chi0_without_overlaps[start:stop], "--s", color=without_c, ms=2.2, lw=1.2, zorder=3,
                 label="overlaps set to 1" if first else None)
        ys = low[start:stop]
        bottom.fill_between(xs, np.minimum(ys, 0.0), 0.0, color=OKABE_ITO["vermillion"], alpha=0.18, lw=0,
                            label="soft (negative)" if first else None)
        bottom.plot(xs, ys, "-o", color=stiff_c, ms=3, lw=1.6)
    maxima = path.maxima(3)
    if maxima:
        top.plot([m["distance_inv_A"] for m in maxima], [m["chi0_with_overlaps"] for m in maxima], "v",
                 color="k", ms=7, ls="", label="largest maxima", zorder=5, clip_on=False)
    bottom.axhline(0.0, color="0.2", lw=1.0)
    for ax in (top, bottom):
        for t in path.tick_x:
            ax.axvline(t, color="0.8", lw=0.7, zorder=0)
    lo, hi = float(min(x.min(), np.min(path.tick_x))), float(max(x.max(), np.max(path.tick_x)))
    bottom.set_xlim(lo, hi) if hi > lo else bottom.set_xlim(lo - 0.5, lo + 0.5)
    bottom.set_xticks(list(path.tick_x))
    bottom.set_xticklabels(list(path.tick_labels))
    top.set_ylabel(CHI0_LABEL)
    bottom.set_ylabel(STIFFNESS_LABEL)
    bottom.set_xlabel(Q_ROUTE_LABEL)
    top.legend(fontsize=8, loc="best", framealpha=0.9)
    if np.any(low < 0):
        bottom.legend(fontsize=8, loc="best", framealpha=0.9)
    mesh = "×".join(str(n) for n in path.kmesh)
    head = f"{title}: " if title else ""
    top.set_title(f"{head}{len(x)} q on the route, each on the Γ-centred {mesh} mesh", fontsize=10)
    return _save(fig, out_png)
