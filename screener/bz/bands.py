"""Band structure along a zone route with orbital character (used by `screener bands` and reports)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.structure.crystal import Crystal
from screener.structure.symmetry import SYMPREC_A


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
    ground = solve_on_mesh(model, symprec=symprec)
    shells, member = orbital_groups(model)
    energies, character = shell_weights(model, path.kfrac, member)
    return BandStructure(crystal, model, path, energies, shells, character, ground)

