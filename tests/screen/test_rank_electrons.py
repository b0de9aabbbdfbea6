"""`rank --electrons`: a rigid filling of the parent's bands.

Peierls's argument (R. E. Peierls, Quantum Theory of Solids, 1955; any solid-state text — from memory): a band
distortion gains energy by opening a gap at the Fermi level, so a completely filled or completely empty set of
bands gains nothing, while a partly filled one does.
"""

from pathlib import Path

import pytest

from screener.errors import ParameterError
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.show.cli import main
from screener.structure.formats import read_structure

AS = Path(__file__).parents[1] / "data" / "known_phases" / "As_simple_cubic_parent.cif"
QUICK = ScreenSettings(k_step_per_A=0.3, max_refinements=2)


@pytest.mark.parametrize("electrons", [2.0, 8.0])  # s filled / p empty, and every band filled
def test_filled_or_empty_bands_gain_nothing(electrons):
    r = rank(read_structure(AS), settings=QUICK, progress=False, n_electrons=electrons)
    assert r.valence_electrons_per_cell == pytest.approx(electrons)
    assert all(c.verdict == "stable" for c in r.candidates)


def test_half_filled_p_shell_gains():
    # 5 electrons: the neutral count, p shell half filled
    r = rank(read_structure(AS), settings=QUICK, progress=False, n_electrons=5.0)
    assert r.candidates[0].delta_E_meV_per_atom < -10


def test_a_filling_beyond_the_bands_is_refused(capsys):
    with pytest.raises(ParameterError, match="do not fit"):
        rank(read_structure(AS), settings=QUICK, progress=False, n_electrons=9.0)
    assert main(["rank", str(AS), "--electrons", "-1", "--quiet"]) == 2
    assert "do not fit" in capsys.readouterr().err
