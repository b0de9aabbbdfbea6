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
