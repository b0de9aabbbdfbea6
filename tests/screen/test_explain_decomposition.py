"""`explain`'s decomposition of the displacement observed − parent on the parent's candidate patterns."""

import json

import numpy as np
import pytest

from screener import read_structure
from screener.errors import ParameterError
from screener.screen.explain import project_on_generator_patterns
from screener.screen.generators import dimerise, modulate
from screener.structure.crystal import Crystal
from screener.structure.idealise import find_parents

A = 1.5  # invented chain spacing, Å
BOX = 10.0  # vacuum box, Å


def _chain(n_cell, dx_A, dy_A=None, shift=(0.0, 0.0, 0.0)):
    """A one-atom chain along x written in an n-atom cell, atom k moved by (dx[k], dy[k], 0) Å plus ``shift``."""
    lat = np.diag([n_cell * A, BOX, BOX])
    dy = np.zeros(n_cell) if dy_A is None else np.asarray(dy_A, dtype=float)
    cart = np.array([[k * A + dx_A[k], 0.0 + dy[k], 0.0] for k in range(n_cell)]) + np.asarray(shift)
    return Crystal(lat, cart @ np.linalg.inv(lat), ["C"] * n_cell)


def test_dimerised_chain_is_all_dimerise():
    # by hand: atoms moved by +u, −u along the chain are the zone-boundary longitudinal wave (−1)^n u, the
    # dimerise pattern; its norm over the two atoms of the cell is u·√2 and its largest displacement u
    u = 0.06
    parent = _chain(2, [0.0, 0.0])
    # a uniform translation on top (the origin is free) must not count
    observed = _chain(2, [u, -u], shift=(0.3, 0.2, 0.1))
    d = project_on_generator_patterns(parent, observed)
    (dim,) = [c for c in d.components if c.generator == "dimerise"]
    assert dim.commensurate and dim.images == 1
    assert dim.share == pytest.approx(1.0, abs=1e-9)
    assert dim.amplitude_A == pytest.approx(u * np.sqrt(2), abs=1e-9)
    assert dim.max_displacement_A == pytest.approx(u, abs=1e-9)
    assert d.displacement_A == pytest.approx(u * np.sqrt(2), abs=1e-9)
    assert d.residual_A == pytest.approx(0.0, abs=1e-9)
    np.testing.assert_allclose(d.strain, 0.0, atol=1e-12)  # same cell: no strain (by construction)
    # the dimerise family holds both ways of pairing the atoms (by hand: −u, +u is the same wave, sign flipped)
    d2 = project_on_generator_patterns(parent, _chain(2, [-u, u]))
    assert [c.share for c in d2.components if c.generator == "dimerise"] == pytest.approx([1.0])


def _chain_families(ctx):
    """Dimerise and a longitudinal q = 1/4 wave along the chain, in the parent primitive cell's own basis."""
    lat = ctx.crystal.lattice_A
    axis = int(np.argmax(np.abs(lat[:, 0])))  # the lattice vector along the chain (x)
    q = np.zeros(3)
    q[axis] = 0.25
    return [dimerise(ctx)[0], modulate(ctx, q)]


def test_four_atom_chain_splits_into_its_waves_by_hand():
    # by hand: on a period-4 chain the longitudinal displacements u_n (mean removed) are the q = 1/2 wave (−1)^n
    # and the q = ±1/4 waves cos(πn/2 + φ); waves of different q are orthogonal (sum of exp(2πi(q−q')n) over a
    # period is 0), so their amplitudes are the norms put in: a·(−1)^n has norm 2a over four atoms and
    # b·cos(πn/2 + φ) has norm b·√2; a transverse wave is in neither (residual)
    a, b, c, phi = 0.04, 0.03, 0.02, 0.3
    n = np.arange(4)
    dx = a * (-1.0) ** n + b * np.cos(np.pi * n / 2 + phi)
    dy = c * (-1.0) ** n
    d = project_on_generator_patterns(_chain(4, [0] * 4), _chain(4, dx, dy), families=_chain_families)
    dim, mod = d.components
    assert (dim.generator, mod.generator) == ("dimerise", "modulate")
    assert dim.amplitude_A == pytest.approx(2 * a, abs=1e-9)
    assert mod.amplitude_A == pytest.approx(b * np.sqrt(2), abs=1e-9)
    assert mod.images == 2  # cos and sin partners (the chain's mirror turns one into the other)
    assert d.residual_A == pytest.approx(2 * c, abs=1e-9)
    total = (2 * a) ** 2 + 2 * b**2 + (2 * c) ** 2
    assert dim.share == pytest.approx((2 * a) ** 2 / total, abs=1e-9)
    # orthonormal: shares and residual add to one (amplitudes add in quadrature)
    assert dim.share + mod.share + d.residual_share == pytest.approx(1.0, abs=1e-9)
    np.testing.assert_allclose(d.overlap, np.eye(2), atol=1e-9)


def test_overlapping_families_are_orthonormalised_in_list_order():
    # by hand: the q = 1/2 longitudinal modulation of a one-atom chain is the dimerise pattern itself, so listed
    # after dimerise it adds no direction (amplitude 0) and the raw overlap is 1
    u = 0.05
    lat_axis = lambda ctx: int(np.argmax(np.abs(ctx.crystal.lattice_A[:, 0])))  # noqa: E731

    def fams(ctx):
        q = np.zeros(3)
        q[lat_axis(ctx)] = 0.5
        return [dimerise(ctx)[0], modulate(ctx, q)]

    d = project_on_generator_patterns(_chain(2, [0, 0]), _chain(2, [u, -u]), families=fams)
    first, second = d.components
    assert first.share == pytest.approx(1.0, abs=1e-9)
    assert second.commensurate and second.new_directions == 0 and second.amplitude_A == pytest.approx(0, abs=1e-12)
    assert second.raw_amplitude_A == pytest.approx(u * np.sqrt(2), abs=1e-9)  # alone it would carry it all
    assert d.overlap[0, 1] == pytest.approx(1.0, abs=1e-9)


def test_incommensurate_pattern_cannot_contribute():
    # by hand: a trimerised chain (period 3) holds no q = 1/2 wave (period 2 does not divide 3)
    u = 0.05
    d = project_on_generator_patterns(_chain(3, [0, 0, 0]), _chain(3, [u, 0, -u]))
    dims = [c for c in d.components if c.generator == "dimerise"]
    assert dims and not dims[0].commensurate and dims[0].amplitude_A == 0
    assert "cannot contribute" in dims[0].note
    assert any("cannot contribute" in s for s in d.notes)
    assert d.residual_share == pytest.approx(1.0, abs=1e-9)


def test_families_from_another_cell_are_refused():
    # the patterns must live on the parent's primitive cell; a family built on a shifted chain is not used
    other = Crystal(np.diag([A, BOX, BOX]), [[0.37, 0.5, 0.5]], ["C"])
    with pytest.raises(ParameterError, match="not built on the parent's primitive cell"):
        project_on_generator_patterns(_chain(2, [0, 0]), _chain(2, [0.05, -0.05]),
                                      families=lambda ctx: dimerise(other))


def _a7_arsenic():
    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969): a = 3.7598 Å, c = 10.5475 Å, As on 6c with z = 0.22707
    search = find_parents(read_structure("tests/data/As_A7_hexagonal.cif"))
    assert search.highest.space_group_symbol == "Pm-3m"
    return search.highest.in_observed_cell, search.observed_primitive


def test_a7_arsenic_is_the_rhombohedral_split_of_simple_cubic():
    # A7 is simple cubic with the atoms moved pairwise along one body diagonal, 1/4 − z of the hexagonal c axis
    # (Schiferl & Barrett 1969 for z; the simple-cubic parentage from memory)
    parent, observed = _a7_arsenic()
    d = project_on_generator_patterns(parent, observed)
    (split,) = [c for c in d.components if c.generator == "rhombohedral-split"]
    c_parent = np.linalg.norm(parent.lattice_A.sum(axis=0))  # the parent's hexagonal c (displacement in its cell)
    per_atom = (0.25 - 0.22707) * c_parent
    assert split.max_displacement_A == pytest.approx(per_atom, rel=1e-3)
    assert split.amplitude_A == pytest.approx(per_atom * np.sqrt(2), rel=1e-3)  # two atoms in the cell
    assert split.share > 0.999
    assert split.best_image_share > 0.999  # one body diagonal carries it, not a mixture
    assert d.residual_share < 1e-3
    # the zone-boundary waves at X and M have no image periodic in the rhombohedral cell (by hand: q·(1,1,0) = 1/2)
    assert all(not c.commensurate for c in d.components if c.generator in ("dimerise", "modulate"))
    # the rest is strain: the parent's 2-atom cell has c/a = √6 (60° rhombohedron), the observed one
    # c/a = 10.5475 / 3.7598; the principal stretches along and across the axis keep that ratio
    e = np.linalg.eigvalsh(d.strain)
    along, across = e[np.argmax(np.abs(e - np.median(e)))], np.median(e)
    assert (1 + along) / (1 + across) == pytest.approx((10.5475 / 3.7598) / np.sqrt(6), rel=1e-4)


def test_cli_explain_prints_the_decomposition(capsys):
    from screener.show.cli import main

    # Schiferl & Barrett, J. Appl. Cryst. 2, 30 (1969); expected split as in the test above
    assert main(["explain", "tests/data/As_A7_hexagonal.cif", "--json"]) == 0
    dec = json.loads(capsys.readouterr().out)["decomposition"]
    (split,) = [p for p in dec["patterns"] if p["generator"] == "rhombohedral-split"]
    assert split["share"] > 0.999 and split["q"] == "(1/2, 1/2, 1/2)"
    assert set(dec) >= {"displacement_A", "patterns", "residual_A", "residual_share", "overlap", "strain"}
    assert main(["explain", "tests/data/As_A7_hexagonal.cif"]) == 0
    out = capsys.readouterr().out
    assert "pattern" in out and "share %" in out
    row = next(line for line in out.splitlines() if line.strip().startswith("rhombohedral-split"))
    assert row.split()[-1] == "100.0"
    assert "cannot contribute" in out and "cell strain" in out


def test_soft_mode_patterns_of_a7_arsenic_add_nothing_after_the_split():
    # the softest patterns of simple cubic As at q = (1/2, 1/2, 1/2) span the same body-diagonal zone-boundary
    # displacements as the rhombohedral split (A7 as the R-point distortion of simple cubic: from memory), so
    # listed after it they add no direction; one of their single variants alone carries the whole displacement
    parent, observed = _a7_arsenic()
    d = project_on_generator_patterns(parent, observed, soft_modes=True)
    soft_r = [c for c in d.components if c.generator == "soft-mode" and c.q_label == "(1/2, 1/2, 1/2)"]
    assert soft_r and all(c.new_directions == 0 and c.amplitude_A < 1e-9 for c in soft_r)
    assert max(c.best_image_share for c in soft_r) > 0.999
    assert any("soft-mode search" in s for s in d.notes)
