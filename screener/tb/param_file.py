"""Parameter file (TOML)
---------------------
::

    source = "free text, optional"
    harrison_set = "1980"             # optional, or "1981"
    [species.C]
    orbitals = ["pz"]                 # or "sp", ["s", "p"], ["s", "p", "d"], single orbitals px, dz2, ...
    onsite_eV = { pz = 0.0 }          # keys s, p, d (ignored if not in the basis) or single orbitals, which
                                      # override their shell
    valence_electrons = 1
    soc_eV = 0.0                      # optional on-site spin–orbit λ (λ L·S on p and d shells)
    [bond."C-C"]
    law = "linear"                    # harrison | power | exponential | linear
    r0_A = 1.22
    V_eV = { pp_pi = -2.5 }           # Slater–Koster parameters at r0 (for law = harrison: V(d) = V0 (r0/d)²)
    slope_eV_per_A = { pp_pi = 4.1 }  # law = linear:       V = V0 + slope (d − r0)
    exponent = 2                      # law = power:        V = V0 (r0/d)^exponent  (number or table per parameter)
                                      # law = exponential:  V = V0 exp(−(d − r0)/decay_A), or with `exponent` q
                                      #                     instead of decay_A: V = V0 exp(−q (d/r0 − 1))
    eta = { pp_sigma = 3.24 }         # law = harrison:     V = η ħ²/(m d²)   (instead of V_eV)
    cutoff_A = 1.6                    # keep every pair up to this length (else the coordination cluster)
    taper_A = 0.2                     # optional: cosine taper to 0 over the last taper_A before cutoff_A
    shells = 1                        # neighbour shells kept when no cutoff_A is given (default: every contact
                                      # up to 1.3 x each atom's shortest, the first coordination cluster)
    spring_eV_per_A2 = 21.0           # optional harmonic bond spring (used by the energy comparator)

A bond entry replaces the default for that pair. In ``"A-B"`` the first element is atom A of the Slater–Koster
convention: ``sp_sigma`` couples s on A with p on B, ``ps_sigma`` p on A with s on B (same sign convention; it
defaults to ``sp_sigma``). SK parameters that are not given are 0, even between orbitals both sides have. A bond
entry without ``law``, ``V_eV`` and ``eta`` keeps the universal Harrison hoppings and only adds its other settings
(cutoff, shells, spring). Every parameter named in the file must be known; the error says which are allowed.
"""

from __future__ import annotations

import math
import tomllib
import warnings
from pathlib import Path

from screener.errors import ParameterError, ScreenerError, ScreenerWarning, StructureError
from screener.structure.elements import normalise_symbol
from screener.tb.params import (
    _BOND_KEYS,
    _SPECIES_KEYS,
    _TOP_KEYS,
    HBAR2_OVER_M_EV_A2,
    LAWS,
    BondParams,
    ParameterSet,
    SpeciesParams,
    _element,
    _harrison_set,
    _universal_bond,
    default_species,
    harrison_coefficients,
    onsite_table,
)
from screener.tb.slater_koster import ORBITAL_L, SHELLS, SK_PARAMETERS, expand_orbitals

#: Longest bond cutoff a file may ask for, Å: beyond it the neighbour search and H(R) grow to gigabytes
#: (common practice, no source: tight-binding hoppings are negligible beyond a few neighbour shells).
MAX_CUTOFF_A = 30.0
#: Most neighbour shells a bond entry may keep (common practice, no source).
MAX_SHELLS = 10
#: Largest magnitude of any number in a parameter file (eV, Å, exponents): larger is a typing error.
MAX_ABS_VALUE = 1e6


# ---------------------------------------------------------------------------------------------- TOML
def load_parameters(path, elements=None, *, harrison_set: str | None = None) -> ParameterSet:
    """Read a TOML parameter file; defaults for every element in ``elements``, overridden by the file.

    ``elements`` lists the elements of the structure (None: those named in the file). Species in the file but
    not in ``elements`` are checked and ignored. ``harrison_set`` overrides the file's ``harrison_set``.
    """
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as e:
        raise ParameterError(f"cannot read parameter file {p}: {e.strerror or e}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        line = raw[: e.start].count(b"\n") + 1
        raise ParameterError(f"parameter file {p}: line {line}: byte 0x{raw[e.start]:02x} is not UTF-8 text; "
                             "save the file as UTF-8") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise ParameterError(f"parameter file {p}: TOML syntax error: {e}; fix the line it names") from None
    except (ValueError, RecursionError, OverflowError) as e:  # e.g. an integer of thousands of digits
        raise ParameterError(f"parameter file {p}: cannot be read as TOML ({type(e).__name__}: "
                             f"{str(e)[:120]}); fix the value") from None
    return parameters_from_dict(data, elements, harrison_set=harrison_set, where=str(p))


def parameters_from_dict(data: dict, elements=None, *, harrison_set: str | None = None,
                         where: str = "<parameters>") -> ParameterSet:
    """Same as load_parameters for an already parsed mapping (``where`` names it in error messages).

    Sections for elements that are not in ``elements`` are checked, ignored and named in a ScreenerWarning.
    """
    try:
        return _parameters_from_dict(data, elements, harrison_set, where)
    except ScreenerError:
        raise
    except (ValueError, TypeError, KeyError, IndexError, OverflowError, RecursionError, AttributeError,
            ZeroDivisionError) as e:
        # a value the checks above did not foresee: still the file's fault, said in one line
        raise ParameterError(f"parameter file {where}: cannot use a value ({type(e).__name__}: {str(e)[:160]}); "
                             "check the numbers and tables against the documented keys") from None


def _parameters_from_dict(data, elements, harrison_set, where) -> ParameterSet:
    ctx = _Ctx(where)
    if not isinstance(data, dict):
        raise ParameterError(f"{where}: expected a table of [species.X] and [bond.\"A-B\"] entries")
    ctx.check_keys(data, _TOP_KEYS, "top level")
    hs = harrison_set or data.get("harrison_set", "1980")
    hs = _harrison_set(hs, f"{where}: harrison_set")
    species_in = ctx.table(data.get("species", {}), "[species]")
    bonds_in = ctx.table(data.get("bond", {}), "[bond]")

    file_species: dict[str, dict] = {}
    for name, entry in species_in.items():
        el = ctx.element(name, f"[species.{name}]")
        if el in file_species:
            raise ParameterError(f"{where}: [species.{name}] given twice (as {el})")
        file_species[el] = ctx.table(entry, f"[species.{name}]")
    if elements is None:
        els = set(file_species)
        for name in bonds_in:
            els.update(ctx.pair(name))
    else:
        els = {_element(e, "structure") for e in elements}

    species: dict[str, SpeciesParams] = {}
    for el in sorted(set(els) | set(file_species)):
        species[el] = ctx.species(el, file_species.get(el))

    bonds: dict[tuple[str, str], BondParams] = {}
    for name, entry in bonds_in.items():
        a, b = ctx.pair(name)
        key = tuple(sorted((a, b)))
        if key in bonds:
            raise ParameterError(f"{where}: bond {key[0]}-{key[1]} given twice ([bond.\"{name}\"] repeats it)")
        bonds[key] = ctx.bond(a, b, ctx.table(entry, f'[bond."{name}"]'), species, hs)

    keep = set(els)
    unused = [f"[species.{e}]" for e in sorted(file_species) if e not in keep]
    unused += [f'[bond."{k[0]}-{k[1]}"]' for k in sorted(bonds) if k[0] not in keep or k[1] not in keep]
    if unused:
        absent = sorted(({e for k in bonds for e in k} | set(file_species)) - keep)
        warnings.warn(f"parameter file {where}: {', '.join(unused)} not used: the structure has no "
                      f"{', '.join(absent)}; check the element symbols", ScreenerWarning, stacklevel=3)
    notes = [f"defaults: on-site NIST LDA (Kotochigova et al. 1997); hoppings Harrison {hs} universal law",
             f"overrides: {where}"]
    if isinstance(data.get("source"), str):
        notes.append(data["source"])
    return ParameterSet(
        species_params={e: s for e, s in species.items() if e in keep},
        bond_params={k: v for k, v in bonds.items() if k[0] in keep and k[1] in keep},
        harrison_set=hs,
        source="; ".join(notes),
    )



class _Ctx:
    """Validation helpers that prefix every message with the file name."""

    def __init__(self, where: str):
        self.where = where

    def fail(self, msg: str):
        raise ParameterError(f"parameter file {self.where}: {msg}")

    def check_keys(self, d: dict, allowed, section: str) -> None:
        unknown = [k for k in d if k not in allowed]
        if unknown:
            self.fail(f"{section}: unknown key(s) {', '.join(map(repr, unknown))}; allowed: {', '.join(allowed)}")

    def table(self, value, section: str) -> dict:
        if not isinstance(value, dict):
            self.fail(f"{section} must be a table, got {type(value).__name__} {value!r}")
        return value

    def number(self, value, section: str, key: str, *, positive=False, nonnegative=False, unit="") -> float:
        ok = not isinstance(value, bool) and isinstance(value, (int, float))
        if ok:
            try:
                ok = math.isfinite(float(value)) and abs(float(value)) <= MAX_ABS_VALUE
            except OverflowError:  # an integer too large for a float
                ok = False
        if not ok:
            shown = repr(value) if len(repr(value)) <= 40 else repr(value)[:37] + "..."
            self.fail(f"{section} {key} must be a number{(' in ' + unit) if unit else ''}, got "
                      f"{type(value).__name__} {shown} (finite, magnitude at most {MAX_ABS_VALUE:g})")
        if positive and value <= 0:
            self.fail(f"{section} {key} must be positive, got {value!r}")
        if nonnegative and value < 0:
            self.fail(f"{section} {key} must not be negative, got {value!r}")
        return float(value)

    def element(self, name: str, section: str) -> str:
        try:
            return normalise_symbol(name)
        except StructureError:
            self.fail(f"{section}: {name!r} is not an element symbol; use e.g. [species.As]")

    def pair(self, name: str) -> tuple[str, str]:
        parts = str(name).split("-")
        if len(parts) != 2 or not all(parts):
            self.fail(f"[bond.\"{name}\"]: a bond is named by two element symbols joined by '-', e.g. \"Ge-Te\"")
        return (self.element(parts[0].strip(), f'[bond."{name}"]'), self.element(parts[1].strip(), f'[bond."{name}"]'))

    def sk_table(self, value, section: str, key: str, unit: str) -> dict[str, float]:
        t = self.table(value, f"{section} {key}")
        out = {}
        for k, v in t.items():
            if k not in SK_PARAMETERS:
                self.fail(f"{section} {key}: unknown Slater-Koster parameter {k!r}; allowed: {', '.join(SK_PARAMETERS)}")
            out[k] = self.number(v, section, f"{key}.{k}", unit=unit)
        return out

    # ------------------------------------------------------------------ species
    def species(self, el: str, entry: dict | None) -> SpeciesParams:
        sec = f"[species.{el}]"
        try:
            base = default_species(el)
        except ParameterError:
            base = None
        if entry is None:
            if base is None:
                self.fail(f"element {el} is in the structure but has no default parameters and no {sec} entry; "
                          f"add {sec} with orbitals, onsite_eV and valence_electrons")
            return base
        self.check_keys(entry, _SPECIES_KEYS, sec)
        if "orbitals" in entry:
            spec = entry["orbitals"]
            if not isinstance(spec, (str, list)):
                self.fail(f"{sec} orbitals must be a list such as [\"s\", \"p\"] or a string such as \"sp\", "
                          f"got {spec!r}")
            try:
                orbitals = expand_orbitals(spec)
            except ParameterError as e:
                self.fail(f"{sec} orbitals: {e}")
            if not orbitals:
                self.fail(f"{sec} orbitals is empty; give at least one orbital")
        elif base is not None:
            orbitals = base.orbitals
        else:
            self.fail(f"{sec} needs 'orbitals' ({el} has no default basis)")
        onsite: dict[str, float] = {}
        defaults = onsite_table().get(el, {})
        for o in orbitals:
            if o[0] in defaults:
                onsite[o] = defaults[o[0]]
        given = self.table(entry.get("onsite_eV", {}), f"{sec} onsite_eV")
        # shells first, single orbitals after, so 'pz' overrides 'p'
        for k in sorted(given, key=lambda k: k in ORBITAL_L and k not in SHELLS):
            v = self.number(given[k], sec, f"onsite_eV.{k}", unit="eV")
            targets = SHELLS.get(k, (k,) if k in ORBITAL_L else None)
            if targets is None:
                self.fail(f"{sec} onsite_eV: unknown orbital {k!r}; allowed: s, p, d and "
                          f"{', '.join(ORBITAL_L)}")
            hit = [o for o in targets if o in orbitals]
            if not hit and k not in SHELLS:  # a shell key may name a shell the basis leaves out
                self.fail(f"{sec} onsite_eV.{k} names no orbital of {el} (orbitals: {', '.join(orbitals)})")
            for o in hit:
                onsite[o] = v
        missing = [o for o in orbitals if o not in onsite]
        if missing:
            self.fail(f"{sec}: no on-site energy for {', '.join(missing)} (no tabulated value); "
                      f"add onsite_eV = {{ {missing[0][0]} = ... }}")
        if "valence_electrons" in entry:
            nval = self.number(entry["valence_electrons"], sec, "valence_electrons", nonnegative=True)
        elif base is not None:
            nval = base.valence_electrons
        else:
            self.fail(f"{sec} needs valence_electrons ({el} has no default)")
        if nval > 2 * len(orbitals):
            self.fail(f"{sec} valence_electrons = {nval:g} does not fit in {len(orbitals)} orbitals "
                      f"({', '.join(orbitals)}; at most {2 * len(orbitals)}); add orbitals or lower the count")
        soc = self.number(entry.get("soc_eV", 0.0), sec, "soc_eV", unit="eV")
        return SpeciesParams(element=el, orbitals=orbitals, onsite_eV=onsite, valence_electrons=nval, soc_eV=soc,
                             source=f"{self.where} over NIST defaults" if base else self.where)

    # ------------------------------------------------------------------ bonds
    def bond(self, a: str, b: str, entry: dict, species: dict, hs: str) -> BondParams:
        sec = f'[bond."{a}-{b}"]'
        self.check_keys(entry, _BOND_KEYS, sec)
        settings = {}
        if "cutoff_A" in entry:
            settings["cutoff_A"] = self.number(entry["cutoff_A"], sec, "cutoff_A", positive=True, unit="Å")
            if settings["cutoff_A"] > MAX_CUTOFF_A:
                self.fail(f"{sec} cutoff_A = {settings['cutoff_A']:g} Å is above the limit of {MAX_CUTOFF_A:g} Å "
                          "(the neighbour search would need gigabytes); give a shorter cutoff")
        if "taper_A" in entry:
            t = self.number(entry["taper_A"], sec, "taper_A", nonnegative=True, unit="Å")
            if "cutoff_A" not in settings or t >= settings["cutoff_A"]:
                self.fail(f"{sec} taper_A = {t:g} needs a cutoff_A larger than it")
            settings["taper_A"] = t
        if "spring_eV_per_A2" in entry:
            settings["spring_eV_per_A2"] = self.number(entry["spring_eV_per_A2"], sec, "spring_eV_per_A2",
                                                       nonnegative=True, unit="eV/Å²")
        if "shells" in entry:
            s = entry["shells"]
            if isinstance(s, bool) or not isinstance(s, int) or not 1 <= s <= MAX_SHELLS:
                shown = repr(s) if len(repr(s)) <= 40 else repr(s)[:37] + "..."
                self.fail(f"{sec} shells must be an integer from 1 to {MAX_SHELLS}, got {shown}")
            settings["shells"] = s
        has_v = "V_eV" in entry or "eta" in entry
        if "law" not in entry:
            if has_v:
                self.fail(f"{sec} gives hoppings but no law; add law = one of {', '.join(LAWS)}")
            for k in ("r0_A", "slope_eV_per_A", "exponent", "decay_A"):
                if k in entry:
                    self.fail(f"{sec} {k} needs a law; add law = one of {', '.join(LAWS)}")
            sa, sb = species.get(a), species.get(b)
            if sa is None or sb is None:  # element not in the structure: entry is ignored anyway
                return BondParams(pair=(a, b), law="harrison", universal=True, **settings)
            bp = _universal_bond(sa, sb, hs, **settings)
            return bp
        law = entry["law"]
        if law not in LAWS:
            self.fail(f"{sec} law: unknown distance law {law!r}; allowed: {', '.join(LAWS)}")
        r0 = self.number(entry["r0_A"], sec, "r0_A", positive=True, unit="Å") if "r0_A" in entry else None
        V = self.sk_table(entry["V_eV"], sec, "V_eV", "eV") if "V_eV" in entry else {}
        slope = self.sk_table(entry["slope_eV_per_A"], sec, "slope_eV_per_A", "eV/Å") \
            if "slope_eV_per_A" in entry else {}
        exponent = None
        if "exponent" in entry:
            ex = entry["exponent"]
            exponent = self.sk_table(ex, sec, "exponent", "") if isinstance(ex, dict) else \
                self.number(ex, sec, "exponent")
            for k, v in (exponent.items() if isinstance(exponent, dict) else [("", exponent)]):
                if v <= 0:
                    self.fail(f"{sec} exponent{'.' + k if k else ''} must be positive (hoppings fall with "
                              f"distance), got {v:g}")
        decay = self.number(entry["decay_A"], sec, "decay_A", positive=True, unit="Å") if "decay_A" in entry else None
        eta = self.sk_table(entry["eta"], sec, "eta", "") if "eta" in entry else {}

        def need(cond, what):
            if not cond:
                self.fail(f"{sec} law = {law!r} needs {what}")

        if law == "harrison":
            if V:
                need(r0 is not None, "r0_A (the length at which V_eV is given)")
                for k, v0 in V.items():
                    eta.setdefault(k, v0 * r0**2 / HBAR2_OVER_M_EV_A2)
            if not eta:
                eta = dict(harrison_coefficients()[hs])
            V = {}
        else:
            need(V, "V_eV = { ... } (Slater-Koster parameters at r0_A)")
            need(r0 is not None, "r0_A")
            if law == "power":
                need(exponent is not None, "exponent")
            if law == "exponential":
                need(decay is not None or exponent is not None, "decay_A or exponent")
            if eta:
                self.fail(f"{sec} eta is only used with law = 'harrison'")
        if isinstance(exponent, dict):
            for k in V:
                if k not in exponent:
                    self.fail(f"{sec} exponent table has no entry for {k}")
        return BondParams(pair=(a, b), law=law, r0_A=r0, V_eV=V, slope_eV_per_A=slope, exponent=exponent,
                          decay_A=decay, eta=eta, source=self.where, **settings)
