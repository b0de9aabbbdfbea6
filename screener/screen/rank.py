"""The ranked verdict: every candidate distortion of a parent, most favourable first."""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
import pandas as pd
from tqdm.auto import tqdm

from screener.errors import ParameterError
from screener.screen.balance import (
    CandidateResult,
    ParentEnergetics,
    ScreenSettings,
    evaluate_family,
)
from screener.screen.generators import default_candidates
from screener.screen.parent import build_parent
from screener.structure.crystal import Crystal
from screener.structure.elements import RADIOACTIVE, TOXIC
from screener.tb.model import single_blas_thread

CAUTION = (
    "A screen, not a substitute for DFT or experiment: tight binding with universal parameters is qualitative; "
    "confirm any instability with first-principles phonons or total energies before acting on it."
)


def safety_note(crystal: Crystal) -> str:
    """One line naming toxic or radioactive elements present, or ''."""
    present = set(crystal.species)
    toxic, radioactive = sorted(present & TOXIC), sorted(present & RADIOACTIVE)
    if not toxic and not radioactive:
        return ""
    parts = []
    if toxic:
        parts.append(f"{', '.join(toxic)} (toxic)")
    if radioactive:
        parts.append(f"{', '.join(radioactive)} (radioactive)")
    return (f"Contains {' and '.join(parts)}: follow your lab's safety rules before any synthesis or handling.")


@dataclass(frozen=True)
class RankResult:
    """A parent structure and its candidate distortions, most favourable first."""

    formula: str
    """Formula of the parent cell."""
    space_group_symbol: str
    """Parent space group (Hermann–Mauguin)."""
    space_group_number: int
    """Parent space-group number."""
    valence_electrons_per_cell: float
    """Valence electrons in the parent cell."""
    n_atoms: int
    """Atoms in the parent cell."""
    parent: ParentEnergetics
    """Parent band energy, Fermi level and fitted repulsion."""
    candidates: tuple[CandidateResult, ...]
    """Candidates sorted by ΔE, most negative first."""
    settings: ScreenSettings
    """Numerical settings used."""
    safety: str
    """Safety line for hazardous elements ('' if none)."""
    parent_structure: Crystal
    """The parent structure as screened."""
    params: object
    """The ParameterSet used."""
    alternative: ParentEnergetics | None = None
    """The parent's energetics with the other set of universal hoppings (None when parameters set their own)."""
    alternative_harrison_set: str = ""
    """Name of that other set."""
    screened_atoms: int = 0
    """Atoms in the cell the screen worked on (the input's standardised primitive cell)."""
    notes: tuple[str, ...] = ()
    """Candidate families that could not be built, and similar remarks."""

    def _ensembles(self):
        """(Harrison set, members) of the closure's range: the parameters' own set first, then the other one."""
        out = [(getattr(self.params, "harrison_set", "1980"), self.parent.ensemble)]
        if self.alternative is not None:
            ens = self.alternative.ensemble
            out.append((self.alternative_harrison_set, ens[len(ens) // 2:len(ens) // 2 + 1]))
        return out

    @property
    def fermi_level_eV(self) -> float:
        """Fermi level of the parent, eV."""
        return self.parent.fermi_level_eV

    def table(self) -> pd.DataFrame:
        """The ranked table, one row per candidate (rank 1 = most favourable)."""
        rows = [
            {
                "rank": n,
                "generator": c.generator,
                "q": c.q_label,
                "supercell_atoms": c.supercell_atoms,
                "space_group": f"{c.space_group_symbol} ({c.space_group_number})",
                "displacement_A": round(c.amplitude_A, 4),
                "delta_E_meV_per_atom": round(c.delta_E_meV_per_atom, 3),
                "delta_E_band_meV_per_atom": round(c.delta_E_band_meV_per_atom, 3),
                "delta_E_elastic_meV_per_atom": round(c.delta_E_elastic_meV_per_atom, 3),
                "gap_eV": round(c.gap_eV, 3),
                "shell_distances_A": " / ".join(f"{d:.3f}" for d in c.shell_distances_A),
                "verdict": c.verdict,
                "converged": c.converged,
                "delta_E_range_meV_per_atom": " … ".join(f"{x:.1f}" for x in c.delta_E_range_meV_per_atom),
                "distorting_fraction": round(c.distorting_fraction, 3),
                "kmesh": "x".join(str(k) for k in c.kmesh),
                "note": c.note,
            }
            for n, c in enumerate(self.candidates, start=1)
        ]
        return pd.DataFrame(rows)

    def to_dict(self) -> dict:
        """JSON-ready summary (keys documented in the README)."""
        return {
            "formula": self.formula,
            "space_group": {"symbol": self.space_group_symbol, "number": self.space_group_number},
            "n_atoms": self.n_atoms,
            "volume_per_atom_A3": self.parent_structure.volume_A3 / self.parent_structure.n_atoms,
            "valence_electrons_per_cell": self.valence_electrons_per_cell,
            "fermi_level_eV": self.fermi_level_eV,
            "parent": {
                "band_energy_eV_per_atom": self.parent.band_energy_eV_per_atom,
                "gap_eV": self.parent.gap_eV,
                "kmesh": list(self.parent.kmesh),
                "pair_repulsion_eV": self.parent.repulsion_eV,
                "pair_exponent": self.parent.pair_exponent,
            },
            "closure": {
                "kind": self.parent.closure,
                "bulk_modulus_GPa": self.parent.bulk_modulus_GPa,
                "bulk_modulus_source": self.parent.bulk_modulus_source,
                "shear": self.parent.shear_closure,
                "shear_source": self.parent.shear_source,
                "members": [{"label": lab, "hoppings": f"Harrison {hs}", "pair_repulsion_eV": float(a),
                             "pair_exponent": m, "bending_eV": float(k)}
                            for hs, ens in self._ensembles() for lab, a, m, k in ens],
            },
            "screened_cell_atoms": self.screened_atoms,
            "notes": list(self.notes),
            "candidates": [
                {
                    "generator": c.generator,
                    "description": c.description,
                    "q": list(c.q_frac),
                    "q_label": c.q_label,
                    "supercell_atoms": c.supercell_atoms,
                    "space_group": {"symbol": c.space_group_symbol, "number": c.space_group_number},
                    "displacement_A": c.amplitude_A,
                    "delta_E_meV_per_atom": c.delta_E_meV_per_atom,
                    "delta_E_band_meV_per_atom": c.delta_E_band_meV_per_atom,
                    "delta_E_elastic_meV_per_atom": c.delta_E_elastic_meV_per_atom,
                    "gap_eV": c.gap_eV,
                    "shell_distances_A": list(c.shell_distances_A),
                    "verdict": c.verdict,
                    "converged": c.converged,
                    "delta_E_range_meV_per_atom": list(c.delta_E_range_meV_per_atom),
                    "distorting_fraction": c.distorting_fraction,
                    "member_delta_E_meV_per_atom": list(c.member_delta_E_meV_per_atom),
                    "kmesh_error_meV_per_atom": c.kmesh_error_meV_per_atom,
                    "cell_strain": c.cell_strain,
                    "kmesh": list(c.kmesh),
                    "note": c.note,
                    "scan": {
                        "amplitude_A": list(c.scan_amplitude_A),
                        "delta_E_meV_per_atom": list(c.scan_delta_E_meV_per_atom),
                        "delta_E_band_meV_per_atom": list(c.scan_delta_E_band_meV_per_atom),
                        "delta_E_elastic_meV_per_atom": list(c.scan_delta_E_elastic_meV_per_atom),
                    },
                }
                for c in self.candidates
            ],
            "settings": {
                "k_step_per_A": self.settings.k_step_per_A,
                "method": self.settings.method,
                "threshold_meV_per_atom": self.settings.threshold_meV_per_atom,
                "convergence_meV_per_atom": self.settings.convergence_meV_per_atom,
            },
            "caution": CAUTION,
            "safety": self.safety,
        }


#: Order of verdicts in the ranked table: the most severe first.
SEVERITY = {"unstable": 0, "marginal": 1, "stable": 2}


def _in_input_setting(c: CandidateResult, context) -> CandidateResult:
    """A candidate found on the standardised primitive cell, reported in the input's setting: q in fractions of
    the input's reciprocal vectors, the optimum structure moved back to the input's origin."""
    from dataclasses import replace

    from screener.screen.generators import fraction_label

    m = context.primitive.supercell_matrix
    q_prim = np.asarray(c.q_frac, dtype=float)
    if round(abs(float(np.linalg.det(m)))) == 1:
        q = q_prim @ m.T  # q·r is the same number in either basis: q_in = q_prim Mᵀ
        q = q - np.floor(q + 1e-9)
    else:
        # an input larger than its primitive cell has a finer reciprocal lattice: reduced modulo that one, the
        # zone-boundary waves of the crystal would all read (0, 0, 0) (simple cubic as 2×2×2: R, M and X alike).
        # The shortest representative modulo the crystal's own reciprocal lattice is kept instead, written in the
        # input's reciprocal basis (integers where the wave repeats with the input cell)
        shifts = np.array(list(itertools.product((-1, 0, 1), repeat=3)))
        reps = (q_prim - np.floor(q_prim + 1e-9))[None, :] + shifts
        cart = np.linalg.norm(reps @ context.crystal.reciprocal_A, axis=1)
        ins = reps @ m.T
        # shortest first; among equally short ones, the fewest negative components, then the largest
        order = np.lexsort((*(-ins[:, k] for k in (2, 1, 0)), np.sum(ins < -1e-9, axis=1), np.round(cart, 9)))
        q = ins[order[0]]
    q = np.where(np.abs(q) < 1e-12, 0.0, q)
    s = c.structure
    moved = Crystal(s.lattice_A, context.primitive.to_input_frame(s.cart_A) @ np.linalg.inv(s.lattice_A),
                    s.species, s.labels, min_distance_A=s.min_distance_A)
    b = c.bonds
    bonds = type(b)(b.i, b.j, b.image, s.frac[b.j] + b.image - s.frac[b.i]) if b is not None else None
    return replace(c, q_frac=tuple(float(x) for x in q), q_label=fraction_label(q), structure=moved, bonds=bonds)


def _check_supercell_sizes(q_input, q_primitive, context, settings: ScreenSettings) -> None:
    """Refuse, before any work, a requested wave-vector whose commensurate supercell exceeds
    ``settings.max_supercell_atoms`` atoms (q as given, in the input's basis, and on the screened primitive cell)."""
    from screener.screen.generators import _rationalise, commensurate_supercell, fraction_label

    limit = int(settings.max_supercell_atoms)
    cell = context.crystal
    for q_in, q in zip(q_input, q_primitive, strict=True):
        q = _rationalise(q)
        index = round(float(np.linalg.det(commensurate_supercell(q - np.floor(q + 1e-9), cell.lattice_A))))
        atoms = index * cell.n_atoms
        if atoms > limit:
            raise ParameterError(
                f"--q {fraction_label(q_in)} needs a supercell of {atoms} atoms ({index} × the {cell.n_atoms}-atom "
                f"primitive cell), more than the limit of {limit}; raise it with --max-supercell-atoms "
                f"(max_supercell_atoms in ScreenSettings) if you accept the cost, which grows as atoms³"
            )


def _check_mesh_sizes(families, context, settings: ScreenSettings) -> None:
    """Refuse, before any work, a starting k-mesh of the parent or of a candidate's supercell whose points times
    orbitals exceed ``kmesh.MAX_ORBITAL_KPOINTS`` (the same check `solve_on_mesh` makes on every mesh)."""
    from screener.bz.kmesh import check_mesh_size, mesh_from_spacing
    from screener.screen.balance import family_mesh

    norb = context.model.n_orbitals
    check_mesh_size(mesh_from_spacing(context.crystal, settings.k_step_per_A * settings.refine_factor,
                                      context.model.periodic), norb, f"the parent {context.crystal.formula}")
    for f in families:
        b = context.supercell_bonds(f.supercell_matrix, f.reference)
        # directions no bond crosses get one k-point, as the supercell's model will mark them (tb.model)
        periodic = tuple(bool(x) for x in np.any(b.image != 0, axis=0)) if len(b.i) else (False, False, False)
        index = round(abs(float(np.linalg.det(f.supercell_matrix))))
        check_mesh_size(family_mesh(f, settings.k_step_per_A, periodic), norb * index,
                        f"the {f.generator} candidate at q = {f.q_label} ({f.n_atoms} atoms)")


def rank(crystal: Crystal, params=None, *, generators=None, extra_q=(), settings: ScreenSettings | None = None,
         progress: bool = True, relax_cell: bool = False, n_electrons: float | None = None) -> RankResult:
    """Generate the candidate distortions of ``crystal``, evaluate each and rank them.

    Parameters
    ----------
    crystal : the parent structure.
    params : a ParameterSet (default: built-in universal parameters for the elements present).
    generators : names of generators to run (default: all applicable).
    extra_q : extra longitudinal modulation wave-vectors (fractions of the parent's reciprocal vectors).
    settings : numerical settings (ScreenSettings()).
    progress : show a progress bar on stderr when the work takes more than a second.
    relax_cell : relax the rhombohedral angle together with the rhombohedral split (slower).
    n_electrons : valence electrons per primitive cell of the parent (default: the neutral atoms' count), filling
        the same bands rigidly in the parent and in every candidate (the closure is fitted at this filling).
    """
    context = build_parent(crystal, params, settings)
    if n_electrons is not None:
        from dataclasses import replace

        n_prim = context.crystal.n_atoms
        base = float(sum(context.params.species(s).valence_electrons for s in context.crystal.species))
        shift = (float(n_electrons) - base) / n_prim + context.params.extra_electrons_per_atom
        context = build_parent(crystal, replace(context.params, extra_electrons_per_atom=shift), settings)
    settings, params, sym = context.settings, context.params, context.symmetry
    # --q is given in the input's reciprocal basis; the candidates live on the standardised primitive cell
    m = context.primitive.supercell_matrix
    q_input = [tuple(float(x) for x in np.asarray(q, dtype=float)) for q in extra_q]
    extra_q = [tuple(float(x) for x in np.asarray(q, dtype=float) @ np.linalg.inv(m.T)) for q in extra_q]
    _check_supercell_sizes(q_input, extra_q, context, settings)
    notes: list[str] = []
    families = default_candidates(context, generators, extra_q, settings.symprec_A, relax_cell=relax_cell,
                                  notes=notes)
    _check_mesh_sizes(families, context, settings)
    bar = tqdm(total=None, desc=f"screening {crystal.formula}", unit=" evaluations", delay=1.0,
               disable=not progress, leave=False)
    try:
        with single_blas_thread():
            parent = context.energetics
            results = [evaluate_family(f, context, progress=bar) for f in families]
            alternative = context.alternative_energetics
    finally:
        bar.close()
    results = [_in_input_setting(c, context) for c in results]
    if "soft-mode" not in (generators or ()):
        # say what a "stable" rests on: the named patterns at these q, not a search of every pattern
        qs = sorted({c.q_label for c in results})
        notes.append(f"searched: the {', '.join(sorted({c.generator for c in results}))} patterns at q = "
                     f"{', '.join(qs) or 'none'} (input cell); the survey of every pattern over the whole q-grid "
                     "(--generator soft-mode, several times slower) was not run, so 'stable' means none of these "
                     "patterns gains")
    # the headline is the most severe verdict, then the largest gain
    results.sort(key=lambda c: (SEVERITY[c.verdict], c.delta_E_meV_per_atom, c.generator))
    return RankResult(
        formula=crystal.formula,
        space_group_symbol=sym.symbol,
        space_group_number=sym.number,
        # per cell of the input as given (the screen itself works on the primitive cell)
        valence_electrons_per_cell=parent.valence_electrons_per_cell * crystal.n_atoms / context.crystal.n_atoms,
        n_atoms=crystal.n_atoms,
        parent=parent,
        candidates=tuple(results),
        settings=settings,
        safety=safety_note(crystal),
        parent_structure=crystal,
        params=params,
        alternative=alternative,
        alternative_harrison_set=getattr(context.alternative_params, "harrison_set", ""),
        screened_atoms=context.crystal.n_atoms,
        notes=tuple(notes),
    )


def verdict_summary(result: RankResult) -> str:
    """One line: the best candidate and its verdict."""
    if not result.candidates:
        return f"{result.formula}: no applicable candidate distortion"
    best = result.candidates[0]
    word = {"unstable": "UNSTABLE", "marginal": "marginal", "stable": "stable"}[best.verdict]
    why = ""
    if best.verdict == "marginal":
        if not best.converged:
            why = " (not k-converged)"
        elif best.distorting_fraction < 1:
            thr = result.settings.threshold_meV_per_atom
            own = np.asarray(best.member_delta_E_meV_per_atom[:len(result.parent.ensemble)])
            if np.all(own < -thr):
                why = f" (gain vanishes with the other universal hopping set, Harrison {result.alternative_harrison_set})"
            elif result.parent.closure == "bulk-modulus":
                why = " (gain depends on how stiff the lattice is: not every bulk modulus in ±25 % gives it)"
            else:
                why = " (gain depends on how stiff the lattice is: not every repulsion exponent m ± 1 gives it)"
        else:
            why = " (gain below the threshold)"
    return (f"{result.formula} ({result.space_group_symbol}): {word}{why} — best {best.generator} "
            f"q={best.q_label} → {best.space_group_symbol}, ΔE = {best.delta_E_meV_per_atom:.2f} meV/atom "
            f"(range {best.delta_E_range_meV_per_atom[0]:.1f} … {best.delta_E_range_meV_per_atom[1]:.1f}), "
            f"gap {best.gap_eV:.2f} eV")
