"""Band structure along a zone route with orbital character (used by `screener bands` and reports)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.structure.crystal import Crystal
from screener.structure.symmetry import SYMPREC_A
from screener.tb.model import single_blas_thread


@dataclass(frozen=True, eq=False)
class BandStructure:
    """Eigenvalues along a k-path, their orbital-shell character, and the mesh ground state."""

    crystal: Crystal
    """The structure."""
    model: object
    """The TightBindingModel used."""
    path: object
    """routes.ZoneRoute: k-points (fractions of the input cell's reciprocal vectors), ticks, labels."""
    energies_eV: np.ndarray
    """(nk, nb) absolute band energies along the path, ascending, eV."""
    shells: tuple[str, ...]
    """Orbital shells of the basis in order ('s', 'p', 'd')."""
    character: np.ndarray
    """(nk, nb, n_shells) weight of each shell in every state (sums to 1)."""
    ground_state: object
    """integrate.BandEnergyResult on the default mesh (Fermi level, band energy, gap)."""

    @property
    def gap_eV(self) -> float:
        """Band gap from the band edges over the mesh *and* the route through the special points, eV.

        A mesh alone only bounds the gap from above (the true valence-band top lies at or above the mesh's, the
        conduction-band bottom at or below); adding the route catches edges at special points that the mesh
        misses (graphene's bands touch at K). 0 for a metal or a partly filled band; NaN when every band is filled.
        """
        from screener.bz.common import _filled_bands

        g = self.ground_state
        nf = _filled_bands(g.n_electrons, g.spin_degeneracy)
        nb = self.energies_eV.shape[1]
        if nf is not None and nf >= nb:
            return float("nan")
        if nf is None or nf <= 0 or g.gap_eV <= 0:
            return 0.0
        e_mesh = np.asarray(g.eigenvalues_eV)
        vbm = max(float(e_mesh[:, nf - 1].max()), float(self.energies_eV[:, nf - 1].max()))
        cbm = min(float(e_mesh[:, nf].min()), float(self.energies_eV[:, nf].min()))
        return max(cbm - vbm, 0.0)

    @property
    def all_bands_filled(self) -> bool:
        """True when the electrons fill every band of the basis: an insulator whose gap lies beyond the model."""
        return bool(np.isnan(self.gap_eV))


def orbital_groups(model) -> tuple[tuple[str, ...], np.ndarray]:
    """Shell letters of the basis ('s', 'p', 'd', in order of appearance) and (norb, ng) 0/1 membership."""
    shells = [str(name)[0] for name in model.orbital_name]
    names = tuple(dict.fromkeys(shells))
    return names, np.array([[s == g for g in names] for s in shells], dtype=float)


def shell_weights(model, kfrac, member) -> tuple[np.ndarray, np.ndarray]:
    """Eigenvalues (nk, nb) and the weight of each orbital shell in every state (nk, nb, ng)."""
    vals, vecs = model.eigensystem(kfrac)
    # eigenvectors are columns: |c_ob|² summed over the orbitals of each shell (all sites)
    return np.asarray(vals), np.einsum("kob,og->kbg", np.abs(vecs) ** 2, member)


def band_structure(crystal: Crystal, params=None, *, kpoints=None, symprec: float = SYMPREC_A,
                   bonds=None) -> BandStructure:
    """Bands along the default special-point path (or explicit ``kpoints``) and the Fermi level from a mesh.

    ``bonds`` fixes which pairs interact (as the comparator does for a distorted structure); by default the
    parameter rules choose them.
    """
    from screener.bz.integrate import solve_on_mesh
    from screener.bz.routes import zone_route
    from screener.tb.model import build_model
    from screener.tb.params import default_parameters

    if params is None:
        params = default_parameters(list(dict.fromkeys(crystal.species)))
    model = build_model(crystal, params, bonds=bonds)
    path = zone_route(crystal, symprec=symprec, kpoints=kpoints, periodic=model.periodic)
    from screener.bz.kmesh import check_diagonalisation_work

    check_diagonalisation_work(len(path.kfrac), model.n_orbitals, f"the band route of {crystal.formula}")
    with single_blas_thread():
        ground = solve_on_mesh(model, symprec=symprec)
        shells, member = orbital_groups(model)
        energies, character = shell_weights(model, path.kfrac, member)
    return BandStructure(crystal, model, path, energies, shells, character, ground)

