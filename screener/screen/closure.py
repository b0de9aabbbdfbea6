"""Elastic cost of a distortion: pair repulsion fitted to equilibrium, or harmonic bond springs.

The tight-binding band energy alone always favours shorter bonds. The usual closure of tight-binding total-energy
models adds a short-ranged pair repulsion whose strength is fixed by requiring the observed (parent) structure to
be in mechanical equilibrium (Chadi, Phys. Rev. Lett. 41, 1062 (1978)). Here φ(d) = A (d0/d)^m per bond, where d0
is the bond's length in the parent, one A for all bonds, fixed by dE_total/ds = 0 under uniform scaling
r → (1 + s) r. Bonds whose parameters give ``spring_eV_per_A2`` use Σ ½ K (d − d0)² instead.

A closure of pair terms fitted to equilibrium and the bulk modulus has no handle on shear: the repulsion is
compressed (φ' < 0) to balance the bands, and its tension term (φ'/d)(1 − n nᵀ) softens every transverse pattern.
Where the bundled table has measured single-crystal shear constants for the parent's phase, the closure adds a
bond-bending term over every pair of bonds b, b' meeting at an atom,

    E_bend = ½ κ Σ_(b,b') (cos θ_bb' − cos θ⁰_bb')²,

the angular three-body form of the valence-force-field models (P. N. Keating, Phys. Rev. 145, 637 (1966) writes it
in bond-vector dot products; F. H. Stillinger & T. A. Weber, Phys. Rev. B 31, 5262 (1985) in cos θ). It is zero with
zero slope at the parent and invariant under uniform scaling and rigid rotations, so the equilibrium, the bulk
modulus and the fit of A and m are untouched; κ ≥ 0 is the smallest value for which the model's clamped-ion C44 and
C' = (C11 − C12)/2 both reach their measured values (`bending_for_shear`). Each closure member is (label, A, m, κ),
and `elastic_model_for` takes κ as an argument of its own, so no place builds half a closure.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from screener.errors import ParameterError
from screener.structure.crystal import Crystal

#: 1 GPa in eV/Å^3 (CODATA: 1 eV = 1.602176634e-19 J).
GPA_IN_EV_PER_A3 = 1.0 / 160.21766208


def unique_bond_mask(i: np.ndarray, j: np.ndarray, image: np.ndarray) -> np.ndarray:
    """Mask that keeps one direction of each bond listed in both directions (i<j, or i==j with image > 0)."""
    i, j, image = np.asarray(i), np.asarray(j), np.asarray(image)
    first_nonzero = np.where(image != 0, image, 0)
    # sign of the first non-zero image component
    idx = np.argmax(image != 0, axis=1)
    sign = np.sign(first_nonzero[np.arange(len(i)), idx])
    return (i < j) | ((i == j) & (sign > 0))


def bond_lengths_A(lattice_A: np.ndarray, frac: np.ndarray, i, j, image) -> np.ndarray:
    """Lengths (Å) of bonds (i, j, image) in a cell: |(frac_j + image − frac_i) · L|."""
    vec = (frac[j] + image - frac[i]) @ lattice_A
    return np.linalg.norm(vec, axis=1)


@dataclass(frozen=True)
class ElasticModel:
    """Pair repulsion + harmonic springs over a fixed list of bonds (each listed once)."""

    i: np.ndarray
    """(p,) int, first atom of each bond."""
    j: np.ndarray
    """(p,) int, second atom of each bond."""
    image: np.ndarray
    """(p, 3) int, lattice translation added to atom j."""
    rest_length_A: np.ndarray
    """(p,) float, bond length in the parent structure, Å."""
    repulsion_eV: np.ndarray
    """(p,) float, pair-repulsion prefactor A per bond at the parent length, eV (0 for spring bonds)."""
    spring_eV_per_A2: np.ndarray
    """(p,) float, harmonic spring constant per bond, eV/Å^2 (0 for repulsion bonds)."""
    exponent: float
    """Pair-repulsion exponent m."""
    angle_bonds: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), dtype=int))
    """(t, 2) int, the two bonds (indices into the bond arrays) of each bond pair meeting at an atom."""
    angle_signs: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)))
    """(t, 2) ±1: +1 where the shared atom is the bond's first atom i (the arm is the bond vector), −1 where it is j."""
    angle_cos0: np.ndarray = field(default_factory=lambda: np.zeros(0))
    """(t,) cos θ⁰ of each bond pair in the parent."""
    bending_eV: float = 0.0
    """Bond-bending constant κ of ½ κ (cos θ − cos θ⁰)² per bond pair, eV (0: no bending term)."""

    def bond_vectors_A(self, lattice_A: np.ndarray, frac: np.ndarray, image: np.ndarray | None = None) -> np.ndarray:
        """(p, 3) Cartesian bond vectors (Å) of the cell; ``image`` overrides the stored images."""
        img = self.image if image is None else image
        return (frac[self.j] + img - frac[self.i]) @ lattice_A

    def bending_energy_eV(self, lattice_A: np.ndarray, frac: np.ndarray, image: np.ndarray | None = None) -> float:
        """Σ ½ κ (cos θ − cos θ⁰)² over the bond pairs (eV); 0 without a bending term."""
        if self.bending_eV == 0 or len(self.angle_cos0) == 0:
            return 0.0
        return float(0.5 * self.bending_eV * np.sum((self._cosines(self.bond_vectors_A(lattice_A, frac, image))
                                                       - self.angle_cos0) ** 2))

    def _cosines(self, vec: np.ndarray) -> np.ndarray:
        a = vec[self.angle_bonds[:, 0]] * self.angle_signs[:, :1]
        b = vec[self.angle_bonds[:, 1]] * self.angle_signs[:, 1:]
        return np.einsum("ij,ij->i", a, b) / (np.linalg.norm(a, axis=1) * np.linalg.norm(b, axis=1))

    def energy_eV(self, lattice_A: np.ndarray, frac: np.ndarray, image: np.ndarray | None = None) -> float:
        """Elastic energy of the cell (eV). ``image`` overrides the stored bond images (bonds that follow
        wrapped atoms)."""
        img = self.image if image is None else image
        d = bond_lengths_A(lattice_A, frac, self.i, self.j, img)
        rep = self.repulsion_eV * (self.rest_length_A / d) ** self.exponent
        spr = 0.5 * self.spring_eV_per_A2 * (d - self.rest_length_A) ** 2
        return float(rep.sum() + spr.sum()) + self.bending_energy_eV(lattice_A, frac, img)


def bond_pairs(i: np.ndarray, j: np.ndarray, n_atoms: int) -> tuple[np.ndarray, np.ndarray]:
    """Every pair of bonds meeting at an atom: ((t, 2) bond indices, (t, 2) signs, +1 where the atom is the bond's
    i, −1 where it is its j). A bond from an atom to its own image meets that atom twice (both arms count)."""
    i, j = np.asarray(i, dtype=int), np.asarray(j, dtype=int)
    atom = np.concatenate([i, j])
    bond = np.concatenate([np.arange(len(i)), np.arange(len(i))])
    sign = np.concatenate([np.ones(len(i)), -np.ones(len(i))])
    order = np.argsort(atom, kind="stable")
    atom, bond, sign = atom[order], bond[order], sign[order]
    starts = np.searchsorted(atom, np.arange(n_atoms + 1))
    pairs, signs = [], []
    for a in range(n_atoms):  # a loop over atoms (a few hundred at most), each vectorised over its arms
        lo, hi = starts[a], starts[a + 1]
        if hi - lo < 2:
            continue
        u, v = np.triu_indices(hi - lo, k=1)
        pairs.append(np.stack([bond[lo + u], bond[lo + v]], axis=1))
        signs.append(np.stack([sign[lo + u], sign[lo + v]], axis=1))
    if not pairs:
        return np.zeros((0, 2), dtype=int), np.zeros((0, 2))
    return np.concatenate(pairs), np.concatenate(signs)


def pair_repulsion_prefactor_eV(band_slope_eV: float, n_repulsive_bonds: int, exponent: float) -> float:
    """A such that the parent is stationary under uniform scaling: dE_band/ds − m Σ_b A = 0.

    ``band_slope_eV`` is dE_band/ds per cell at s = 0 (r → (1 + s) r); ``n_repulsive_bonds`` counts the bonds per
    cell that carry the repulsion. A band energy that does not favour compression (slope ≤ 0) gets A = 0.
    """
    if not exponent > 0:
        raise ParameterError(f"pair-repulsion exponent must be positive, got {exponent!r} (default 4)")
    if n_repulsive_bonds == 0 or band_slope_eV <= 0:
        return 0.0
    return band_slope_eV / (exponent * n_repulsive_bonds)


def exponent_for_bulk_modulus(bulk_modulus_GPa: float, volume_A3: float, band_slope_eV: float,
                              band_curvature_eV: float) -> float:
    """Repulsion exponent m that gives the parent a chosen bulk modulus.

    With E(s) per cell under uniform scaling and V = V0 (1 + s)^3, B = (1 / 9V0) d²E/ds² at s = 0. The fitted
    repulsion contributes (m + 1)·dE_band/ds to d²E/ds², so m = (9 V0 B − E_band'') / E_band' − 1.
    """
    if not bulk_modulus_GPa > 0:
        raise ParameterError(f"bulk modulus must be positive (GPa), got {bulk_modulus_GPa!r}")
    if band_slope_eV <= 0:
        raise ParameterError(
            "cannot calibrate to a bulk modulus: the band energy of this parent does not favour compression "
            f"(dE_band/ds = {band_slope_eV:.4g} eV), so no repulsion is needed to hold it"
        )
    b = bulk_modulus_GPa * GPA_IN_EV_PER_A3
    m = (9 * volume_A3 * b - band_curvature_eV) / band_slope_eV - 1
    if not m > 0:
        raise ParameterError(
            f"a bulk modulus of {bulk_modulus_GPa} GPa is below what the band energy alone gives this parent; "
            "no positive repulsion exponent reproduces it — give a larger value or use springs"
        )
    return float(m)


def _spring_per_bond(crystal: Crystal, params, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    springs = np.zeros(len(i))
    for k, (a, b) in enumerate(zip(i, j, strict=True)):
        bp = params.bond(crystal.species[a], crystal.species[b])
        springs[k] = getattr(bp, "spring_eV_per_A2", None) or 0.0
    return springs


def elastic_model_for(crystal: Crystal, params, bonds, repulsion_eV: float, exponent: float,
                      bending_eV: float = 0.0) -> ElasticModel:
    """ElasticModel over the model's bonds (each once): springs where the parameters give one, else repulsion;
    plus, with ``bending_eV`` = κ > 0, the bond-bending term over every pair of those bonds meeting at an atom
    (rest angles from ``crystal``)."""
    keep = unique_bond_mask(bonds.i, bonds.j, bonds.image)
    i, j, image = bonds.i[keep], bonds.j[keep], bonds.image[keep]
    d0 = bond_lengths_A(crystal.lattice_A, crystal.frac, i, j, image)
    springs = _spring_per_bond(crystal, params, i, j)
    rep = np.where(springs > 0, 0.0, float(repulsion_eV))
    el = ElasticModel(i, j, image, d0, rep, springs, float(exponent))
    kappa = float(bending_eV)
    if kappa == 0:
        return el
    if not kappa > 0:
        raise ParameterError(f"the bond-bending constant must be positive or zero, got {kappa!r} eV")
    pairs, signs = bond_pairs(i, j, crystal.n_atoms)
    el = ElasticModel(i, j, image, d0, rep, springs, float(exponent), pairs, signs, np.zeros(len(pairs)), kappa)
    cos0 = el._cosines(el.bond_vectors_A(crystal.lattice_A, crystal.frac)) if len(pairs) else np.zeros(0)
    return ElasticModel(i, j, image, d0, rep, springs, float(exponent), pairs, signs, cos0, kappa)


# ---------------------------------------------------------------------------------------------- bulk modulus
#: Relative uncertainty of the bulk modulus spanned by the verdict's ensemble (±25 %, common practice, no source).
BULK_MODULUS_SPREAD = 0.25


def _composition(species) -> tuple[tuple[str, int], ...]:
    from collections import Counter
    from math import gcd

    counts = Counter(species)
    g = 0
    for n in counts.values():
        g = gcd(g, n)
    return tuple(sorted((el, n // g) for el, n in counts.items()))


def _formula_composition(formula: str) -> tuple[tuple[str, int], ...]:
    import re

    parts = re.findall(r"([A-Z][a-z]?)(\d*)", formula.split(" ")[0])
    return _composition([el for el, n in parts for _ in range(int(n) if n else 1)])


def bulk_modulus_table() -> dict[tuple, tuple[float, str, str]]:
    """Composition → (bulk modulus in GPa, measured phase, source) from data/bulk_moduli_GPa.csv."""
    import csv
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "tb" / "data" / "bulk_moduli_GPa.csv"
    table = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            table[_formula_composition(row["formula"])] = (float(row["bulk_modulus_GPa"]), row["phase"],
                                                          row["source"])
    return table


def cohen_estimate_GPa(crystal: Crystal, nn_distance_A: float, coordination: float) -> float | None:
    """Cohen's bond-length law B = (1971 − 220 λ) d^−3.5 GPa for tetrahedral (4-coordinated) group IV, III–V and
    II–VI solids (M. L. Cohen, Phys. Rev. B 32, 7988 (1985); constants as restated in
    tb/data/bulk_modulus_estimate.md); None where it does not apply."""
    from screener.structure.elements import GROUP

    if abs(coordination - 4) > 1e-6:
        return None
    groups = sorted({GROUP[s] for s in crystal.species})
    ionicity = {(14,): 0, (13, 15): 1, (12, 16): 2}.get(tuple(groups))
    if ionicity is None:
        return None
    return (1971 - 220 * ionicity) * nn_distance_A ** -3.5


def bulk_modulus_for(crystal: Crystal, user_GPa: float | None, nn_distance_A: float, coordination: float
                     ) -> tuple[float | None, str]:
    """(bulk modulus in GPa, where it came from): the user's value, else the bundled table of measured values,
    else Cohen's estimate for tetrahedral semiconductors, else (None, why not)."""
    if user_GPa is not None:
        return float(user_GPa), "given by the user"
    hit = bulk_modulus_table().get(_composition(crystal.species))
    if hit is not None:
        b, phase, source = hit
        return b, f"measured, {phase} phase ({source}; bundled table)"
    est = cohen_estimate_GPa(crystal, nn_distance_A, coordination)
    if est is not None:
        return float(est), "estimated from the bond length (Cohen, Phys. Rev. B 32, 7988 (1985))"
    return None, "no measured value in the bundled table and no published estimate applies"


# ---------------------------------------------------------------------------------------------- shear constants
def shear_constants_table() -> dict[tuple, tuple[float, float, float, str, str]]:
    """(composition, space-group number) → (C11, C12, C44 in GPa, measured phase, source) from
    data/shear_constants_GPa.csv."""
    import csv
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "tb" / "data" / "shear_constants_GPa.csv"
    table = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            table[(_formula_composition(row["formula"]), int(row["space_group"]))] = (
                float(row["c11_GPa"]), float(row["c12_GPa"]), float(row["c44_GPa"]), row["phase"], row["source"])
    return table


def shear_constants_for(crystal: Crystal, space_group_number: int) -> tuple[float, float, float, str, str] | None:
    """Measured (C11, C12, C44 GPa, phase, source) of the parent's composition in the parent's own space group,
    or None (no row, or the measured phase is another structure)."""
    return shear_constants_table().get((_composition(crystal.species), int(space_group_number)))


def bending_for_shear(c44_GPa: float, cprime_GPa: float, c44_per_kappa_GPa: float, cprime_per_kappa_GPa: float,
                      c44_measured_GPa: float, cprime_measured_GPa: float) -> float:
    """The bond-bending constant κ (eV): the smallest κ ≥ 0 for which the model's C44 and C' = (C11 − C12)/2 both
    reach their measured values, given their values without the term and what one eV of κ adds to each (the
    term is quadratic in the strain, so each constant is linear in κ). A constant the term cannot raise is left
    as it is; a model already as stiff as measured gets κ = 0 (the term never softens)."""
    need = [0.0]
    for have, per, want in ((c44_GPa, c44_per_kappa_GPa, c44_measured_GPa),
                            (cprime_GPa, cprime_per_kappa_GPa, cprime_measured_GPa)):
        if per > 1e-12 and want > have:
            need.append((want - have) / per)
    return float(max(need))
