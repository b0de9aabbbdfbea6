"""Hostile parameter files: every failure is one ParameterError naming the file and the section/key."""

import warnings

import pytest

from screener.errors import ParameterError, ScreenerWarning
from screener.tb.param_file import MAX_CUTOFF_A, MAX_SHELLS, load_parameters


def _write(tmp_path, content, name="hostile.toml"):
    p = tmp_path / name
    p.write_bytes(content if isinstance(content, bytes) else content.encode())
    return p


def test_non_utf8_byte_names_file_and_line(tmp_path):
    p = _write(tmp_path, b'[species.Si]\nvalence_electrons = 4\n# caf\xe9\n')
    # UTF-8 cannot start a sequence with 0xE9 followed by a newline (RFC 3629): line 3
    with pytest.raises(ParameterError, match=r"hostile\.toml: line 3: byte 0xe9 is not UTF-8"):
        load_parameters(p, ["Si"])


def test_integer_of_400_digits_is_a_parameter_error(tmp_path):
    p = _write(tmp_path, "[species.Si]\nvalence_electrons = " + "9" * 400 + "\n")
    # a 400-digit integer exceeds the float range (IEEE 754 double max ~1.8e308): common practice, no source
    with pytest.raises(ParameterError, match=r"hostile\.toml.*\[species\.Si\] valence_electrons must be a number"):
        load_parameters(p, ["Si"])


@pytest.mark.parametrize("cutoff", [100, 1000])
def test_huge_cutoff_is_refused_naming_the_limit(tmp_path, cutoff):
    p = _write(tmp_path, f'[bond."Si-Si"]\ncutoff_A = {cutoff}\n')
    # limit of 30 Å: common practice, no source
    assert MAX_CUTOFF_A == 30.0
    with pytest.raises(ParameterError, match=rf'hostile\.toml: \[bond\."Si-Si"\] cutoff_A = {cutoff} Å is above '
                                             r"the limit of 30 Å"):
        load_parameters(p, ["Si"])


def test_billion_shells_is_refused(tmp_path):
    p = _write(tmp_path, '[bond."Si-Si"]\nshells = 1000000000\n')
    assert MAX_SHELLS == 10  # common practice, no source
    with pytest.raises(ParameterError, match=r'\[bond\."Si-Si"\] shells must be an integer from 1 to 10'):
        load_parameters(p, ["Si"])


@pytest.mark.parametrize("exponent", ["0", "-2", "{ pp_pi = -1.0 }"])
def test_zero_or_negative_exponent_is_refused(tmp_path, exponent):
    p = _write(tmp_path, f'[bond."Si-Si"]\nlaw = "power"\nr0_A = 2.35\nV_eV = {{ pp_pi = -1.0 }}\n'
                         f"exponent = {exponent}\n")
    # hoppings decay with distance (Harrison, Electronic Structure and the Properties of Solids, 1980)
    with pytest.raises(ParameterError, match=r'\[bond\."Si-Si"\] exponent(\.pp_pi)? must be positive'):
        load_parameters(p, ["Si"])


@pytest.mark.parametrize("value", ["inf", "-inf", "nan", "1e308"])
@pytest.mark.parametrize("where, key", [("[species.Si]", "soc_eV"), ('[bond."Si-Si"]', "spring_eV_per_A2"),
                                        ('[bond."Si-Si"]', "cutoff_A")])
def test_non_finite_values_are_refused_everywhere(tmp_path, value, where, key):
    p = _write(tmp_path, f"{where}\n{key} = {value}\n")
    # 1e308 is finite but no sane eV or Å value: common practice, no source
    with pytest.raises(ParameterError, match=rf"hostile\.toml: {where.replace('[', '.').replace(']', '.')} {key}"):
        load_parameters(p, ["Si"])


def test_non_finite_inside_a_table(tmp_path):
    p = _write(tmp_path, '[bond."Si-Si"]\nlaw = "linear"\nr0_A = 2.35\nV_eV = { sp_sigma = nan }\n'
                         "slope_eV_per_A = { sp_sigma = 1.0 }\n")
    with pytest.raises(ParameterError, match=r'\[bond\."Si-Si"\] V_eV\.sp_sigma must be a number'):
        load_parameters(p, ["Si"])


def test_unexpected_value_shape_is_a_parameter_error(tmp_path):
    # an orbital list holding a table: not foreseen by a specific check, still one ParameterError naming the file
    p = _write(tmp_path, '[species.Si]\norbitals = [{ a = 1 }]\n')
    with pytest.raises(ParameterError, match=r"hostile\.toml"):
        load_parameters(p, ["Si"])


def test_unused_sections_warn_naming_them(tmp_path):
    p = _write(tmp_path, '[species.Ge]\nvalence_electrons = 4\n[bond."Ge-Si"]\nspring_eV_per_A2 = 1.0\n')
    with pytest.warns(ScreenerWarning, match=r'\[species\.Ge\], \[bond\."Ge-Si"\] not used: the structure has no Ge'):
        ps = load_parameters(p, ["Si"])
    assert ps.elements == ("Si",)


def test_used_sections_do_not_warn(tmp_path):
    p = _write(tmp_path, '[species.Si]\nvalence_electrons = 4\n')
    with warnings.catch_warnings():
        warnings.simplefilter("error", ScreenerWarning)
        load_parameters(p, ["Si"])
