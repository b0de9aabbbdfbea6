"""Parameter tables, distance laws and the TOML parameter file."""

import numpy as np
import pytest

from screener.errors import ParameterError
from screener.tb.param_file import load_parameters, parameters_from_dict
from screener.tb.params import (
    HBAR2_OVER_M_EV_A2,
    BondParams,
    default_parameters,
    harrison_coefficients,
    onsite_table,
)

EXAMPLE = """
[species.C]
orbitals = ["pz"]                 # or ["s"], ["p"], ["s","p"], ["s","p","d"]
onsite_eV = { pz = 0.0 }          # keys s, p, pz, d
valence_electrons = 1
soc_eV = 0.0                      # optional
[bond."C-C"]
law = "linear"                    # harrison | power | exponential | linear
r0_A = 1.22
V_eV = { pp_pi = -2.5 }           # Slater-Koster parameters at r0
slope_eV_per_A = { pp_pi = 4.1 }  # for law = linear
exponent = 2                      # for law = power
cutoff_A = 1.6
spring_eV_per_A2 = 21.0           # optional harmonic bond spring
"""


def _write(tmp_path, text, name="p.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_harrison_law_reproduces_silicon_pp_sigma():
    ps = default_parameters(["Si"])
    hop = ps.bond("Si", "Si").hoppings(np.array([2.35]))
    # Harrison, Electronic Structure and the Properties of Solids (1980): V = η ħ²/(m d²), η_ppσ = 3.24,
    # ħ²/m = 7.62 eV Å²; Si at d = 2.35 Å: 3.24·7.62/2.35² = 4.47 eV
    assert hop["pp_sigma"][0] == pytest.approx(4.47, abs=0.005)
    assert hop["ss_sigma"][0] == pytest.approx(-1.40 * 7.62 / 2.35**2)
    # Harrison, Phys. Rev. B 24, 5835 (1981), revised η_ppσ = 2.22
    revised = default_parameters(["Si"], harrison_set="1981").bond("Si", "Si").hoppings(2.35)
    assert revised["pp_sigma"] == pytest.approx(2.22 * 7.62 / 2.35**2)
    assert HBAR2_OVER_M_EV_A2 == 7.62


def test_harrison_coefficient_table_matches_the_publications():
    eta = harrison_coefficients()
    # Harrison 1980 (book) and Harrison, PRB 24, 5835 (1981)
    assert eta["1980"] == {"ss_sigma": -1.40, "sp_sigma": 1.84, "pp_sigma": 3.24, "pp_pi": -0.81}
    assert eta["1981"] == {"ss_sigma": -1.32, "sp_sigma": 1.42, "pp_sigma": 2.22, "pp_pi": -0.63}


def test_onsite_table_spot_checks_against_the_primary_source():
    t = onsite_table()
    # NIST Standard Reference Database 141 (Kotochigova, Levine, Shirley, Stiles & Clark 1997), Mg table, LDA
    # column: 3s = -0.175427 Ha; 1 Ha = 27.211386 eV (CODATA)
    assert t["Mg"]["s"] == pytest.approx(-0.175427 * 27.211386, abs=1e-5)


def test_onsite_table_header_and_units():
    import csv
    from pathlib import Path

    from screener.tb import params

    text = (Path(params.__file__).parent / "data" / "onsite_energies_eV.csv").read_text()
    header = [line for line in text.splitlines() if line.startswith("#")]
    # the header names the primary source, not a copy of it
    assert any("NIST Standard Reference Database 141" in line for line in header)
    assert any("Phys. Rev. A 55, 191 (1997)" in line for line in header)
    rows = list(csv.DictReader(line for line in text.splitlines() if not line.startswith("#")))
    assert len(rows) > 80
    for row in rows:
        # every eV value is its hartree value times 27.211386 eV (CODATA hartree energy), to the printed digits
        assert float(row["energy_eV"]) == pytest.approx(float(row["energy_Ha"]) * 27.211386, abs=2e-6), row


def test_default_species_bases():
    ps = default_parameters(["As", "Na", "Fe", "Pd", "H"])
    assert ps.species("As").orbitals == ("s", "px", "py", "pz")
    assert ps.species("As").valence_electrons == 5
    assert ps.species("Na").orbitals == ("s",)
    assert ps.species("Fe").orbitals == ("s", "dxy", "dyz", "dzx", "dx2-y2", "dz2")
    assert ps.species("Fe").valence_electrons == 8
    assert ps.species("Pd").orbitals[0] == "dxy"  # 5s empty in the free atom, not tabulated
    assert ps.species("H").orbitals == ("s",)
    assert ps.elements == ("As", "Fe", "H", "Na", "Pd")


def test_d_orbital_defaults_ask_for_parameters():
    ps = default_parameters(["Fe", "As"])
    with pytest.raises(ParameterError, match=r'no universal d-orbital couplings for the As-Fe bond.*\[bond\."As-Fe"\]'):
        ps.bond("Fe", "As")
    with pytest.raises(ParameterError, match="no default tight-binding parameters for Ce"):
        default_parameters(["Ce"])


def test_example_file_is_accepted(tmp_path):
    ps = load_parameters(_write(tmp_path, EXAMPLE), ["C"])
    c = ps.species("C")
    assert c.orbitals == ("pz",)
    assert c.onsite_eV == {"pz": 0.0}
    assert c.valence_electrons == 1
    b = ps.bond("C", "C")
    assert b.law == "linear" and b.cutoff_A == 1.6 and b.spring_eV_per_A2 == 21.0
    # linear law V0 + slope (d - r0) (the chain models' convention, common practice, no source)
    hop = b.hoppings(np.array([1.22, 1.32]))
    assert hop["pp_pi"] == pytest.approx([-2.5, -2.5 + 0.41])
    assert set(hop) == {"pp_pi"}


def test_species_only_in_the_file_is_ignored_and_missing_species_raise(tmp_path):
    from screener.errors import ScreenerWarning

    path = _write(tmp_path, EXAMPLE)
    with pytest.warns(ScreenerWarning, match=r"\[species.C\].* not used: the structure has no C"):
        ps = load_parameters(path, ["Si"])
    assert ps.elements == ("Si",)
    with pytest.raises(ParameterError, match=r"Ce is in the structure but has no default parameters and no \[species.Ce\]"):
        load_parameters(path, ["C", "Ce"])


def test_file_overrides_defaults_partially(tmp_path):
    text = """
    [species.As]
    onsite_eV = { p = -6.0, pz = -5.5 }
    soc_eV = 0.3
    [bond."As-As"]
    spring_eV_per_A2 = 5.0
    """
    ps = load_parameters(_write(tmp_path, text), ["As"])
    a = ps.species("As")
    assert a.onsite_eV["px"] == -6.0 and a.onsite_eV["pz"] == -5.5
    assert a.onsite_eV["s"] == pytest.approx(onsite_table()["As"]["s"])
    assert a.soc_eV == 0.3
    b = ps.bond("As", "As")
    assert b.universal and b.spring_eV_per_A2 == 5.0 and b.law == "harrison"


@pytest.mark.parametrize(
    "text, pattern",
    [
        ("[species.C]\ncolour = 1\n", r"\[species.C\]: unknown key\(s\) 'colour'; allowed: orbitals"),
        ('[species.C]\norbitals = ["s", "f"]\n', r"unknown orbital 'f'; allowed: shells s, p, d"),
        ('[species.Xx]\norbitals = ["s"]\n', r"'Xx' is not an element symbol"),
        ('[bond."C-C"]\nlaw = "cubic"\nr0_A = 1.0\nV_eV = { pp_pi = -1 }\n',
         r"unknown distance law 'cubic'; allowed: harrison, power, exponential, linear"),
        ('[bond."C-C"]\nlaw = "power"\nr0_A = 1.0\nexponent = 2\nV_eV = { pp_p = -1 }\n',
         r"V_eV: unknown Slater-Koster parameter 'pp_p'; allowed: ss_sigma"),
        ('[bond."C-C"]\nlaw = "power"\nr0_A = "long"\nV_eV = { pp_pi = -1 }\n', r"r0_A must be a number in Å, got str"),
        ('[species.C]\nvalence_electrons = true\n', r"valence_electrons must be a number, got bool"),
        ('[bond."C-C"]\nlaw = "power"\nr0_A = 1.0\nV_eV = { pp_pi = -1 }\n', r"law = 'power' needs exponent"),
        ('[bond."C-C"]\nV_eV = { pp_pi = -1 }\n', r"gives hoppings but no law"),
        ('[bond."C"]\nlaw = "linear"\n', r"two element symbols joined by '-'"),
        ('[species.C]\norbitals = ["pz"]\nvalence_electrons = 3\n', r"valence_electrons = 3 does not fit in 1 orbitals"),
        ('[species.C]\norbitals = ["pz"]\nonsite_eV = { px = 1.0 }\n', r"onsite_eV.px names no orbital of C"),
        ('[bond."C-C"]\ncutoff_A = 1.0\ntaper_A = 2.0\n', r"taper_A = 2 needs a cutoff_A larger than it"),
        ("colour = 3\n", r"top level: unknown key\(s\) 'colour'"),
    ],
)
def test_file_errors_name_file_key_and_allowed_values(tmp_path, text, pattern):
    path = _write(tmp_path, text, "bad.toml")
    with pytest.raises(ParameterError, match=pattern) as info:
        load_parameters(path, ["C"])
    assert "bad.toml" in str(info.value)


def test_toml_syntax_error_names_file_and_line(tmp_path):
    path = _write(tmp_path, '[species.C]\norbitals = ["pz"]\nvalence_electrons = = 1\n', "broken.toml")
    with pytest.raises(ParameterError, match=r"broken.toml: TOML syntax error: .*line 3"):
        load_parameters(path, ["C"])


def test_missing_file():
    with pytest.raises(ParameterError, match="cannot read parameter file"):
        load_parameters("/nonexistent/params.toml", ["C"])


def test_distance_laws():
    d = np.array([1.0, 1.5, 2.0])
    power = BondParams(("C", "C"), "power", r0_A=1.5, V_eV={"pp_pi": -2.0}, exponent=3.0)
    assert power.hoppings(d)["pp_pi"] == pytest.approx(-2.0 * (1.5 / d) ** 3)
    expo = BondParams(("C", "C"), "exponential", r0_A=1.5, V_eV={"pp_pi": -2.0}, decay_A=0.5)
    assert expo.hoppings(d)["pp_pi"] == pytest.approx(-2.0 * np.exp(-(d - 1.5) / 0.5))
    expo_q = BondParams(("C", "C"), "exponential", r0_A=1.5, V_eV={"pp_pi": -2.0}, exponent=4.0)
    assert expo_q.hoppings(d)["pp_pi"] == pytest.approx(-2.0 * np.exp(-4.0 * (d / 1.5 - 1)))
    # V_eV at r0 with the harrison law scales as 1/d² (Harrison 1980)
    ps = parameters_from_dict({"bond": {"C-C": {"law": "harrison", "r0_A": 1.5, "V_eV": {"pp_pi": -2.0}}}}, ["C"])
    assert ps.bond("C", "C").hoppings(d)["pp_pi"] == pytest.approx(-2.0 * (1.5 / d) ** 2)


def test_cosine_taper_is_smooth_to_zero():
    b = BondParams(("C", "C"), "power", r0_A=1.0, V_eV={"ss_sigma": -1.0}, exponent=2.0, cutoff_A=3.0, taper_A=0.5)
    f = b.taper(np.array([2.0, 2.5, 2.75, 3.0, 3.5]))
    # cosine taper 1/2 (1 + cos(pi x)) over the last taper_A (common practice, no source)
    assert f == pytest.approx([1.0, 1.0, 0.5, 0.0, 0.0])
    hard = BondParams(("C", "C"), "power", r0_A=1.0, V_eV={"ss_sigma": -1.0}, exponent=2.0, cutoff_A=3.0)
    assert hard.hoppings(np.array([2.9, 3.1]))["ss_sigma"] == pytest.approx([-1 / 2.9**2, 0.0])


def test_heteronuclear_bond_orientation(tmp_path):
    text = """
    [bond."Te-Ge"]
    law = "power"
    r0_A = 2.8
    exponent = 2
    V_eV = { sp_sigma = 1.0, ps_sigma = 2.0, pp_sigma = 3.0 }
    """
    ps = load_parameters(_write(tmp_path, text), ["Ge", "Te"])
    b = ps.bond("Ge", "Te")
    assert b is ps.bond("Te", "Ge")
    assert b.pair == ("Te", "Ge")  # first element of the file's key is atom A
    assert b.hoppings(2.8) == {"sp_sigma": 1.0, "ps_sigma": 2.0, "pp_sigma": 3.0}
