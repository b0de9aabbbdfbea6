"""ScreenSettings refuses what no screen can use: non-finite or non-numeric values, non-positive physical
quantities (common practice, no source)."""

import math

import pytest

from screener.errors import ParameterError
from screener.screen.settings import ScreenSettings


@pytest.mark.parametrize("field", ["k_step_per_A", "pair_exponent", "bulk_modulus_GPa", "width_eV",
                                   "threshold_meV_per_atom", "symprec_A", "refine_factor"])
@pytest.mark.parametrize("value", [math.inf, -math.inf, math.nan])
def test_non_finite_values_are_refused(field, value):
    with pytest.raises(ParameterError, match=field):
        ScreenSettings(**{field: value})


@pytest.mark.parametrize("field, value", [("pair_exponent", 0.0), ("bulk_modulus_GPa", -40.0), ("width_eV", 0.0),
                                          ("symprec_A", -1e-3), ("k_step_per_A", "0.2"), ("n_scan", 2)])
def test_non_physical_values_are_refused(field, value):
    with pytest.raises(ParameterError, match=field):
        ScreenSettings(**{field: value})


def test_defaults_and_usual_values_are_accepted():
    assert ScreenSettings().bulk_modulus_GPa is None
    assert ScreenSettings(bulk_modulus_GPa=39.4, k_step_per_A=0.3, max_refinements=0).max_refinements == 0
