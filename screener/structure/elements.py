"""Element symbols, periodic-table groups and default valence-electron counts.

Group numbers follow the IUPAC 1-18 numbering (from memory; any periodic table). Lanthanides and actinides are
given group 3. Default valence counts: group number for groups 1-11 (open d shells are valence), group - 10 for groups 12-18
(the filled d shell is core, as in sp tight-binding treatments of II-VI and III-V compounds; common practice, no
source), with He = 2.
"""

from __future__ import annotations

from screener.errors import StructureError

_PERIODS = [
    # (symbols, groups) per period
    ("H He", "1 18"),
    ("Li Be B C N O F Ne", "1 2 13 14 15 16 17 18"),
    ("Na Mg Al Si P S Cl Ar", "1 2 13 14 15 16 17 18"),
    ("K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se Br Kr", " ".join(str(g) for g in range(1, 19))),
    ("Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe", " ".join(str(g) for g in range(1, 19))),
    (
        "Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn",
        "1 2 " + " ".join(["3"] * 15) + " " + " ".join(str(g) for g in range(4, 19)),
    ),
    (
        "Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr",
        "1 2 " + " ".join(["3"] * 15),
    ),
]

SYMBOLS: tuple[str, ...] = tuple(s for syms, _ in _PERIODS for s in syms.split())
GROUP: dict[str, int] = {
    s: int(g) for syms, groups in _PERIODS for s, g in zip(syms.split(), groups.split(), strict=True)
}
ATOMIC_NUMBER: dict[str, int] = {s: z for z, s in enumerate(SYMBOLS, start=1)}

#: Covalent radii (Å) of Cordero et al., "Covalent radii revisited", Dalton Trans. 2008, 2832, for Z = 1-96 (values
#: from memory of the paper's table; C is its sp3 value, Mn/Fe/Co their low-spin values, the smaller of two). Used
#: only to flag implausibly short contacts, where a few hundredths of an Å do not matter.
_COVALENT = """
H .31 He .28 Li 1.28 Be .96 B .84 C .76 N .71 O .66 F .57 Ne .58 Na 1.66 Mg 1.41 Al 1.21 Si 1.11 P 1.07 S 1.05
Cl 1.02 Ar 1.06 K 2.03 Ca 1.76 Sc 1.70 Ti 1.60 V 1.53 Cr 1.39 Mn 1.39 Fe 1.32 Co 1.26 Ni 1.24 Cu 1.32 Zn 1.22
Ga 1.22 Ge 1.20 As 1.19 Se 1.20 Br 1.20 Kr 1.16 Rb 2.20 Sr 1.95 Y 1.90 Zr 1.75 Nb 1.64 Mo 1.54 Tc 1.47 Ru 1.46
Rh 1.42 Pd 1.39 Ag 1.45 Cd 1.44 In 1.42 Sn 1.39 Sb 1.39 Te 1.38 I 1.39 Xe 1.40 Cs 2.44 Ba 2.15 La 2.07 Ce 2.04
Pr 2.03 Nd 2.01 Pm 1.99 Sm 1.98 Eu 1.98 Gd 1.96 Tb 1.94 Dy 1.92 Ho 1.92 Er 1.89 Tm 1.90 Yb 1.87 Lu 1.87 Hf 1.75
Ta 1.70 W 1.62 Re 1.51 Os 1.44 Ir 1.41 Pt 1.36 Au 1.36 Hg 1.32 Tl 1.45 Pb 1.46 Bi 1.48 Po 1.40 At 1.50 Rn 1.50
Fr 2.60 Ra 2.21 Ac 2.15 Th 2.06 Pa 2.00 U 1.96 Np 1.90 Pu 1.87 Am 1.80 Cm 1.69
""".split()
COVALENT_RADIUS_A: dict[str, float] = {_COVALENT[k]: float(_COVALENT[k + 1]) for k in range(0, len(_COVALENT), 2)}

#: Pauling electronegativities (the revised values of A. L. Allred, J. Inorg. Nucl. Chem. 17, 215 (1961), as
#: tabulated in the handbooks; from memory). Used only as a descriptor for plots of many results.
_PAULING = """
H 2.20 Li 0.98 Be 1.57 B 2.04 C 2.55 N 3.04 O 3.44 F 3.98 Na 0.93 Mg 1.31 Al 1.61 Si 1.90 P 2.19 S 2.58 Cl 3.16
K 0.82 Ca 1.00 Sc 1.36 Ti 1.54 V 1.63 Cr 1.66 Mn 1.55 Fe 1.83 Co 1.88 Ni 1.91 Cu 1.90 Zn 1.65 Ga 1.81 Ge 2.01
As 2.18 Se 2.55 Br 2.96 Kr 3.00 Rb 0.82 Sr 0.95 Y 1.22 Zr 1.33 Nb 1.60 Mo 2.16 Tc 1.90 Ru 2.20 Rh 2.28 Pd 2.20
Ag 1.93 Cd 1.69 In 1.78 Sn 1.96 Sb 2.05 Te 2.10 I 2.66 Xe 2.60 Cs 0.79 Ba 0.89 La 1.10 Ce 1.12 Pr 1.13 Nd 1.14
Sm 1.17 Gd 1.20 Dy 1.22 Ho 1.23 Er 1.24 Tm 1.25 Lu 1.27 Hf 1.30 Ta 1.50 W 2.36 Re 1.90 Os 2.20 Ir 2.20 Pt 2.28
Au 2.54 Hg 2.00 Tl 1.62 Pb 2.33 Bi 2.02 Po 2.00 At 2.20 Fr 0.70 Ra 0.90 Ac 1.10 Th 1.30 Pa 1.50 U 1.38 Np 1.36
Pu 1.28
""".split()
PAULING_ELECTRONEGATIVITY: dict[str, float] = {_PAULING[k]: float(_PAULING[k + 1]) for k in range(0, len(_PAULING), 2)}


def mean_electronegativity_difference(composition: dict[str, float]) -> float | None:
    """Mean |χ_A − χ_B| (Pauling) over unlike pairs of atoms drawn from ``composition`` (element -> amount).

    For a binary this is |χ_A − χ_B| whatever the stoichiometry; an element gives 0. None when an element has no
    tabulated value.
    """
    els = [e for e, n in composition.items() if n > 0]
    if any(e not in PAULING_ELECTRONEGATIVITY for e in els):
        return None
    total = sum(composition[e] for e in els)
    x = {e: composition[e] / total for e in els}
    num = den = 0.0
    for a_i, a in enumerate(els):
        for b in els[a_i + 1:]:
            w = x[a] * x[b]
            num += w * abs(PAULING_ELECTRONEGATIVITY[a] - PAULING_ELECTRONEGATIVITY[b])
            den += w
    return num / den if den else 0.0


def parse_formula(formula: str) -> dict[str, float]:
    """{'Ge': 1, 'Te': 1} from 'GeTe'; amounts may be decimals ('Bi0.5Sb0.5'). StructureError if unreadable."""
    import re

    parts = re.findall(r"([A-Z][a-z]?)(\d*\.?\d*)", formula)
    if not parts or "".join(a + b for a, b in parts) != formula.replace(" ", ""):
        raise StructureError(f"cannot read the chemical formula {formula!r}")
    out: dict[str, float] = {}
    for el, n in parts:
        out[normalise_symbol(el)] = out.get(el, 0.0) + (float(n) if n else 1.0)
    return out


#: Toxic elements that often appear in Peierls candidates (common laboratory hazard knowledge, no source).
TOXIC = frozenset("Be As Se Sb Cd Hg Tl Pb Te".split())
#: Radioactive elements: no stable isotope (common knowledge of the chart of nuclides, no source).
RADIOACTIVE = frozenset(
    "Tc Pm Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr".split()
)
#: Elements whose handling calls for particular care (toxic or radioactive); reports add a safety line.
HAZARDOUS = TOXIC | RADIOACTIVE


def normalise_symbol(symbol: str) -> str:
    """Return the canonical spelling of an element symbol ('fe' -> 'Fe'), or raise StructureError."""
    s = str(symbol).strip()
    # CIF type symbols may carry charges or digits (Fe2+, O1-): keep the leading letters
    letters = ""
    for ch in s:
        if ch.isalpha():
            letters += ch
        else:
            break
    canon = letters[:1].upper() + letters[1:].lower()
    if canon not in ATOMIC_NUMBER:
        raise StructureError(
            f"unknown element symbol {symbol!r}: expected a chemical element such as 'As' or 'Te'"
        )
    return canon


def valence_electrons(symbol: str) -> int:
    """Default number of valence electrons of an element (see module docstring for the rule)."""
    s = normalise_symbol(symbol)
    if s == "He":
        return 2
    g = GROUP[s]
    # a filled d¹⁰ shell is core: groups 12–18 count only their s and p electrons
    return g - 10 if g >= 12 else g
