"""The parent context: everything about the input structure that the screen needs, worked out once.

A `Parent` is built once per input (`build_parent`) and handed to the candidate generators, the comparator and
the ranking, so none of them analyses the parent's symmetry or searches its neighbours again. It holds the
crystal as given, its symmetry analysis, its standardised primitive cell with the map back to the input setting,
the one neighbour search, the first neighbour shell, the model's bond set, the parameters and (built on first use)
the tight-binding model and the parent's energetics.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from screener.bz.kmesh import mesh_from_spacing
from screener.errors import ParameterError
from screener.screen.closure import (
    BULK_MODULUS_SPREAD,
    bending_for_shear,
    bulk_modulus_for,
    elastic_model_for,
    exponent_for_bulk_modulus,
    pair_repulsion_prefactor_eV,
    shear_constants_for,
)
from screener.screen.settings import ScreenSettings
from screener.structure.crystal import Crystal, supercell_pairs
from screener.structure.neighbours import NeighbourList, nearest_neighbour_bonds
from screener.structure.symmetry import StandardPrimitive, SymmetryInfo, analyse
from screener.structure.symmetry import standardise as standardise_cell
from screener.tb.bonds import BondList, _canonical, bond_search, find_bonds
from screener.tb.params import ParameterSet, default_parameters


@dataclass(frozen=True)
class ParentEnergetics:
    """The parent's band energy, its derivatives under uniform scaling, and the fitted repulsion."""

    fermi_level_eV: float
    """Fermi level of the parent, eV."""
    band_energy_eV_per_atom: float
    """Band energy of the parent per atom, eV."""
    band_slope_eV_per_atom: float
    """dE_band/ds per atom under uniform scaling r → (1 + s) r, eV."""
    band_curvature_eV_per_atom: float
    """d²E_band/ds² per atom, eV."""
    repulsion_eV: float
    """Pair-repulsion prefactor A per repulsive bond, eV."""
    pair_exponent: float
    """Exponent m in use (fitted when a bulk modulus was given)."""
    gap_eV: float
    """Band gap of the parent at E_F, eV (0 for a metal)."""
    kmesh: tuple[int, int, int]
    """k-mesh used for the parent, in its own cell."""
    valence_electrons_per_cell: float
    """Valence electrons the parent's model places in its bands, per cell."""
    closure: str = "equilibrium"
    """'bulk-modulus' (A and m fitted to equilibrium and B) or 'equilibrium' (A fitted, m fixed)."""
    bulk_modulus_GPa: float | None = None
    """Bulk modulus the closure was fitted to, GPa (None for the equilibrium-only fit)."""
    bulk_modulus_source: str = ""
    """Where the bulk modulus came from (user, bundled table with its source, estimate), or why there is none."""
    ensemble: tuple = ()
    """Closure members spanning its uncertainty: (label, A in eV, m, κ in eV) each, κ the member's bond-bending
    constant (0 without the term); the nominal member is the middle one."""
    shear_closure: str = "none"
    """'bond-bending' (κ fitted to measured shear constants) or 'none' (pair terms only)."""
    bending_eV: float = 0.0
    """Bond-bending constant κ of the nominal member, eV (0 without the term)."""
    shear_source: str = ""
    """Which shear closure was used and why: the measured C44 and C' with their source and the model's values
    without and with the term, or why there is no term."""


@dataclass(frozen=True, eq=False)
class Parent:
    """One input structure, analysed once. Build with `build_parent`."""

    crystal: Crystal
    """The cell that is screened: the input's standardised primitive cell (or the input itself when
    ``standardise=False``), in the input's Cartesian frame."""
    params: ParameterSet
    """Tight-binding parameters for its elements."""
    settings: ScreenSettings
    """Numerical settings of the screen."""
    symmetry: SymmetryInfo
    """Space group, operations and the spglib map to the primitive cell (the one symmetry analysis)."""
    primitive: StandardPrimitive
    """Standardised primitive cell and the map back to the input setting."""
    neighbours: NeighbourList
    """The one neighbour search (far enough for the bond rules and the first shell)."""
    shells: NeighbourList
    """First neighbour shell of every atom, both directions (see `nearest_neighbour_bonds`)."""
    bonds: BondList
    """Pairs the model couples, each once."""
    input_crystal: Crystal = None
    """The structure as given."""
    input_symmetry: SymmetryInfo = None
    """Symmetry analysis of the structure as given (the one spglib search)."""

    @cached_property
    def model(self):
        """The parent's TightBindingModel (built on first use)."""
        from screener.tb.model import build_model

        return build_model(self.crystal, self.params, bonds=self.bonds)

    @cached_property
    def energetics(self) -> ParentEnergetics:
        """Band energy, scaling derivatives and fitted repulsion (computed on first use)."""
        return parent_energetics(self)

    @cached_property
    def alternative_params(self) -> ParameterSet | None:
        """The same parameters with the other published set of universal hoppings (Harrison 1980 ↔ 1981), when
        every bond uses the universal law; None when a parameter file sets its own bonds."""
        from dataclasses import replace

        from screener.tb.params import HARRISON_SETS

        if self.params.bond_params:
            return None
        other = [h for h in HARRISON_SETS if h != self.params.harrison_set][0]
        return replace(self.params, harrison_set=other)

    @cached_property
    def alternative_energetics(self) -> ParentEnergetics | None:
        """Energetics and closure of the parent with `alternative_params` (fitted to the same bulk modulus)."""
        alt = self.alternative_params
        return None if alt is None else parent_energetics(self, params=alt)

    @cached_property
    def point_group_cart(self) -> np.ndarray:
        """(n_ops, 3, 3) point-group rotations as Cartesian matrices acting on column vectors."""
        lat = self.crystal.lattice_A
        # x_frac' = R x_frac with r = L^T x  ->  r' = L^T R L^-T r
        return np.einsum("ij,njk,kl->nil", lat.T, self.symmetry.rotations, np.linalg.inv(lat.T))

    def supercell_rotations(self, matrix) -> np.ndarray:
        """Point-group rotations of the undistorted parent written in the supercell ``matrix @ lattice``.

        The parent's operations act on fractional columns, x' = R x; in the supercell basis they read
        M⁻ᵀ R Mᵀ, and those that stay integer map the supercell's lattice, and so its k-mesh, onto itself.
        """
        m = np.asarray(matrix, dtype=float)
        rots = np.einsum("ij,njk,kl->nil", np.linalg.inv(m.T), self.symmetry.rotations, m.T)
        keep = np.all(np.abs(rots - np.round(rots)) < 1e-8, axis=(1, 2))
        return np.round(rots[keep]).astype(int)

    def supercell_bonds(self, matrix, supercell: Crystal) -> BondList:
        """The parent's bond set copied into ``supercell = crystal.supercell(matrix)`` (no new search)."""
        b = self.bonds
        i, j, image = supercell_pairs(self.crystal, matrix, supercell, b.i, b.j, b.image)
        flip = ~_canonical(i, j, image)
        i, j, image = np.where(flip, j, i), np.where(flip, i, j), np.where(flip[:, None], -image, image)
        return BondList(i, j, image, supercell.frac[j] + image - supercell.frac[i])

    def supercell_shells(self, matrix, supercell: Crystal) -> NeighbourList:
        """The parent's first neighbour shell copied into ``supercell`` (both directions, no new search)."""
        s = self.shells
        i, j, image = supercell_pairs(self.crystal, matrix, supercell, s.i, s.j, s.image)
        vec = (supercell.frac[j] + image - supercell.frac[i]) @ supercell.lattice_A
        order = np.lexsort((np.linalg.norm(vec, axis=1), i))
        return NeighbourList(i[order], j[order], image[order], vec[order], np.linalg.norm(vec, axis=1)[order])


def build_parent(crystal: Crystal, params: ParameterSet | None = None,
                 settings: ScreenSettings | None = None, *, standardise: bool = True) -> Parent:
    """Analyse ``crystal`` once: symmetry, standardised primitive cell, neighbours, first shell and bonds.

    With ``standardise`` (the default) everything downstream works on the standardised primitive cell, so the
    same crystal gives the same candidates whatever its origin, cell choice or atom order; its symmetry is
    carried over from the one analysis of the input, not searched again.
    """
    settings = settings or ScreenSettings()
    if params is None:
        params = default_parameters(sorted(set(crystal.species)))
    input_symmetry = analyse(crystal, settings.symprec_A)
    primitive, prim_symmetry = standardise_cell(crystal, input_symmetry)
    cell, symmetry = (primitive.crystal, prim_symmetry) if standardise else (crystal, input_symmetry)
    neighbours = bond_search(cell, params)
    return Parent(
        crystal=cell,
        params=params,
        settings=settings,
        symmetry=symmetry,
        primitive=primitive,
        neighbours=neighbours,
        shells=nearest_neighbour_bonds(cell, neighbours=neighbours),
        bonds=find_bonds(cell, params, neighbours=neighbours),
        input_crystal=crystal,
        input_symmetry=input_symmetry,
    )


def as_parent(parent: Parent | Crystal, symprec: float | None = None) -> Parent:
    """``parent`` itself, or a Parent of a bare Crystal in its own setting (default parameters and settings)."""
    if isinstance(parent, Parent):
        return parent
    settings = ScreenSettings() if symprec is None else ScreenSettings(symprec_A=symprec)
    return build_parent(parent, settings=settings, standardise=False)


def parent_energetics(parent: Parent, step: float = 0.004, params: ParameterSet | None = None) -> ParentEnergetics:
    """Band energy of the parent and the pair repulsion that holds it in equilibrium under uniform scaling.

    ``params`` replaces the parent's parameters (same bonds), e.g. for the other set of universal hoppings.
    """
    from screener.bz.integrate import solve_on_mesh
    from screener.tb.model import build_model

    crystal, settings, bonds = parent.crystal, parent.settings, parent.bonds
    if params is None:
        params, model = parent.params, parent.model
    else:
        model = build_model(crystal, params, bonds=bonds)
    mesh = mesh_from_spacing(crystal, settings.k_step_per_A * settings.refine_factor, model.periodic)

    def e_band(s):
        # uniform scaling keeps every symmetry: the parent's rotations reduce the mesh
        m = model if s == 0 else build_model(crystal.replace(lattice_A=crystal.lattice_A * (1 + s)), params,
                                             bonds=bonds)
        return solve_on_mesh(m, mesh, method=settings.method, width_eV=settings.width_eV,
                             symprec=settings.symprec_A, rotations=parent.symmetry.rotations)

    r0, rp, rm = e_band(0.0), e_band(step), e_band(-step)
    n = crystal.n_atoms
    slope = (rp.band_energy_eV - rm.band_energy_eV) / (2 * step)
    curv = (rp.band_energy_eV - 2 * r0.band_energy_eV + rm.band_energy_eV) / step**2
    el = elastic_model_for(crystal, params, bonds, 1.0, settings.pair_exponent)
    n_rep = int(np.count_nonzero(el.repulsion_eV))
    closure, ensemble = settings.closure, []
    shells = parent.shells
    coordination = len(shells.i) / crystal.n_atoms
    nn = float(shells.distance_A.min()) if len(shells.i) else float("nan")
    b_gpa, b_source = bulk_modulus_for(crystal, settings.bulk_modulus_GPa, nn, coordination)
    if not all(model.periodic):
        # a chain or a layer in vacuum has no bulk modulus of its own: the cell volume is mostly vacuum
        b_gpa, b_source = None, "a chain or layer in vacuum has no bulk modulus"
    if closure == "bulk-modulus" and b_gpa is not None and slope > 0:
        try:
            for label, f in (("B − 25 %", 1 - BULK_MODULUS_SPREAD), ("B", 1.0), ("B + 25 %", 1 + BULK_MODULUS_SPREAD)):
                m = exponent_for_bulk_modulus(b_gpa * f, crystal.volume_A3, slope, curv)
                ensemble.append((f"{label} = {b_gpa * f:.1f} GPa", pair_repulsion_prefactor_eV(slope, n_rep, m), m,
                                 0.0))
        except ParameterError as exc:
            if settings.bulk_modulus_GPa is not None:
                raise
            b_source += f"; not usable ({exc}): equilibrium-only fit used"
            closure, ensemble = "equilibrium", []
    elif closure == "bulk-modulus":
        closure = "equilibrium"
        if slope <= 0:
            b_source += "; the band energy does not favour compression, so no repulsion is fitted"
        b_source += "; equilibrium-only fit used"
    if closure == "equilibrium":
        b_gpa = None if settings.bulk_modulus_GPa is None else b_gpa
        m0 = settings.pair_exponent
        # the exponent range m ± 1 around the fixed exponent, in both directions (common practice, no source)
        for label, m in (("m − 1", max(m0 - 1.0, 0.5)), ("m", m0), ("m + 1", m0 + 1.0)):
            ensemble.append((f"{label} = {m:g}", pair_repulsion_prefactor_eV(slope, n_rep, m), m, 0.0))
    ensemble, shear_closure, shear_source = _fit_bending(parent, params, model, mesh, r0.band_energy_eV, ensemble)
    _, a, exponent, kappa = ensemble[1]
    return ParentEnergetics(
        fermi_level_eV=r0.fermi_level_eV,
        band_energy_eV_per_atom=r0.band_energy_eV / n,
        band_slope_eV_per_atom=slope / n,
        band_curvature_eV_per_atom=curv / n,
        repulsion_eV=a,
        pair_exponent=float(exponent),
        gap_eV=r0.gap_eV,
        kmesh=tuple(mesh),
        valence_electrons_per_cell=float(model.n_electrons),
        closure=closure,
        bulk_modulus_GPa=b_gpa,
        bulk_modulus_source=b_source,
        ensemble=tuple(ensemble),
        shear_closure=shear_closure,
        bending_eV=float(kappa),
        shear_source=shear_source,
    )


#: Strain step of the finite differences the shear fit uses (the default of `strain_stiffness`, so the fitted model
#: reproduces the measured constants there to rounding).
SHEAR_FIT_STEP = 0.005


def _fit_bending(parent: Parent, params: ParameterSet, model, mesh, band0_eV: float, ensemble: list
                 ) -> tuple[list, str, str]:
    """Each closure member with its bond-bending constant κ fitted to the measured shear constants of the parent's
    phase (`bending_for_shear`), or unchanged with the reason there is none. Returns (members, shear closure, what
    was used)."""
    from screener.screen.modes import EV_PER_A3_IN_GPA, cube_axes, cubic_shear_strains, strained_band_energy_eV

    crystal, settings, bonds = parent.crystal, parent.settings, parent.bonds
    hit = shear_constants_for(crystal, parent.symmetry.number)
    if hit is None:
        return ensemble, "none", ("no measured shear constants of this composition in this space group in the "
                                  "bundled table: pair terms only, no bond-bending term")
    c11, c12, c44, phase, source = hit
    cp = 0.5 * (c11 - c12)
    axes = cube_axes(parent.point_group_cart)
    if not all(model.periodic) or axes is None:
        return ensemble, "none", ("measured shear constants exist but the cell is not a cubic 3-D crystal: no bending "
                                  "term")
    h, vol, frac = SHEAR_FIT_STEP, crystal.volume_A3, crystal.frac
    strains = cubic_shear_strains(axes, h)
    per = (1.0 / (vol * h * h), 1.0 / (4 * vol * h * h))  # second difference → C44, → C'
    rots = parent.symmetry.rotations

    def shear_constants(energy) -> list[float]:
        """(C44, C') in GPa of an energy function of the strain tensor, by central second differences."""
        return [(energy(e) - 2 * energy(np.zeros((3, 3))) + energy(-e)) * f * EV_PER_A3_IN_GPA
                for e, f in zip(strains, per, strict=True)]

    def band(strain):
        if not np.any(strain):
            return band0_eV
        return strained_band_energy_eV(crystal, params, bonds, settings, mesh, rots, strain)

    band_c = shear_constants(band)
    unit = elastic_model_for(crystal, params, bonds, 0.0, 1.0, bending_eV=1.0)
    bend_c = shear_constants(lambda e: unit.bending_energy_eV(crystal.lattice_A @ (np.eye(3) + e), frac))
    out, notes = [], []
    for label, a, m, _ in ensemble:
        el = elastic_model_for(crystal, params, bonds, a, m)
        pair_c = shear_constants(lambda e, el=el: el.energy_eV(crystal.lattice_A @ (np.eye(3) + e), frac))
        c0 = [b + q for b, q in zip(band_c, pair_c, strict=True)]
        kappa = bending_for_shear(c0[0], c0[1], bend_c[0], bend_c[1], c44, cp)
        out.append((label, a, m, kappa))
        notes.append((c0, [x + kappa * u for x, u in zip(c0, bend_c, strict=True)], kappa))
    (c0, c1, kappa) = notes[len(notes) // 2]
    if not any(k > 0 for _, _, k in notes):
        return out, "none", (f"the pair closure already reaches the measured shear constants of {phase} (model C44 "
                             f"{c0[0]:.1f} ≥ {c44:g}, C' {c0[1]:.1f} ≥ {cp:.4g} GPa, clamped ions; {source}; bundled "
                             "table): no bond-bending term")
    text = (f"bond bending fitted to the measured shear constants of {phase} (C44 = {c44:g}, C' = {cp:.4g} GPa; "
            f"{source}; bundled table): nominal κ = {kappa:.4g} eV; model C44 {c0[0]:.1f} → {c1[0]:.1f}, "
            f"C' {c0[1]:.1f} → {c1[1]:.1f} GPa (clamped ions)")
    return out, "bond-bending", text
