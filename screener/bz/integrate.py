"""Electrons on a k-mesh: occupations, Fermi level, band energy, density of states.

Two families of Brillouin-zone integration are offered:

* smearing — each eigenvalue is broadened into a Fermi–Dirac, Gaussian or Methfessel–Paxton line
  (Methfessel & Paxton, PRB 40, 3616 (1989)); the free energy F = E − σS is reported too, and for Fermi–Dirac and
  Gaussian the band energy is the σ→0 estimate (E + F)/2 (Gillan, J. Phys.: Condens. Matter 1, 689 (1989));
* the linear tetrahedron method with Blöchl's corrections (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994)),
  on the full Γ-centred grid unfolded from the irreducible wedge.

Energies are in eV, counts are electrons (or states) per cell including the spin degeneracy factor
(2, or 1 when spin–orbit coupling doubles the basis). Eigenvalues are expected ascending along the band axis.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.bz.common import (
    _check_eigs,
    _check_n_electrons,
    _check_spin,
    _check_width,
    _gap,
    _norm_method,
)
from screener.bz.fermi import _smeared_fermi_level
from screener.bz.kmesh import IrreducibleMesh
from screener.bz.smearing import _smeared_dos, entropy_term, occupation
from screener.bz.tetra_grid import _TetrahedronGrid
from screener.errors import ParameterError


# ============================================================================================== results
@dataclass(frozen=True, eq=False)
class BandEnergyResult:
    """Fermi level, band energy and gap of a tight-binding model integrated over a k-mesh."""

    fermi_level_eV: float
    """Fermi level, eV (mid-gap for an insulator with the tetrahedron method)."""
    band_energy_eV: float
    """Band energy per cell, eV (Σ occupied ε; for Gaussian/Fermi–Dirac smearing the σ→0 estimate (E+F)/2)."""
    free_energy_eV: float
    """Free energy F = E − σS per cell, eV (equal to the band energy for the tetrahedron method)."""
    n_electrons: float
    """Valence electrons per cell that were placed in the bands."""
    gap_eV: float
    """Band gap on the mesh, eV; 0 for a metal, for a fractional band filling, or with no empty band left."""
    method: str
    """Integration method: 'tetrahedron', 'gaussian', 'fermi-dirac' or 'methfessel-paxton'."""
    width_eV: float
    """Smearing width σ, eV (0 for the tetrahedron method)."""
    mesh: tuple[int, int, int]
    """k-mesh sizes along the three reciprocal vectors."""
    n_kpoints_irreducible: int
    """Number of irreducible k-points the eigenvalues were computed at."""
    smeared_energy_eV: float = float("nan")
    """Raw Σ w f ε per cell, eV, before any σ→0 correction (the band energy itself for the tetrahedron method)."""
    spin_degeneracy: int = 2
    """Electrons per orbital state: 2, or 1 when spin–orbit coupling doubles the basis."""
    occupations: np.ndarray | None = None
    """(M, nb) electrons per cell carried by each irreducible state (k-weight × occupation × spin factor);
    Σ occupations·eigenvalues = smeared_energy_eV (tetrahedron: including Blöchl's corrections)."""
    eigenvalues_eV: np.ndarray | None = None
    """(M, nb) eigenvalues at the irreducible k-points, eV, ascending along the band axis."""
    kmesh: IrreducibleMesh | None = None
    """The irreducible mesh used (mapping, weights), so DOS can be computed without re-diagonalising."""


@dataclass(frozen=True, eq=False)
class DOSResult:
    """Density of states on an energy grid, total and (optionally) projected."""

    energies_eV: np.ndarray
    """(ne,) energy grid, eV."""
    dos_per_eV: np.ndarray
    """(ne,) states per eV per cell, both spins (× spin degeneracy)."""
    states_below: np.ndarray
    """(ne,) integrated DOS: states per cell (both spins) below each energy."""
    projected_per_eV: np.ndarray | None
    """(ne, nproj) projected DOS, states per eV per cell, or None when no projections were given."""
    method: str
    """'tetrahedron', 'gaussian', 'fermi-dirac' or 'methfessel-paxton'."""
    width_eV: float
    """Broadening σ, eV (0 for the tetrahedron method)."""
    spin_degeneracy: int
    """Spin factor included in the DOS (2, or 1 with spin–orbit)."""



# ============================================================================================== integration
def integrate(eigs_ir_eV, kmesh: IrreducibleMesh, n_electrons, *, method="tetrahedron", width_eV=0.05,
              spin_degeneracy=2, reciprocal_A=None, mp_order: int = 1, blochl: bool = True) -> BandEnergyResult:
    """Fermi level and band energy from eigenvalues at the irreducible points of ``kmesh``.

    Parameters
    ----------
    eigs_ir_eV : (M, nb) eigenvalues at ``kmesh.kfrac``, eV, ascending along the band axis.
    kmesh : the irreducible mesh (weights; mapping and grid addresses for the tetrahedron method).
    n_electrons : electrons per cell, 0 … spin_degeneracy × nb.
    method : 'tetrahedron' (default), 'gaussian', 'fermi-dirac' or 'methfessel-paxton'.
    width_eV : smearing width σ, eV (ignored by the tetrahedron method).
    spin_degeneracy : 2, or 1 when spin–orbit coupling doubles the basis.
    reciprocal_A : (3, 3) reciprocal vectors as rows (no 2π); picks the shortest main diagonal for the tetrahedra.
        Without it the (0,0,0)→(1,1,1) diagonal is used.
    mp_order : order N of the Methfessel–Paxton expansion (default 1).
    blochl : apply Blöchl's correction to the tetrahedron weights (default True).
    """
    method = _norm_method(method)
    g = _check_spin(spin_degeneracy)
    width = _check_width(width_eV, method)
    if int(mp_order) != mp_order or mp_order < 0:
        raise ParameterError(f"mp_order must be a non-negative integer (1 is usual), got {mp_order!r}")
    e = _check_eigs(eigs_ir_eV, kmesh.weights)
    n = _check_n_electrons(n_electrons, e.shape[1], g)
    w = np.asarray(kmesh.weights, dtype=float)
    gap, _, _ = _gap(e, n, g)
    common = dict(n_electrons=n, gap_eV=gap, method=method, mesh=tuple(int(m) for m in kmesh.mesh),
                  n_kpoints_irreducible=int(e.shape[0]), spin_degeneracy=g, eigenvalues_eV=e, kmesh=kmesh)
    if method == "tetrahedron":
        grid = _TetrahedronGrid(e, kmesh, reciprocal_A)
        mu = grid.fermi_level(n, g)
        if n >= g * e.shape[1]:
            occ = g * np.broadcast_to(w[:, None], e.shape).copy()
        elif n <= 0:
            occ = np.zeros_like(e)
        else:
            occ = g * grid.occupations(mu, blochl=blochl)
        energy = float(np.sum(occ * e))
        return BandEnergyResult(fermi_level_eV=mu, band_energy_eV=energy, free_energy_eV=energy, width_eV=0.0,
                                smeared_energy_eV=energy, occupations=occ, **common)
    mu = _smeared_fermi_level(e, w, n, method, width, g, mp_order)
    if n >= g * e.shape[1]:
        f, s = np.ones_like(e), np.zeros_like(e)
    elif n <= 0:
        f, s = np.zeros_like(e), np.zeros_like(e)
    else:
        x = (e - mu) / width
        f, s = occupation(x, method, mp_order), entropy_term(x, method, mp_order)
    occ = g * w[:, None] * f
    energy = float(np.sum(occ * e))
    free = energy - width * g * float(np.sum(w[:, None] * s))
    # Fermi–Dirac and Gaussian: E(σ) and F(σ) deviate from E(0) by equal and opposite O(σ²) terms, so their mean
    # is the σ→0 estimate (Gillan, J. Phys.: Condens. Matter 1, 689 (1989)). Methfessel–Paxton's E is already
    # accurate to high order in σ (Methfessel & Paxton, PRB 40, 3616 (1989)).
    e0 = energy if method == "methfessel-paxton" else 0.5 * (energy + free)
    return BandEnergyResult(fermi_level_eV=mu, band_energy_eV=e0, free_energy_eV=free, width_eV=width,
                            smeared_energy_eV=energy, occupations=occ, **common)


def solve_on_mesh(model, mesh=None, *, k_step_per_A=0.15, method="tetrahedron", width_eV=0.05,
                  use_symmetry=True, symprec=1e-3, mp_order: int = 1, blochl: bool = True,
                  rotations=None) -> BandEnergyResult:
    """Band energy of a tight-binding model in one call: mesh → irreducible wedge → eigenvalues → integration.

    ``mesh`` defaults to ``kmesh.mesh_from_spacing(model.crystal, k_step_per_A, model.periodic)``; a given
    mesh is forced to 1 along directions the model marks non-periodic; a mesh whose points times the model's orbitals
    exceed ``kmesh.MAX_ORBITAL_KPOINTS`` is refused (ParameterError) before any work. Symmetry reduction uses
    ``kmesh.irreducible_mesh`` (with ``rotations`` of the model's crystal when already known); the tetrahedra are
    split along the crystal's shortest reciprocal diagonal.
    """
    from screener.bz.kmesh import _check_mesh, check_mesh_size, irreducible_mesh, mesh_from_spacing

    method = _norm_method(method)
    periodic = tuple(bool(p) for p in getattr(model, "periodic", (True, True, True)))
    if mesh is None:
        mesh = mesh_from_spacing(model.crystal, k_step_per_A, periodic)
    else:
        mesh = tuple(m if p else 1 for m, p in zip(_check_mesh(mesh), periodic, strict=True))
    # a model without an orbital count (a bare analytic band) counts one orbital per site
    check_mesh_size(mesh, getattr(model, "n_orbitals", model.crystal.n_atoms), model.crystal.formula)
    kmesh = irreducible_mesh(model.crystal, mesh, symprec=symprec, use_symmetry=use_symmetry,
                             rotations=rotations)
    eigs = np.asarray(model.eigenvalues(kmesh.kfrac))
    return integrate(eigs, kmesh, model.n_electrons, method=method, width_eV=width_eV,
                     spin_degeneracy=model.spin_degeneracy, reciprocal_A=model.crystal.reciprocal_A,
                     mp_order=mp_order, blochl=blochl)


# ============================================================================================== DOS
def density_of_states(eigs_ir_eV, kmesh: IrreducibleMesh, energies_eV, *, method="gaussian", width_eV=0.05,
                      weights_projected=None, spin_degeneracy=2, reciprocal_A=None,
                      mp_order: int = 1) -> DOSResult:
    """Total and projected density of states (states per eV per cell, both spins) on an energy grid.

    ``weights_projected`` (M, nb, nproj) holds |ψ|² weights of each irreducible state on each projection
    (orbital, site, …). With a symmetry-reduced mesh a projection must be invariant under the point group
    (e.g. summed over an l-shell and over symmetry-equivalent sites); otherwise pass a mesh built with
    ``use_symmetry=False``.
    """
    method = _norm_method(method)
    g = _check_spin(spin_degeneracy)
    width = _check_width(width_eV, method)
    e = _check_eigs(eigs_ir_eV, kmesh.weights)
    en = np.asarray(energies_eV, dtype=float).reshape(-1)
    if en.size == 0 or not np.all(np.isfinite(en)):
        raise ParameterError("energies_eV must be a non-empty array of finite energies in eV")
    proj = None
    if weights_projected is not None:
        proj = np.asarray(weights_projected, dtype=float)
        if proj.ndim == 2:
            proj = proj[:, :, None]
        if proj.ndim != 3 or proj.shape[:2] != e.shape:
            raise ParameterError(
                f"weights_projected must have shape (n_kpoints, n_bands, n_proj) = ({e.shape[0]}, {e.shape[1]}, …), "
                f"got {np.shape(weights_projected)}"
            )
    if method == "tetrahedron":
        grid = _TetrahedronGrid(e, kmesh, reciprocal_A)
        dos, below, pdos = grid.dos_on_grid(en, proj)
        width = 0.0
    else:
        dos, below, pdos = _smeared_dos(e, np.asarray(kmesh.weights, dtype=float), en, method, width, mp_order,
                                        proj)
    return DOSResult(energies_eV=en, dos_per_eV=g * dos, states_below=g * below,
                     projected_per_eV=None if proj is None else g * pdos, method=method, width_eV=width,
                     spin_degeneracy=g)


