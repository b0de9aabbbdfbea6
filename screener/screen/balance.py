"""Energy comparator: E_total(λ) = E_band(λ) + E_elastic(λ) along a distortion family, optimum and checks.

The parent is evaluated in the same supercell, on the same k-mesh and with the same bond list as every distorted
member, so systematic errors of the mesh largely cancel in ΔE. Bonds follow atoms: the pairs that interact are
fixed at λ = 0 and keep interacting (with distance-dependent hoppings) as atoms move.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import minimize_scalar

from screener.bz.kmesh import MAX_ORBITAL_KPOINTS, mesh_from_spacing, orbital_kpoints
from screener.screen.closure import ElasticModel, bond_lengths_A, elastic_model_for
from screener.screen.generators import DistortionFamily, follow_bonds
from screener.screen.parent import Parent, ParentEnergetics, parent_energetics  # noqa: F401  (re-exported)
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal
from screener.structure.symmetry import analyse


@dataclass(frozen=True)
class CandidateResult:
    """Outcome of one distortion family."""

    generator: str
    """Generator name."""
    description: str
    """What moves where."""
    q_frac: tuple[float, float, float]
    """Wave-vector, fractions of the parent's reciprocal vectors."""
    q_label: str
    """q as exact fractions."""
    supercell_atoms: int
    """Atoms in the commensurate supercell."""
    amplitude_A: float
    """Optimum amplitude λ* = largest atomic displacement from the parent, Å."""
    delta_E_meV_per_atom: float
    """E_total(λ*) − E_total(0), meV/atom (negative = distortion favoured)."""
    delta_E_band_meV_per_atom: float
    """Band part of ΔE, meV/atom."""
    delta_E_elastic_meV_per_atom: float
    """Elastic part of ΔE, meV/atom."""
    gap_eV: float
    """Band gap at E_F of the optimum structure, eV (0 for a metal)."""
    space_group_symbol: str
    """Space group of the optimum structure (Hermann–Mauguin)."""
    space_group_number: int
    """Space group number of the optimum structure."""
    shell_distances_A: tuple[float, ...]
    """Sorted distinct lengths of the parent's nearest-neighbour bonds in the optimum structure, Å."""
    converged: bool
    """Whether ΔE changed by less than the tolerance on the last mesh refinement."""
    kmesh: tuple[int, int, int]
    """Finest k-mesh used (supercell reciprocal basis)."""
    verdict: str
    """'unstable', 'marginal' or 'stable'."""
    note: str
    """Anything the reader should know (edge of scan, unconverged, …)."""
    scan_amplitude_A: tuple[float, ...]
    """Amplitudes of the coarse scan, Å."""
    scan_delta_E_meV_per_atom: tuple[float, ...]
    """Total ΔE along the scan, meV/atom."""
    scan_delta_E_band_meV_per_atom: tuple[float, ...]
    """Band part along the scan, meV/atom."""
    scan_delta_E_elastic_meV_per_atom: tuple[float, ...]
    """Elastic part along the scan, meV/atom."""
    delta_E_range_meV_per_atom: tuple[float, float]
    """(lowest, highest) ΔE at the optimum over the members of the closure's uncertainty range, meV/atom (0 for a
    member that gains nothing). The nominal member's value is the final mesh's; the others come from the last mesh
    but one of a converged refinement (``curve_kmesh``), within the convergence tolerance of the final mesh."""
    distorting_fraction: float
    """Fraction of the closure's members that gain more than the threshold."""
    member_delta_E_meV_per_atom: tuple[float, ...]
    """ΔE at each member's own optimum, meV/atom, in the order of ParentEnergetics.ensemble."""
    kmesh_error_meV_per_atom: float
    """Change of ΔE on the last mesh refinement, meV/atom (0 when no refinement was needed; NaN if none was made)."""
    cell_strain: float
    """Relaxed volume-conserving uniaxial cell strain ε at the optimum (0 when the cell is fixed)."""
    structure: Crystal = field(repr=False)
    """The optimum structure."""
    bonds: object = field(repr=False, default=None)
    """model.BondList of the optimum: the parent's bonds, followed to the displaced atoms."""
    curve_amplitude_A: tuple[float, ...] = ()
    """Amplitudes of ΔE(λ) on the mesh the closure range comes from (see ``curve_kmesh``), Å."""
    curve_delta_E_meV_per_atom: tuple[float, ...] = ()
    """Nominal ΔE(λ) on that mesh, meV/atom."""
    curve_range_meV_per_atom: tuple[tuple[float, ...], tuple[float, ...]] = ((), ())
    """(lowest, highest) ΔE(λ) over the members of the verdict's range on that mesh, meV/atom."""
    curve_kmesh: tuple[int, int, int] = (0, 0, 0)
    """k-mesh of that curve (supercell reciprocal basis): the last mesh but one of a converged refinement, else
    the final mesh (or the scan mesh when no refinement was needed)."""


# --------------------------------------------------------------------------------------------- machinery
#: Largest uniaxial cell strain tried when a family relaxes its cell (common practice, no source).
MAX_STRAIN = 0.25


class _Evaluator:
    """Evaluates band and elastic energies of a family's members at fixed bonds and mesh."""

    def __init__(self, family: DistortionFamily, params, elastic_prefactor_eV: float, exponent: float,
                 settings: ScreenSettings, bonds=None, reference_rotations=None, ensemble=(), bending_eV: float = 0.0):
        from screener.tb.bonds import find_bonds
        from screener.tb.model import build_model

        self.family = family
        self.params = params
        self.settings = settings
        ref = family.reference
        # the parent's bonds copied into the supercell when given (bonds follow atoms); else the bond rules
        self.bonds = find_bonds(ref, params) if bonds is None else bonds
        # symmetry of the undistorted reference, when already known from the parent (no new search at λ = 0)
        self.reference_rotations = reference_rotations
        self.model0 = build_model(ref, params, bonds=self.bonds)
        self.elastic = elastic_model_for(ref, params, self.bonds, elastic_prefactor_eV, exponent, bending_eV)
        # the closure's uncertainty range: one elastic model per member (geometry only, no diagonalisation)
        self.members = [elastic_model_for(ref, params, self.bonds, a, m, k) for _, a, m, k in ensemble] or [
            self.elastic]
        self.n_atoms = ref.n_atoms
        self._build = build_model
        self._member_rotations = None
        self._members_at: dict[tuple[float, float], tuple[Crystal, np.ndarray]] = {}
        self._models: dict[tuple[float, float], object] = {}

    def _at(self, amplitude_A: float, strain: float) -> tuple[Crystal, np.ndarray]:
        """family.at_with_shift(λ, ε), built once per (λ, ε): the band energy on every mesh and the closure
        members' elastic energies all ask for the same few members."""
        key = (float(amplitude_A), float(strain))
        if key not in self._members_at:
            self._members_at[key] = self.family.at_with_shift(amplitude_A, strain)
        return self._members_at[key]

    def _model_at(self, amplitude_A: float, strain: float):
        """The tight-binding model of member (λ, ε), built once whatever the meshes it is solved on; its bonds are
        the reference's, followed to the wrapped atoms."""
        key = (float(amplitude_A), float(strain))
        if key not in self._models:
            crystal, shift = self._at(amplitude_A, strain)
            b = self.bonds
            self._models[key] = self._build(crystal, self.params,
                                            bonds=type(b)(b.i, b.j, follow_bonds(b.i, b.j, b.image, shift)))
        return self._models[key]

    def _elastic_per_atom(self, el: ElasticModel, crystal: Crystal, shift: np.ndarray) -> float:
        """Elastic energy per atom of ``crystal`` (a family member whose atoms were wrapped by ``shift``)."""
        return el.energy_eV(crystal.lattice_A, crystal.frac, follow_bonds(el.i, el.j, el.image, shift)) / self.n_atoms

    def member_elastic(self, amplitude_A: float, strain: float = 0.0) -> np.ndarray:
        """Elastic energy per atom of every closure member at amplitude λ and strain ε (no diagonalisation)."""
        crystal, shift = self._at(amplitude_A, strain)
        return np.array([self._elastic_per_atom(el, crystal, shift) for el in self.members])

    def energies_at(self, amplitude_A: float, strain: float, mesh) -> tuple[float, float, object]:
        """(E_band per atom, E_elastic per atom, BandEnergyResult) at amplitude λ and cell strain ε."""
        from screener.bz.integrate import solve_on_mesh

        crystal, shift = self._at(amplitude_A, strain)
        model = self._model_at(amplitude_A, strain)
        # k-points may only be folded by symmetries the distorted structure really has: a tolerance above the
        # displacement would lend it the parent's symmetry
        symprec = self.settings.symprec_A if amplitude_A == 0 else min(self.settings.symprec_A, 0.1 * amplitude_A)
        if amplitude_A == 0 and strain == 0:
            rotations = self.reference_rotations
        elif strain == 0:
            # every member at λ > 0 moves the atoms along the same pattern in the same cell, so they share one
            # point group: found once (at the first such member) and reused for the others' meshes
            if self._member_rotations is None:
                from screener.structure.symmetry import analyse

                self._member_rotations = analyse(crystal, symprec).rotations
            rotations = self._member_rotations
        else:
            rotations = None
        res = solve_on_mesh(model, mesh, method=self.settings.method, width_eV=self.settings.width_eV,
                            symprec=symprec, rotations=rotations)
        return res.band_energy_eV / self.n_atoms, self._elastic_per_atom(self.elastic, crystal, shift), res

    def energies(self, amplitude_A: float, mesh) -> tuple[float, float, object, float]:
        """(E_band, E_elastic per atom, BandEnergyResult, strain) at amplitude λ; the cell strain is relaxed when
        the family has a strain axis (bounded 1-D minimisation, |ε| ≤ MAX_STRAIN), else 0."""
        if self.family.strain_axis is None or amplitude_A == 0:
            return (*self.energies_at(amplitude_A, 0.0, mesh), 0.0)
        found = {}

        def total(eps):
            found[eps] = self.energies_at(amplitude_A, eps, mesh)
            return found[eps][0] + found[eps][1]

        minimize_scalar(total, bounds=(-MAX_STRAIN, MAX_STRAIN), method="bounded", options={"xatol": 1e-4})
        eps = min(found, key=lambda e: found[e][0] + found[e][1])  # best strain tried, whatever the solver returned
        return (*found[eps], float(eps))


def family_mesh(family: DistortionFamily, k_step_per_A: float, periodic) -> tuple[int, int, int]:
    """Γ-centred supercell mesh from a k-spacing, each size rounded up to a multiple of q's denominator.

    The parent's bands fold onto the supercell zone boundary, where the distortion opens its gap; a mesh that
    contains those points samples the gap opening and the folded Fermi level of the parent alike.
    """
    from fractions import Fraction

    den = int(np.lcm.reduce([Fraction(x).limit_denominator(24).denominator for x in family.q_frac]))
    mesh = mesh_from_spacing(family.reference, k_step_per_A, periodic)
    return tuple(int(-(-n // den) * den) if p and n > 1 or (p and den > 1) else int(n)
                 for n, p in zip(mesh, periodic, strict=True))


def evaluate_family(family: DistortionFamily, context: Parent, progress=None) -> CandidateResult:
    """Scan the amplitude, minimise, check k-mesh convergence and describe the optimum.

    ``context`` is the Parent the family was generated from: its parameters, settings, energetics and bond set
    (copied into the family's supercell) are used, so nothing about the parent is derived again.
    """
    params, settings, parent = context.params, context.settings, context.energetics
    ref = family.reference
    m = family.supercell_matrix
    ev = _Evaluator(family, params, parent.repulsion_eV, parent.pair_exponent, settings,
                    bonds=context.supercell_bonds(m, ref), reference_rotations=context.supercell_rotations(m),
                    ensemble=parent.ensemble, bending_eV=parent.bending_eV)
    mesh = family_mesh(family, settings.k_step_per_A, ev.model0.periodic)
    nn = context.supercell_shells(m, ref)
    d_min = float(nn.distance_A.min())
    lam_max = settings.max_amplitude_fraction * d_min
    lams = np.linspace(0.0, lam_max, int(settings.n_scan) + 1)

    def cached(evaluator):
        """evaluator.energies(λ, mesh), each (λ, mesh) computed once and counted on the progress bar."""
        cache: dict[tuple, tuple[float, float, object, float]] = {}

        def energy(lam: float, m=mesh):
            key = (round(float(lam), 10), tuple(m))
            if key not in cache:
                cache[key] = evaluator.energies(lam, m)
                if progress is not None:
                    progress.update(1)
            return cache[key]

        return energy

    e_at = cached(ev)

    # the other published set of universal hoppings, with its own closure fitted to the same bulk modulus, is part
    # of the verdict's uncertainty range (fixed-cell families only)
    alt = context.alternative_energetics if family.strain_axis is None else None
    ev_alt, e_alt = None, None
    if alt is not None:
        # two separate checks, not their cross product: the closure's range with the parent's own hoppings, and
        # the other hopping set with its nominal closure
        ev_alt = _Evaluator(family, context.alternative_params, alt.repulsion_eV, alt.pair_exponent, settings,
                            bonds=ev.bonds, reference_rotations=ev.reference_rotations,
                            ensemble=alt.ensemble[len(alt.ensemble) // 2:len(alt.ensemble) // 2 + 1],
                            bending_eV=alt.bending_eV)
        e_alt = cached(ev_alt)

    e0b, e0e, _, _ = e_at(0.0)
    step = lams[1]
    while True:
        scan = np.array([e_at(x)[:2] for x in lams])
        band = (scan[:, 0] - e0b) * 1e3
        elas = (scan[:, 1] - e0e) * 1e3
        total = band + elas
        k = int(np.argmin(total))
        # energy still falling at the last amplitude: extend the scan, up to the hard limit
        if k < len(lams) - 1 or lams[-1] + step > settings.amplitude_limit_fraction * d_min + 1e-12:
            break
        lams = np.append(lams, lams[-1] + step * np.arange(1, int(settings.n_scan) // 2 + 2))
        lams = lams[lams <= settings.amplitude_limit_fraction * d_min + 1e-12]
    lam_max = float(lams[-1])
    thr, tol = settings.threshold_meV_per_atom, settings.stable_tolerance_meV_per_atom
    note = []

    def member_totals(m, upto=np.inf, alt_near=None, own_near=None):
        """(n_members, n_amplitudes) ΔE of every closure member along the scan amplitudes on mesh m, meV/atom:
        the closure's range with the parent's hoppings, then (if any) with the other universal set. With
        ``alt_near`` / ``own_near`` (amplitude indices, 0 among them) the other / own set is only evaluated there
        (NaN elsewhere)."""
        xs = lams[lams <= upto + 1e-12]
        rows = []
        for evaluator, energy in ((ev, e_at), (ev_alt, e_alt)):
            if evaluator is None:
                continue
            near = own_near if evaluator is ev else alt_near
            use = np.arange(len(xs)) if near is None else np.array(sorted(near))
            use = use[use < len(xs)]
            b = np.array([energy(xs[i], m)[0] for i in use])
            el = np.array([evaluator.member_elastic(xs[i], energy(xs[i], m)[3]) for i in use])
            block = np.full((el.shape[1], len(xs)), np.nan)
            block[:, use] = ((b - b[0])[None, :] + (el - el[0]).T) * 1e3
            rows.append(block)
        return xs, np.concatenate(rows)

    _, coarse_members = member_totals(mesh)
    if k == len(lams) - 1:
        note.append(f"optimum at the edge of the scan (λ ≥ {lam_max:.3f} Å = "
                    f"{settings.amplitude_limit_fraction:g} of the shortest bond): the distortion may be larger "
                    "than this model can follow")
        lam_opt = float(lams[k])
    elif k == 0:
        lam_opt = 0.0  # the scan's lowest point is the parent: no gain to polish for the nominal closure
    else:
        lam_opt = _polish(lams[k - 1:k + 2], lambda x: sum(e_at(x)[:2]))
        if (sum(e_at(lam_opt)[:2]) - (e0b + e0e)) * 1e3 > -tol:
            lam_opt = 0.0  # no gain worth the name for the nominal closure
    # where the nominal closure gains nothing but another member of its range does, the mesh is converged at
    # that member's optimum, so a softer closure's gain is judged on a converged mesh too
    lam_ref = lam_opt
    if lam_opt == 0.0 and np.min(coarse_members) < -tol:
        lam_ref = float(lams[np.unravel_index(np.argmin(coarse_members), coarse_members.shape)[1]])

    # k-mesh convergence of ΔE at λ_ref: parent and distorted structure on the same, successively finer meshes;
    # converged when two successive refinements change ΔE by less than the tolerance
    def delta(m, lam):
        pb, pe, _, _ = e_at(0.0, m)
        b, e, r, _ = e_at(lam, m)
        return (b - pb) * 1e3, (e - pe) * 1e3, r

    coarse_mesh = mesh
    previous_mesh = mesh  # the last mesh but one of the refinement sequence
    d_band, d_el, res_opt = delta(mesh, lam_ref)
    converged = lam_ref == 0.0
    residual = 0.0 if converged else float("nan")
    passes = 0
    spacing = settings.k_step_per_A
    for _ in range(int(settings.max_refinements)):
        if converged:
            break
        spacing *= settings.refine_factor
        finer = family_mesh(family, spacing, ev.model0.periodic)
        if finer == mesh:
            continue
        if np.prod(finer) > settings.max_kpoints:
            note.append(f"mesh refinement stopped at the {settings.max_kpoints}-point limit")
            break
        if orbital_kpoints(finer, ev.model0.n_orbitals) > MAX_ORBITAL_KPOINTS:
            note.append(f"mesh refinement stopped at the limit of {MAX_ORBITAL_KPOINTS:.0e} orbitals × k-points")
            break
        nb, ne, nr = delta(finer, lam_ref)
        residual = abs((nb + ne) - (d_band + d_el))
        passes = passes + 1 if residual < settings.convergence_meV_per_atom else 0
        converged = passes >= 2
        previous_mesh = mesh
        mesh, d_band, d_el, res_opt = finer, nb, ne, nr
    if not converged:
        note.append(f"ΔE not converged to {settings.convergence_meV_per_atom} meV/atom on two successive meshes "
                    f"(last mesh {mesh}, last change {residual:.2f} meV/atom)")
    # a converged refinement's last mesh but one: ΔE there is within the convergence tolerance of the final mesh's
    range_mesh = previous_mesh if converged and previous_mesh != coarse_mesh else mesh
    if lam_opt > 0 and mesh != coarse_mesh:
        # the amplitude came from the coarse scan: polish it one scan step either side on that mesh (the location
        # of a minimum moves little with the mesh, and an error δ in it changes ΔE only by ½ E'' δ²); its ΔE is
        # then the final mesh's
        around = np.clip([lam_opt - step, lam_opt, lam_opt + step], 0.0, lam_max)
        lam_opt = _polish(around, lambda x: sum(e_at(x, range_mesh)[:2]))
    if lam_opt > 0:
        d_band, d_el, res_opt = delta(mesh, lam_opt)
    delta_total = d_band + d_el
    if delta_total > -tol:
        # no gain on the final mesh: shown as the parent (λ = 0), whatever the coarse scan suggested
        lam_opt, d_band, d_el, delta_total = 0.0, 0.0, 0.0, 0.0
        res_opt = e_at(0.0, mesh)[2]

    # the closure's uncertainty range (amplitudes up to a little beyond the optimum), on the last mesh but one of
    # a converged refinement: ΔE at λ_ref changed by less than the convergence tolerance from there to the final
    # mesh, so the members' gains carry that accuracy for a third of the diagonalisation work; the nominal
    # member's ΔE is the final mesh's, polished above (an unconverged sequence keeps its final mesh)
    if lam_ref > 0 and family.strain_axis is None:
        # the other hopping set only around its own coarse optimum (three amplitudes and λ = 0)
        n_own = len(parent.ensemble)
        near = {0}
        for row in coarse_members[n_own:]:
            j = int(np.argmin(row))
            near |= {max(j - 1, 0), j, j + 1}
        # the parent's own closure members too only around their coarse optima (each member's minimum and its
        # neighbours, widened while a member's lowest point on this mesh lies at the edge of what was evaluated):
        # the same minima as evaluating every amplitude, for a fraction of the final-mesh diagonalisations
        own = {0}
        for row in coarse_members[:n_own]:
            j = int(np.argmin(row))
            own |= {max(j - 1, 0), j, j + 1}
        upto = min(lam_max, 2 * lam_ref + 2 * step)
        n_x = int(np.count_nonzero(lams <= upto + 1e-12))

        def edges(rows, window):
            """Neighbours of each row's lowest evaluated point that were not evaluated yet."""
            out = set()
            for row in rows:
                j = int(np.nanargmin(row))
                out |= {i for i in (j - 1, j + 1) if 0 <= i < n_x and i not in window}
            return out

        own, near = {i for i in own if i < n_x}, {i for i in near if i < n_x}
        while True:
            xs, fine = member_totals(range_mesh, upto=upto, alt_near=near, own_near=own)
            add_own = edges(fine[:n_own], own)
            if not add_own:
                break
            own |= add_own
    else:
        xs, fine = lams, coarse_members
        if lam_ref > 0:
            note.append("closure range evaluated on the scan mesh (relaxed cell)")
    nominal_row = len(parent.ensemble) // 2
    done = np.isfinite(fine[nominal_row])
    member_dE = np.minimum([_parabola_minimum(xs, row) for row in fine], 0.0)
    member_dE[nominal_row] = delta_total  # the nominal member, polished above
    d_lo, d_hi = float(member_dE.min()), float(member_dE.max())
    distorting = float(np.mean(member_dE < -thr))
    if np.all(member_dE > -tol):
        verdict = "stable"
    elif converged and np.all(member_dE < -thr):
        verdict = "unstable"
    else:
        verdict = "marginal"
        if not np.all(member_dE < -thr):
            note.append(f"gains beyond {thr:g} meV/atom for {int(round(distorting * len(member_dE)))} of "
                        f"{len(member_dE)} members of the closure range (ΔE {d_lo:.1f} … {d_hi:.1f} meV/atom)")
    if verdict == "unstable" and d_band >= 0:
        # a Peierls-type instability gains band energy; a gain from the closure alone means the fitted repulsion,
        # held under compression by the bands, softens this pattern: an artefact of the closure, not of the bands
        verdict = "marginal"
        note.append(f"the gain comes from the elastic closure, not the bands (ΔE_band = {d_band:+.1f} meV/atom): "
                    "not a band-driven distortion; the model's repulsion is too crude to decide it")

    strain_opt = e_at(lam_opt, mesh)[3]
    if abs(strain_opt) > 0.98 * MAX_STRAIN:
        note.append(f"cell strain at its bound ({strain_opt:+.3f})")
    optimum = family.at_with_shift(lam_opt, strain_opt)
    crystal_opt, shift = optimum
    sym = analyse(crystal_opt, settings.symprec_A)
    img = follow_bonds(nn.i, nn.j, nn.image, shift)
    d_opt = bond_lengths_A(crystal_opt.lattice_A, crystal_opt.frac, nn.i, nn.j, img)
    shells = tuple(float(x) for x in np.unique(np.round(d_opt, 3)))
    return CandidateResult(
        generator=family.generator,
        description=family.description,
        q_frac=family.q_frac,
        q_label=family.q_label,
        supercell_atoms=family.n_atoms,
        amplitude_A=lam_opt,
        delta_E_meV_per_atom=float(delta_total),
        delta_E_band_meV_per_atom=float(d_band),
        delta_E_elastic_meV_per_atom=float(d_el),
        gap_eV=float(res_opt.gap_eV),
        space_group_symbol=sym.symbol,
        space_group_number=sym.number,
        shell_distances_A=shells,
        converged=bool(converged),
        kmesh=tuple(int(x) for x in mesh),
        verdict=verdict,
        note="; ".join(note),
        scan_amplitude_A=tuple(float(x) for x in lams),
        scan_delta_E_meV_per_atom=tuple(float(x) for x in total),
        scan_delta_E_band_meV_per_atom=tuple(float(x) for x in band),
        scan_delta_E_elastic_meV_per_atom=tuple(float(x) for x in elas),
        delta_E_range_meV_per_atom=(d_lo, d_hi),
        distorting_fraction=distorting,
        member_delta_E_meV_per_atom=tuple(float(x) for x in member_dE),
        kmesh_error_meV_per_atom=float(residual),
        # the curve on the verdict's mesh: the amplitudes where the nominal member was evaluated
        curve_amplitude_A=tuple(float(x) for x in xs[done]),
        curve_delta_E_meV_per_atom=tuple(float(x) for x in fine[nominal_row][done]),
        curve_range_meV_per_atom=(tuple(float(x) for x in np.nanmin(fine[:, done], axis=0)),
                                  tuple(float(x) for x in np.nanmax(fine[:, done], axis=0))),
        curve_kmesh=tuple(int(x) for x in (range_mesh if xs is not lams else coarse_mesh)),
        cell_strain=float(strain_opt),
        structure=crystal_opt,
        bonds=type(ev.bonds)(ev.bonds.i, ev.bonds.j, follow_bonds(ev.bonds.i, ev.bonds.j, ev.bonds.image, shift)),
    )


def _parabola_vertex(x, y) -> tuple[float, float] | None:
    """(abscissa, value) of the vertex of the parabola through three points with x0 < x1 < x2, or None when the
    parabola has no minimum inside [x0, x2]."""
    (x0, x1, x2), (y0, y1, y2) = (float(v) for v in x), (float(v) for v in y)
    d = (x0 - x1) * (x0 - x2) * (x1 - x2)
    a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / d
    b = (x2**2 * (y0 - y1) + x1**2 * (y2 - y0) + x0**2 * (y1 - y2)) / d
    c = (x1 * x2 * (x1 - x2) * y0 + x2 * x0 * (x2 - x0) * y1 + x0 * x1 * (x0 - x1) * y2) / d
    if not (a > 0 and x0 <= -b / (2 * a) <= x2):
        return None
    return -b / (2 * a), c - b**2 / (4 * a)


def _polish(x, energy) -> float:
    """Amplitude of the lowest energy among the points x (ascending) and the vertex of the parabola through them:
    the vertex when it is a minimum inside the bracket whose energy, evaluated exactly, is below every sampled
    point; else the best sampled point. ``energy`` is called once per point (it is expected to cache)."""
    x = np.unique(np.asarray(x, dtype=float))
    y = np.array([energy(v) for v in x])
    j = int(np.argmin(y))
    best = float(x[j])
    vertex = _parabola_vertex(x, y) if len(x) == 3 else None
    if vertex is not None and x[0] < vertex[0] < x[2] and energy(vertex[0]) < y[j]:
        best = float(vertex[0])
    return best


def _parabola_minimum(x: np.ndarray, y: np.ndarray) -> float:
    """Lowest value of y on the grid x (NaN = not evaluated), refined by the parabola through the three points
    around it."""
    y = np.asarray(y, dtype=float)
    j = int(np.nanargmin(y))
    best = float(y[j])
    if 0 < j < len(y) - 1 and np.isfinite(y[j - 1]) and np.isfinite(y[j + 1]):
        vertex = _parabola_vertex(x[j - 1:j + 2], y[j - 1:j + 2])
        if vertex is not None:
            best = min(best, float(vertex[1]))
    return best
