"""Each bond's share of the band energy.

The band energy Σ_nk f_nk ε_nk splits exactly into on-site terms and one term per bond,

    E_b = Σ_nk f_nk · 2 Re[ e^{2πi k·R_b} Σ_{a∈i, c∈j} c*_{a,nk} H^b_{ac} c_{c,nk} ],

the bond-resolved Hamilton population of Dronskowski & Blöchl, J. Phys. Chem. 97, 8617 (1993), integrated up to
the Fermi level (here with the occupations of the band-energy integration, so Σ_b E_b + on-site = E_band exactly).
A negative share lowers the energy (bonding). The same population of the states at E_F (Gaussian-broadened)
says whether the states at the Fermi level are bonding or antibonding across that bond: positive weight at E_F
(antibonding) on a bond means emptying those states, i.e. lengthening that bond, lowers the band energy.
Evaluated on the full mesh (no symmetry folding: a single bond is not invariant under the point group).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.tb.model import bond_blocks

#: Gaussian width used for the population at the Fermi level, eV (common practice, no source).
EF_WIDTH_EV = 0.1
#: |population at E_F| below this (per eV per cell) counts as non-bonding (common practice, no source).
NONBONDING_PER_EV = 1e-3


@dataclass(frozen=True, eq=False)
class BondEnergyResult:
    """Bond-by-bond split of a model's band energy on one k-mesh."""

    bond_energy_eV: np.ndarray
    """(p,) share of the band energy carried by each bond of ``model.bonds``, eV per cell."""
    bond_population_at_EF_per_eV: np.ndarray
    """(p,) Hamilton population of each bond from the states at E_F, eV per eV per cell (> 0: antibonding)."""
    bond_character_at_EF: tuple[str, ...]
    """'bonding', 'antibonding' or 'non-bonding' per bond, from the population at E_F."""
    onsite_energy_eV: float
    """On-site part of the band energy, eV per cell."""
    band_energy_eV: float
    """Σ occupations × eigenvalues on the same mesh, eV per cell."""
    fermi_level_eV: float
    """Fermi level, eV."""
    bond_length_A: np.ndarray
    """(p,) bond lengths, Å."""
    mesh: tuple[int, int, int]
    """k-mesh (full, Γ-centred)."""
    energies_eV: np.ndarray | None = None
    """(ne,) energy grid of the energy-resolved populations, eV (None when not asked for)."""
    bond_population_per_eV: np.ndarray | None = None
    """(ne, p) energy-resolved Hamilton population of each bond (Gaussian-broadened), eV per eV per cell."""


def _bond_blocks(model):
    """[(bond indices, blocks (m, na, nb), orbital rows of i (m, na), orbital cols of j (m, nb))] per species pair."""
    crystal, params, bonds = model.crystal, model.params, model.bonds
    site = np.asarray(model.orbital_site)
    spin = model.spin_degeneracy == 1
    vec = (crystal.frac[bonds.j] + bonds.image - crystal.frac[bonds.i]) @ crystal.lattice_A
    out = []
    for m, blocks in bond_blocks(crystal, params, bonds, vec):
        if spin:  # spin–orbit basis: spin innermost, hoppings spin-diagonal
            blocks = np.einsum("pab,st->pasbt", blocks, np.eye(2)).reshape(len(m), 2 * blocks.shape[1],
                                                                         2 * blocks.shape[2])
        rows = np.array([np.flatnonzero(site == i) for i in bonds.i[m]])
        cols = np.array([np.flatnonzero(site == j) for j in bonds.j[m]])
        out.append((m, blocks, rows, cols))
    return out


def bond_energies(model, mesh, *, method: str = "tetrahedron", width_eV: float = 0.05,
                  ef_width_eV: float = EF_WIDTH_EV, energies_eV=None, chunk: int = 512) -> BondEnergyResult:
    """Split ``model``'s band energy on the Γ-centred ``mesh`` into bonds (see module docstring).

    ``energies_eV`` (optional grid) also returns the energy-resolved populations, broadened by ``ef_width_eV``.
    """
    from screener.bz.integrate import integrate
    from screener.bz.kmesh import check_mesh_size, irreducible_mesh

    periodic = tuple(bool(p) for p in model.periodic)
    mesh = tuple(int(m) if p else 1 for m, p in zip(mesh, periodic, strict=True))
    check_mesh_size(mesh, model.n_orbitals, model.crystal.formula)
    kmesh = irreducible_mesh(model.crystal, mesh, use_symmetry=False)
    k = kmesh.kfrac
    vals, vecs = model.eigensystem(k)
    res = integrate(vals, kmesh, model.n_electrons, method=method, width_eV=width_eV,
                    spin_degeneracy=model.spin_degeneracy, reciprocal_A=model.crystal.reciprocal_A)
    occ = res.occupations  # (nk, nb) electrons per state incl. k-weight and spin
    ef = res.fermi_level_eV
    g = model.spin_degeneracy
    wk = np.asarray(kmesh.weights)[:, None] * g
    at_ef = wk * np.exp(-0.5 * ((vals - ef) / ef_width_eV) ** 2) / (ef_width_eV * np.sqrt(2 * np.pi))
    grid = None if energies_eV is None else np.asarray(energies_eV, dtype=float)
    p = len(model.bonds)
    e_bond, pop_ef = np.zeros(p), np.zeros(p)
    resolved = None if grid is None else np.zeros((len(grid), p))
    image = model.bonds.image
    site = np.asarray(model.orbital_site)
    h0 = np.asarray(model.hopping_eV[0]) * (site[:, None] == site[None, :])
    onsite = float(np.sum(occ * np.real(np.einsum("kan,ab,kbn->kn", vecs.conj(), h0, vecs))))
    for members, blocks, rows, cols in _bond_blocks(model):
        for s in range(0, len(k), chunk):
            c = vecs[s:s + chunk]  # (nk, norb, nb)
            phase = np.exp(2j * np.pi * (k[s:s + chunk] @ image[members].T))  # (nk, m)
            ci = c[:, rows, :]  # (nk, m, na, nb)
            cj = c[:, cols, :]
            pop = 2 * np.real(phase[:, :, None] * np.einsum("kman,mac,kmcn->kmn", ci.conj(), blocks, cj))
            e_bond[members] += np.einsum("kn,kmn->m", occ[s:s + chunk], pop)
            pop_ef[members] += np.einsum("kn,kmn->m", at_ef[s:s + chunk], pop)
            if resolved is not None:
                x = (grid[:, None, None] - vals[None, s:s + chunk, :]) / ef_width_eV
                gauss = np.exp(-0.5 * x**2) / (ef_width_eV * np.sqrt(2 * np.pi)) * wk[None, s:s + chunk]
                resolved[:, members] += np.einsum("ekn,kmn->em", gauss, pop)
    character = tuple("non-bonding" if abs(x) < NONBONDING_PER_EV else ("antibonding" if x > 0 else "bonding")
                      for x in pop_ef)
    vec = (model.crystal.frac[model.bonds.j] + image - model.crystal.frac[model.bonds.i]) @ model.crystal.lattice_A
    return BondEnergyResult(
        bond_energy_eV=e_bond, bond_population_at_EF_per_eV=pop_ef, bond_character_at_EF=character,
        onsite_energy_eV=onsite, band_energy_eV=float(np.sum(occ * vals)), fermi_level_eV=float(ef),
        bond_length_A=np.linalg.norm(vec, axis=1), mesh=mesh, energies_eV=grid, bond_population_per_eV=resolved,
    )
