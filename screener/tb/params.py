"""Tight-binding parameters: per-species orbitals and on-site energies, per-pair Slater–Koster hoppings.

Defaults
--------
* On-site energies: NIST LDA atomic eigenvalues of the neutral atoms (Kotochigova, Levine, Shirley, Stiles &
  Clark, NIST Standard Reference Database 141 (1997); Phys. Rev. A 55, 191 (1997)), table
  ``data/onsite_energies_eV.csv`` (source in its header).
* Orbitals: groups 1–2 (and H, He): ``s``; groups 13–18: ``s, p``; d-block groups 3–11: ``s, d``; group 12 (Zn, Cd, Hg: filled d shell kept in the core): ``s`` (Pd: ``d``,
  its 5s is empty in the free atom). The f-block has no defaults. The p level of groups 1, 2 and 12 is empty in
  the free atom, has no table entry, and must be given in a parameter file if wanted.
* Valence electrons: ``screener.elements.valence_electrons`` (group number; group − 10 for groups 13–18).
* Hoppings: Harrison's universal law V = η ħ²/(m d²), ħ²/m = 7.62 eV Å², with the 1980 coefficients (Harrison,
  Electronic Structure and the Properties of Solids, 1980) or the revised 1981 ones (Harrison, Phys. Rev. B 24,
  5835 (1981)), table ``data/harrison_coefficients.csv``. These are first-neighbour values, applied by default to
  the first coordination cluster (see ``screener.tb.bonds``). There are no universal d couplings here: a bond touching a species with d orbitals
  needs a ``[bond."A-B"]`` entry in a parameter file, otherwise ``ParameterSet.bond`` raises ParameterError.

The parameter-file format is described in ``screener.tb.param_file``.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from screener.errors import ParameterError, StructureError
from screener.structure.elements import GROUP, normalise_symbol, valence_electrons
from screener.tb.slater_koster import ORBITAL_L, expand_orbitals

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
    shells: int | None = None
    """Neighbour shells kept when cutoff_A is None; None (the default): the first coordination cluster."""
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
    extra_electrons_per_atom: float = 0.0
    """Electrons added to (negative: removed from) the neutral atoms' valence count, per atom of any cell built
    with these parameters: a rigid filling of the same bands (``rank --electrons``)."""

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
    # a filled d shell (group 12, and the d¹⁰ of groups 13–18) stays in the core, as in sp treatments of II–VI and
    # III–V compounds; only open d shells (groups 3–11) are in the default basis
    shells = ["s", "p"] if g >= 13 else (["s", "d"] if 3 <= g <= 11 else ["s"])
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


