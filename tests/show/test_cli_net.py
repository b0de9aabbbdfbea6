"""The CLI never ends in a traceback: hostile option values and our own bugs end in one line on stderr
(common practice, no source)."""

from pathlib import Path

import pytest

from screener.show import cli

AS = str(Path(__file__).parents[1] / "data" / "known_phases" / "As_simple_cubic_parent.cif")


@pytest.mark.parametrize("kpoints", ["1e308,0,0", "0,0,-11", "1e16,1e16,1e16"])
def test_k_points_far_outside_the_zone_are_refused(kpoints, capsys):
    assert cli.main(["bands", AS, "--kpoints", kpoints]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "reciprocal vectors" in err[0]


def test_k_points_within_a_few_zones_are_accepted(capsys):
    # a point and its image one reciprocal vector away give the same energies (Bloch's theorem)
    assert cli.main(["bands", AS, "--kpoints", "0.5,0,0;1.5,0,0", "--json"]) == 0
    import json

    d = json.loads(capsys.readouterr().out)
    assert d["kpoints_frac"][0] == [0.5, 0, 0] and d["kpoints_frac"][-1] == [1.5, 0, 0]
    assert d["energies_eV"][-1] == pytest.approx(d["energies_eV"][0], abs=1e-9)


def test_an_unexpected_error_is_one_line_with_exit_3(monkeypatch, capsys):
    def broken(args):
        raise RuntimeError("something we did not foresee\nsecond line")

    monkeypatch.setattr(cli, "cmd_info", broken)
    assert cli.main(["info", AS]) == 3
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "internal error" in err[0] and "RuntimeError" in err[0] and "report" in err[0]
