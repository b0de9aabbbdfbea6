"""Figures: PNGs are written with the expected pixel size, inputs are checked, no pyplot state is left behind; the
colour-blind-safe palette, axis labels with quantity and unit, and E_F as a real subscript."""

import numpy as np
import pytest
from matplotlib.image import imread

from screener import Crystal, ParameterError
from screener.bz.routes import zone_route
from screener.show.figures import plot_bands, plot_energy_curves


@pytest.fixture(scope="module")
def cubic_bands():
    crystal = Crystal(np.eye(3) * 3.0, [[0, 0, 0]], ["Po"])
    path = zone_route(crystal, points_per_inv_A=15)
    c = np.cos(2 * np.pi * path.kfrac)
    # nearest-neighbour simple-cubic s band, Slater & Koster, Phys. Rev. 94, 1498 (1954); parameters invented
    e_s = -5.0 - 1.0 * c.sum(axis=1)
    e_p = 1.0 + 2.0 * c - 0.6 * (c.sum(axis=1, keepdims=True) - c)
    energies = np.concatenate([e_s[:, None], e_p], axis=1)
    character = np.zeros(energies.shape + (2,))
    character[:, 0, 0] = 1.0
    character[:, 1:, 1] = 1.0
    return path, energies, character


def _png_shape(path):
    return imread(str(path)).shape


def _no_pyplot_figures():
    import sys

    plt = sys.modules.get("matplotlib.pyplot")
    return plt is None or not plt.get_fignums()


def test_plot_bands_with_character_and_dos(tmp_path, cubic_bands):
    path, energies, character = cubic_bands
    e = np.linspace(-9, 6, 200)
    dos = (e, np.exp(-e**2), np.stack([0.3 * np.exp(-e**2), 0.7 * np.exp(-e**2)], axis=1))
    out = plot_bands(path, energies, 0.3, tmp_path / "b.png", character=character, character_labels=["s", "p"],
                     dos=dos, title="test")
    assert out.stat().st_size > 10_000
    h, w, _ = _png_shape(out)
    assert (w, h) == (1200, 750)  # 8 x 5 inches at 150 dpi
    assert _no_pyplot_figures()


def test_plot_bands_plain_and_explicit_single_point(tmp_path, cubic_bands):
    path, energies, _ = cubic_bands
    out = plot_bands(path, energies, 0.0, tmp_path / "plain.png")
    assert _png_shape(out)[:2] == (750, 975)  # 6.5 x 5 inches at 150 dpi
    crystal = Crystal(np.eye(3) * 3.0, [[0, 0, 0]], ["Po"])
    one = zone_route(crystal, kpoints="0,0,0")
    out = plot_bands(one, np.array([[-1.0, 2.0]]), 0.0, tmp_path / "one.png")
    assert out.stat().st_size > 1000


def test_plot_bands_rejects_wrong_shapes(tmp_path, cubic_bands):
    path, energies, character = cubic_bands
    with pytest.raises(ParameterError, match="energies_eV must have shape"):
        plot_bands(path, energies[:-1], 0.0, tmp_path / "x.png")
    with pytest.raises(ParameterError, match="character must have shape"):
        plot_bands(path, energies, 0.0, tmp_path / "x.png", character=character[:, :2])
    with pytest.raises(ParameterError, match="character_labels"):
        plot_bands(path, energies, 0.0, tmp_path / "x.png", character=character, character_labels=["s"])
    with pytest.raises(ParameterError, match="does not exist"):
        plot_bands(path, energies, 0.0, tmp_path / "missing" / "x.png")
    with pytest.raises(ParameterError, match="dos must carry"):
        plot_bands(path, energies, 0.0, tmp_path / "x.png", dos={"energies_eV": [0, 1]})


def test_plot_energy_curves(tmp_path):
    amp = np.linspace(0, 0.2, 6)
    curves = [
        {"label": "a", "amplitude_A": amp, "delta_E_meV_per_atom": -100 * amp**2 + 2000 * amp**4,
         "band_meV_per_atom": -200 * amp**2, "elastic_meV_per_atom": 100 * amp**2 + 2000 * amp**4},
        {"label": "b", "amplitude_A": amp[::-1], "delta_E_meV_per_atom": (40 * amp**2)[::-1]},
    ]
    out = plot_energy_curves(curves, tmp_path / "c.png", title="t")
    h, w, _ = _png_shape(out)
    assert (w, h) == (1050, 720)  # 7 x 4.8 inches at 150 dpi
    assert out.stat().st_size > 10_000
    assert _no_pyplot_figures()


def test_plot_energy_curves_accepts_result_objects(tmp_path):
    from types import SimpleNamespace

    amp = (0.0, 0.05, 0.1)
    res = SimpleNamespace(generator="dimerise", q_label="1/2,0,0", scan_amplitude_A=amp,
                          scan_delta_E_meV_per_atom=(0.0, -1.0, 2.0), scan_delta_E_band_meV_per_atom=(0, -3, -6),
                          scan_delta_E_elastic_meV_per_atom=(0, 2, 8), amplitude_A=0.05, delta_E_meV_per_atom=-1.0)
    assert plot_energy_curves([res], tmp_path / "r.png").stat().st_size > 10_000


def test_plot_energy_curves_rejects_bad_input(tmp_path):
    with pytest.raises(ParameterError, match="at least one curve"):
        plot_energy_curves([], tmp_path / "x.png")
    with pytest.raises(ParameterError, match="needs amplitudes and total energies"):
        plot_energy_curves([{"label": "a"}], tmp_path / "x.png")
    with pytest.raises(ParameterError, match="band energies have shape"):
        plot_energy_curves([{"amplitude_A": [0, 1], "delta_E_meV_per_atom": [0, 1], "band_meV_per_atom": [0]}],
                           tmp_path / "x.png")


# ------------------------------------------------------------------------------------------ palette and labels
# M. Okabe & K. Ito, "Color Universal Design" (2008): orange, sky blue, bluish green, yellow, blue, vermillion,
# reddish purple, black
_OKABE_ITO = {"#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7", "#000000"}


def _capture(monkeypatch):
    """Replace the PNG writer so a test can look at the figure itself; returns the list the figures land in."""
    from screener.show import figures

    seen = []

    def keep(fig, out_png):
        seen.append(fig)
        return out_png

    monkeypatch.setattr(figures, "_save", keep)
    return seen


def test_palettes_are_the_colour_blind_safe_set():
    from matplotlib.colors import to_hex

    from screener.show.figures import CHARACTER_COLOURS, CURVE_COLOURS

    assert {to_hex(c) for c in CHARACTER_COLOURS} <= _OKABE_ITO
    assert {to_hex(c) for c in CURVE_COLOURS} == _OKABE_ITO
    # black draws the total DOS, so no orbital group may share it (common practice, no source)
    assert "#000000" not in {to_hex(c) for c in CHARACTER_COLOURS}


def test_energy_curves_use_the_palette_and_stay_distinct(tmp_path, monkeypatch):
    from matplotlib.colors import to_hex

    seen = _capture(monkeypatch)
    amp = np.linspace(0, 0.2, 5)
    curves = [{"label": f"c{i}", "amplitude_A": amp, "delta_E_meV_per_atom": (i - 5) * amp**2} for i in range(11)]
    plot_energy_curves(curves, tmp_path / "c.png")
    ax = seen[0].axes[0]
    drawn = [line for line in ax.get_lines() if line.get_label().startswith("c")]
    assert len(drawn) == 11
    assert {to_hex(line.get_color()) for line in drawn} <= _OKABE_ITO
    # eleven candidates, eight colours: colour and marker together still tell every curve apart
    assert len({(to_hex(line.get_color()), line.get_marker()) for line in drawn}) == 11
    # labels state quantity and unit (common practice, no source)
    assert ax.get_xlabel().endswith("(Å)") and "amplitude" in ax.get_xlabel()
    assert ax.get_ylabel().endswith("(meV/atom)") and "energy" in ax.get_ylabel()


def test_band_figure_labels_and_title(tmp_path, monkeypatch):
    from matplotlib.text import Text

    from screener.bz.bands import band_structure
    from screener.show.figures import plot_band_structure

    seen = _capture(monkeypatch)
    crystal = Crystal(np.eye(3) * 3.359, [[0, 0, 0]], ["Po"])
    plot_band_structure(band_structure(crystal), tmp_path / "b.png")
    fig = seen[0]
    bands_ax, dos_ax = fig.axes[:2]
    texts = [t.get_text() for t in fig.findobj(Text)]
    # the Fermi level written with a real subscript, E_F as mathtext (common practice, no source)
    assert any(t.startswith("Po (CUB), $E_\\mathrm{F} = ") for t in texts)
    assert not any("E_F" in t for t in texts)
    assert r"$E - E_\mathrm{F}$" in bands_ax.get_ylabel() and bands_ax.get_ylabel().endswith("(eV)")
    assert "wave vector" in bands_ax.get_xlabel() and "Å$^{-1}$" in bands_ax.get_xlabel()
    # per atom, so parent and supercell panels compare
    assert "density of states" in dos_ax.get_xlabel() and "eV$^{-1}$ per atom" in dos_ax.get_xlabel()
