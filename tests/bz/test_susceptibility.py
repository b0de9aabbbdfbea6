"""Bare susceptibility χ0(q) (screener.bz.susceptibility)."""

import numpy as np

from screener.bz.susceptibility import lindhard
from screener.screen.modes import mesh_states
from screener.screen.parent import build_parent
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal


def _states(n_electrons, n=96, width=0.02):
    cr = Crystal(np.diag([3.0, 12.0, 12.0]), [[0, 0, 0]], ("Li",))
    p = build_parent(cr, settings=ScreenSettings(closure="equilibrium"), standardise=False)
    return mesh_states(p.model, (n, 1, 1), width_eV=width, n_electrons=n_electrons)


def _chi(st, q, overlaps=True):
    return lindhard(st.mesh, st.energies_eV, st.vectors, st.occupations, st.dfde_per_eV, (q, 0, 0),
                    overlaps=overlaps)


def test_half_filled_chain_peaks_at_half():
    # Peierls (1955); Lindhard (1954): the 1-D χ0 has its (log-divergent) maximum at 2k_F = 1/2
    st = _states(1.0)
    qs = [1 / 8, 1 / 4, 3 / 8, 1 / 2]
    chi = [_chi(st, q) for q in qs]
    assert int(np.argmax(chi)) == 3
    # one orbital per cell: the overlap factor is 1 and both forms agree (analytic)
    assert abs(_chi(st, 0.5) - _chi(st, 0.5, overlaps=False)) < 1e-9


def test_two_thirds_filling_peaks_at_one_third():
    # analytic: 2 k_F = 1/3 for 2/3 electron per site of a one-orbital chain (both spins)
    st = _states(2 / 3)
    qs = [1 / 6, 1 / 4, 1 / 3, 5 / 12, 1 / 2]
    assert int(np.argmax([_chi(st, q) for q in qs])) == 2


def test_q_zero_is_the_density_of_states_at_the_fermi_level():
    # analytic: χ0(q → 0) = N(E_F) for the smeared occupations (−g Σ w df/dε)
    st = _states(1.0)
    assert abs(_chi(st, 0.0) - (-2 * st.dfde_per_eV.sum() / len(st.kfrac))) < 1e-9
