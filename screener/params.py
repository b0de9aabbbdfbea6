"""Tight-binding parameters: per-species orbitals and on-site energies, per-pair Slater–Koster hoppings.

Defaults
--------
* On-site energies: NIST LDA atomic eigenvalues of the neutral atoms (Kotochigova, Levine, Shirley, Stiles &
  Clark, 1997), table ``data/onsite_energies_eV.csv`` (source in its header).
* Orbitals: groups 1–2 (and H, He): ``s``; groups 13–18: ``s, p``; d-block groups 3–12: ``s, d`` (Pd: ``d``,
  its 5s is empty in the free atom). The f-block has no defaults. The p level of groups 1, 2 and 12 is empty in
  the free atom, has no table entry, and must be given in a parameter file if wanted.
* Valence electrons: ``screener.elements.valence_electrons`` (group number; group − 10 for groups 13–18).
* Hoppings: Harrison's universal law V = η ħ²/(m d²), ħ²/m = 7.62 eV Å², with the 1980 coefficients (Harrison,
  Electronic Structure and the Properties of Solids, 1980) or the revised 1981 ones (Harrison, Phys. Rev. B 24,
  5835 (1981)), table ``data/harrison_coefficients.csv``. These are first-neighbour values: default bonds keep the
  first neighbour shell only. There are no universal d couplings here: a bond touching a species with d orbitals
  needs a ``[bond."A-B"]`` entry in a parameter file, otherwise ``ParameterSet.bond`` raises ParameterError.

Parameter file (TOML)
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
    cutoff_A = 1.6                    # keep every pair up to this length (else first neighbour shell)
    taper_A = 0.2                     # optional: cosine taper to 0 over the last taper_A before cutoff_A
    shells = 1                        # neighbour shells kept when no cutoff_A is given
    spring_eV_per_A2 = 21.0           # optional harmonic bond spring (used by the energy comparator)

A bond entry replaces the default for that pair. In ``"A-B"`` the first element is atom A of the Slater–Koster
convention: ``sp_sigma`` couples s on A with p on B, ``ps_sigma`` p on A with s on B (same sign convention; it
defaults to ``sp_sigma``). SK parameters that are not given are 0, even between orbitals both sides have. A bond
entry without ``law``, ``V_eV`` and ``eta`` keeps the universal Harrison hoppings and only adds its other settings
(cutoff, shells, spring). Every parameter named in the file must be known; the error says which are allowed.
"""

from __future__ import annotations

import csv
import math
import tomllib
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from .elements import GROUP, normalise_symbol, valence_electrons
from .errors import ParameterError, StructureError
from .slater_koster import ORBITAL_L, SHELLS, SK_PARAMETERS, expand_orbitals

#: ħ²/m in eV Å² (Harrison 1980).
HBAR2_OVER_M_EV_A2 = 7.62
#: Distance laws understood by BondParams.
LAWS = ("harrison", "power", "exponential", "linear")
#: Harrison coefficient sets available.
HARRISON_SETS = ("1980", "1981")

_DATA = Path(__file__).parent / "data"
_SPECIES_KEYS = ("orbitals", "onsite_eV", "valence_electrons", "soc_eV")
_BOND_KEYS = ("law", "r0_A", "V_eV", "slope_eV_per_A", "exponent", "decay_A", "eta", "cutoff_A", "taper_A",
              "shells", "spring_eV_per_A2")
_TOP_KEYS = ("species", "bond", "source", "harrison_set")
_F_BLOCK = frozenset(
    "La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr".split()
)


# ---------------------------------------------------------------------------------------------- tables
def _nested_table(filename: str, outer: str, inner, value: str) -> dict[str, dict[str, float]]:
    """{row[outer]: {inner(row): float(row[value])}} from a CSV in screener/data whose '#' lines are comments."""
    table: dict[str, dict[str, float]] = {}
    with open(_DATA / filename, newline="") as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            table.setdefault(row[outer], {})[inner(row)] = float(row[value])
    return table


@lru_cache(maxsize=1)
def onsite_table() -> dict[str, dict[str, float]]:
    """Element → {"s"|"p"|"d": on-site energy in eV} from data/onsite_energies_eV.csv."""
    return _nested_table("onsite_energies_eV.csv", "element", lambda row: row["shell"][-1], "energy_eV")


@lru_cache(maxsize=1)
def harrison_coefficients() -> dict[str, dict[str, float]]:
    """Set name ("1980", "1981") → {SK parameter: η} from data/harrison_coefficients.csv."""
    return _nested_table("harrison_coefficients.csv", "set", lambda row: row["parameter"], "eta")


# ---------------------------------------------------------------------------------------------- records
@dataclass(frozen=True)
class SpeciesParams:
    """Orbital basis and on-site terms of one element."""

    element: str
    """Element symbol."""
    orbitals: tuple[str, ...]
    """Expanded orbital names in the fixed order s, px, py, pz, dxy, dyz, dzx, dx2-y2, dz2."""
    onsite_eV: dict[str, float]
    """On-site energy per expanded orbital, eV."""
    valence_electrons: float
    """Electrons this atom brings to the bands."""
    soc_eV: float = 0.0
    """On-site spin–orbit constant λ of λ L·S, eV (0 = off)."""
    source: str = ""
    """Where these values come from."""


@dataclass(frozen=True)
class BondParams:
    """Slater–Koster hoppings of one element pair as functions of bond length."""

    pair: tuple[str, str]
    """(A, B): A carries the first orbital of each SK parameter name."""
    law: str
    """Distance law: harrison | power | exponential | linear."""
    r0_A: float | None = None
    """Reference length of V_eV, Å."""
    V_eV: dict[str, float] = field(default_factory=dict)
    """SK parameters at r0_A, eV."""
    slope_eV_per_A: dict[str, float] = field(default_factory=dict)
    """dV/dd per SK parameter for the linear law, eV/Å."""
    exponent: float | dict[str, float] | None = None
    """Power-law exponent, or exponential-law q (number, or table per SK parameter)."""
    decay_A: float | None = None
    """Exponential-law decay length, Å."""
    eta: dict[str, float] = field(default_factory=dict)
    """Harrison coefficients per SK parameter (law = harrison), dimensionless."""
    cutoff_A: float | None = None
    """Bonds up to this length interact (None: neighbour-shell rule), Å."""
    taper_A: float = 0.0
    """Width of the cosine taper ending at cutoff_A, Å (0: hard cutoff)."""
    spring_eV_per_A2: float | None = None
    """Harmonic bond spring for the elastic energy, eV/Å² (None: use the fitted pair repulsion)."""
    shells: int = 1
    """Neighbour shells kept when cutoff_A is None."""
    universal: bool = False
    """True for the built-in Harrison defaults."""
    source: str = ""
    """Where these values come from."""

    def _per_parameter(self, value, key: str) -> float:
        return float(value.get(key, 0.0)) if isinstance(value, dict) else float(value)

    def taper(self, distance_A) -> np.ndarray:
        """Cutoff factor in [0, 1]: 1 inside, cosine decay over the last taper_A, 0 beyond cutoff_A."""
        d = np.asarray(distance_A, dtype=float)
        if self.cutoff_A is None:
            return np.ones_like(d)
        if self.taper_A <= 0:
            return np.where(d <= self.cutoff_A + 1e-9, 1.0, 0.0)
        start = self.cutoff_A - self.taper_A
        x = np.clip((d - start) / self.taper_A, 0.0, 1.0)
        return 0.5 * (1.0 + np.cos(np.pi * x))

    def hoppings(self, distance_A) -> dict[str, np.ndarray]:
        """SK parameters (eV) at the given bond lengths (Å), same shape; only parameters this bond defines."""
        d = np.asarray(distance_A, dtype=float)
        if np.any(d <= 0):
            raise ParameterError(f"bond lengths must be positive, got minimum {d.min()} Å for {'-'.join(self.pair)}")
        f = self.taper(d)
        out: dict[str, np.ndarray] = {}
        if self.law == "harrison":
            for k, eta in self.eta.items():
                out[k] = eta * HBAR2_OVER_M_EV_A2 / d**2 * f
        elif self.law == "power":
            for k, v0 in self.V_eV.items():
                out[k] = v0 * (self.r0_A / d) ** self._per_parameter(self.exponent, k) * f
        elif self.law == "exponential":
            for k, v0 in self.V_eV.items():
                if self.decay_A is not None:
                    out[k] = v0 * np.exp(-(d - self.r0_A) / self.decay_A) * f
                else:
                    q = self._per_parameter(self.exponent, k)
                    out[k] = v0 * np.exp(-q * (d / self.r0_A - 1.0)) * f
        elif self.law == "linear":
            for k, v0 in self.V_eV.items():
                out[k] = (v0 + self.slope_eV_per_A.get(k, 0.0) * (d - self.r0_A)) * f
        else:  # guarded at construction; kept for direct construction
            raise ParameterError(f"unknown distance law {self.law!r}; allowed: {', '.join(LAWS)}")
        return out


@dataclass(frozen=True)
class ParameterSet:
    """Species and bond parameters for a set of elements."""

    species_params: dict[str, SpeciesParams]
    """Element → SpeciesParams."""
    bond_params: dict[tuple[str, str], BondParams]
    """Explicit bond entries keyed by the alphabetically sorted pair."""
    harrison_set: str = "1980"
    """Harrison coefficient set used for default bonds."""
    source: str = ""
    """Notes on where the parameters come from."""

    @property
    def elements(self) -> tuple[str, ...]:
        """Elements covered, sorted."""
        return tuple(sorted(self.species_params))

    def species(self, element: str) -> SpeciesParams:
        """Parameters of ``element``; ParameterError when it is not covered."""
        try:
            return self.species_params[element]
        except KeyError:
            raise ParameterError(
                f"no parameters for element {element!r}; this parameter set covers {', '.join(self.elements)}; "
                f"add a [species.{element}] entry to the parameter file"
            ) from None

    def bond(self, a: str, b: str) -> BondParams:
        """Bond parameters of the pair (order-independent; check ``.pair`` for the A/B orientation)."""
        sa, sb = self.species(a), self.species(b)
        key = tuple(sorted((a, b)))
        if key in self.bond_params:
            return self.bond_params[key]
        return _universal_bond(sa, sb, self.harrison_set)


def _universal_bond(sa: SpeciesParams, sb: SpeciesParams, harrison_set: str, **settings) -> BondParams:
    """Harrison-law default for a pair of species without d orbitals."""
    pair = tuple(sorted((sa.element, sb.element)))
    with_d = [s.element for s in (sa, sb) if any(ORBITAL_L[o] == 2 for o in s.orbitals)]
    if with_d:
        raise ParameterError(
            f"no universal d-orbital couplings for the {pair[0]}-{pair[1]} bond ({', '.join(with_d)} carries d "
            f"orbitals): give a [bond.\"{pair[0]}-{pair[1]}\"] entry with V_eV for sd_sigma, pd_sigma, pd_pi, "
            f"dd_sigma, dd_pi, dd_delta ... in a parameter file, or restrict the orbitals of "
            f"{', '.join(with_d)}, e.g. [species.{with_d[0]}] orbitals = [\"s\"]"
        )
    eta = dict(harrison_coefficients()[harrison_set])
    return BondParams(
        pair=pair, law="harrison", eta=eta, universal=True,
        source=f"Harrison universal coefficients, set {harrison_set}", **settings,
    )


# ---------------------------------------------------------------------------------------------- defaults
def default_species(element: str) -> SpeciesParams:
    """Built-in orbitals, on-site energies and valence count of ``element`` (see module docstring)."""
    el = _element(element, "default parameters")
    table = onsite_table()
    if el in _F_BLOCK or el not in table:
        raise ParameterError(
            f"no default tight-binding parameters for {el} (f-block or no tabulated valence levels); give "
            f"[species.{el}] with orbitals, onsite_eV and valence_electrons in a parameter file"
        )
    g = GROUP[el]
    shells = ["s", "p"] if g >= 13 else (["s", "d"] if 3 <= g <= 12 else ["s"])
    shells = [s for s in shells if s in table[el]]
    orbitals = expand_orbitals(shells)
    onsite = {o: table[el][o[0]] for o in orbitals}
    return SpeciesParams(
        element=el, orbitals=orbitals, onsite_eV=onsite, valence_electrons=float(valence_electrons(el)),
        soc_eV=0.0, source="NIST LDA atomic eigenvalues (Kotochigova et al. 1997)",
    )


def default_parameters(elements, harrison_set: str = "1980") -> ParameterSet:
    """Defaults for ``elements``: NIST on-site energies and Harrison universal hoppings (set "1980" or "1981")."""
    hs = _harrison_set(harrison_set, "harrison_set argument")
    els = sorted({_element(e, "default_parameters") for e in elements})
    species = {e: default_species(e) for e in els}
    return ParameterSet(
        species_params=species, bond_params={}, harrison_set=hs,
        source=f"defaults: on-site NIST LDA (Kotochigova et al. 1997); hoppings Harrison {hs} universal law",
    )


# ---------------------------------------------------------------------------------------------- TOML
def load_parameters(path, elements=None, *, harrison_set: str | None = None) -> ParameterSet:
    """Read a TOML parameter file; defaults for every element in ``elements``, overridden by the file.

    ``elements`` lists the elements of the structure (None: those named in the file). Species in the file but
    not in ``elements`` are checked and ignored. ``harrison_set`` overrides the file's ``harrison_set``.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as e:
        raise ParameterError(f"cannot read parameter file {p}: {e.strerror or e}") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise ParameterError(f"parameter file {p}: TOML syntax error: {e}; fix the line it names") from None
    return parameters_from_dict(data, elements, harrison_set=harrison_set, where=str(p))


def parameters_from_dict(data: dict, elements=None, *, harrison_set: str | None = None,
                         where: str = "<parameters>") -> ParameterSet:
    """Same as load_parameters for an already parsed mapping (``where`` names it in error messages)."""
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


def _element(name, where: str) -> str:
    try:
        return normalise_symbol(name)
    except StructureError as e:
        raise ParameterError(f"{where}: {e}") from None


def _harrison_set(value, where: str) -> str:
    v = str(value)
    if v not in HARRISON_SETS:
        raise ParameterError(f"{where}: unknown Harrison coefficient set {value!r}; allowed: "
                             f"{', '.join(HARRISON_SETS)}")
    return v


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
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.fail(f"{section} {key} must be a number{(' in ' + unit) if unit else ''}, "
                      f"got {type(value).__name__} {value!r}")
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
            if isinstance(s, bool) or not isinstance(s, int) or s < 1:
                self.fail(f"{sec} shells must be a positive integer, got {s!r}")
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
