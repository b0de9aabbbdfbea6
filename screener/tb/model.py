"""The tight-binding model: orbital layout, real-space blocks H(R), and H(k) for a stack of k-points.

Gauge: lattice (not atomic-position) gauge, H(k) = Σ_R H_R exp(2πi k·R) with R integer lattice translations and
k in fractions of the reciprocal vectors (rows of ``Crystal.reciprocal_A``, no 2π). Eigenvalues are therefore
periodic under k → k + G; eigenvectors differ from the atomic gauge by site phases only.

Which pairs interact is decided in ``screener.tb.bonds``.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

import numpy as np

from screener.errors import ParameterError, StructureError
from screener.structure.crystal import Crystal
from screener.tb.bonds import BondList, _canonical, find_bonds
from screener.tb.params import ParameterSet, default_parameters
from screener.tb.slater_koster import (
    angular_momentum_matrices,
    orbital_indices,
    reverse_parameters,
    sk_block,
)

#: Memory target for one chunk of complex H(k) matrices, bytes. A few MB keeps a chunk's build and diagonalisation
#: in cache; a whole 24³ stack at once (14 MB for 8 orbitals) ran ~10–20 ms slower per call (benchmarks/engine.py).
CHUNK_BYTES = 4 * 2**20

# ---------------------------------------------------------------------------------------------- model
@dataclass(frozen=True, eq=False)
class TightBindingModel:
    """A Slater–Koster tight-binding Hamiltonian of one crystal. Build with ``build_model``."""

    crystal: Crystal
    """The structure (current geometry)."""
    params: ParameterSet
    """Parameters used."""
    bonds: BondList
    """Interacting pairs, each once (images re-anchored to the current geometry)."""
    orbital_site: np.ndarray
    """(norb,) int, atom index of each basis orbital."""
    orbital_name: tuple[str, ...]
    """Orbital name per basis function ('px', or 'px_up'/'px_dn' with spin–orbit)."""
    n_electrons: float
    """Valence electrons per cell."""
    spin_degeneracy: int
    """2, or 1 when spin–orbit coupling doubles the basis."""
    periodic: tuple[bool, bool, bool]
    """False along a lattice vector that no bond crosses (vacuum, isolated chains or layers)."""
    translations: np.ndarray
    """(nR, 3) int, lattice translations R with a non-zero block; R = 0 first."""
    hopping_eV: np.ndarray
    """(nR, norb, norb) H_R blocks, eV: H_R[a, b] = <a in cell 0 | H | b in cell R>; real unless spin–orbit."""
    bond_length_A: np.ndarray
    """(p,) float, length of each bond in ``bonds``, Å."""
    _rhalf: np.ndarray = field(repr=False)
    _weights: np.ndarray = field(repr=False)

    @property
    def n_orbitals(self) -> int:
        """Size of the basis."""
        return len(self.orbital_site)

    def _default_chunk(self) -> int:
        return max(1, int(CHUNK_BYTES // (16 * max(1, self.n_orbitals) ** 2 * 3)))

    def hamiltonian(self, kfrac) -> np.ndarray:
        """(nk, norb, norb) complex Hermitian H(k) for k in fractions of the reciprocal vectors (nk, 3)."""
        k = _as_kpoints(kfrac)
        norb = self.n_orbitals
        nk, nr = len(k), len(self._rhalf)
        # H(k) = H0 + Σ_{R+} cos φ (H_R + H_R†) + i sin φ (H_R − H_R†), φ = 2π k·R: one real matrix product whose
        # rows are [1, cos φ, sin φ] and whose result is the interleaved (re, im) storage of the complex stack
        x = np.empty((nk, 1 + 2 * nr))
        x[:, 0] = 1.0
        if nr:
            phase = (2 * np.pi) * (k @ self._rhalf.T)
            np.cos(phase, out=x[:, 1:1 + nr])
            np.sin(phase, out=x[:, 1 + nr:])
        return (x @ self._weights).view(complex).reshape(nk, norb, norb)

    def eigenvalues(self, kfrac, chunk_size: int | None = None) -> np.ndarray:
        """(nk, norb) band energies in eV, ascending, diagonalised in chunks of ``chunk_size`` k-points."""
        k = _as_kpoints(kfrac)
        step = chunk_size or self._default_chunk()
        out = np.empty((len(k), self.n_orbitals))
        for start in range(0, len(k), step):
            out[start:start + step] = np.linalg.eigvalsh(self.hamiltonian(k[start:start + step]))
        return out

    def eigensystem(self, kfrac, chunk_size: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Eigenvalues (nk, norb) and eigenvectors (nk, norb, norb), eigenvectors as columns."""
        k = _as_kpoints(kfrac)
        step = chunk_size or self._default_chunk()
        vals = np.empty((len(k), self.n_orbitals))
        vecs = np.empty((len(k), self.n_orbitals, self.n_orbitals), dtype=complex)
        for start in range(0, len(k), step):
            w, v = np.linalg.eigh(self.hamiltonian(k[start:start + step]))
            vals[start:start + step] = w
            vecs[start:start + step] = v
        return vals, vecs


def _as_kpoints(kfrac) -> np.ndarray:
    k = np.asarray(kfrac, dtype=float)
    if k.ndim == 1:
        k = k[None, :]
    if k.ndim != 2 or k.shape[1] != 3:
        raise ParameterError(f"k-points must be an (nk, 3) array of fractions of the reciprocal vectors, "
                             f"got shape {np.shape(kfrac)}")
    return k


def bond_blocks(crystal, params, bonds, cart_A) -> list[tuple[np.ndarray, np.ndarray]]:
    """Slater–Koster block of every bond at the bond vectors ``cart_A`` (p, 3), grouped by ordered species pair.

    Returns [(bond indices m, blocks (len(m), na, nb))], one entry per pair, in order of first appearance; the
    hoppings follow each pair's distance law at |cart_A|, with the pair's parameters reversed when the bond runs B→A.
    """
    groups = defaultdict(list)
    for b, (ia, ja) in enumerate(zip(bonds.i, bonds.j, strict=True)):
        groups[(crystal.species[ia], crystal.species[ja])].append(b)
    out = []
    for (a, b), members in groups.items():
        m = np.array(members)
        bp = params.bond(a, b)
        hop = bp.hoppings(np.linalg.norm(cart_A[m], axis=1))
        if bp.pair[0] != a:
            hop = reverse_parameters(hop)
        out.append((m, sk_block(cart_A[m], params.species(a).orbitals, params.species(b).orbitals, hop)))
    return out


def build_model(crystal: Crystal, params: ParameterSet | None = None, *, bonds: BondList | None = None
                ) -> TightBindingModel:
    """Tight-binding model of ``crystal``.

    ``params`` defaults to ``default_parameters`` of the crystal's elements. ``bonds`` (same atom indices) fixes
    which pairs interact — hoppings are evaluated at the *current* bond lengths, so a distortion family keeps its
    parent's bonds while atoms move. When the bond list carries ``vector_frac``, images are re-anchored so that
    atoms wrapped back into the cell keep their bonds.
    """
    if params is None:
        params = default_parameters(set(crystal.species))
    if bonds is None:
        bonds = find_bonds(crystal, params)
    n = crystal.n_atoms
    if len(bonds) and (bonds.i.min() < 0 or bonds.j.min() < 0 or max(bonds.i.max(), bonds.j.max()) >= n):
        raise StructureError(f"bond list refers to atoms outside 0..{n - 1}; was it found for another structure?")
    image = bonds.image
    vec_frac = crystal.frac[bonds.j] + image - crystal.frac[bonds.i]
    if bonds.vector_frac is not None and len(bonds):
        shift = np.rint(bonds.vector_frac - vec_frac).astype(int)
        if np.any(shift):
            image = image + shift
            vec_frac = vec_frac + shift
    bonds = BondList(bonds.i, bonds.j, image, bonds.vector_frac)

    # orbital layout
    sp = [params.species(s) for s in crystal.species]
    soc = any(s.soc_eV != 0 for s in sp)
    spin = 2 if soc else 1
    counts = np.array([len(s.orbitals) for s in sp])
    offset = np.concatenate([[0], np.cumsum(counts)])[:-1]
    norb = int(counts.sum())
    site = np.repeat(np.arange(n), counts)
    names = tuple(o for s in sp for o in s.orbitals)
    n_electrons = float(sum(s.valence_electrons for s in sp)) + float(params.extra_electrons_per_atom) * n
    capacity = 2 * norb  # spatial orbitals here, two spin states each (with or without spin–orbit coupling)
    if not 0 <= n_electrons <= capacity + 1e-9:
        raise ParameterError(f"{n_electrons:g} electrons do not fit in the {capacity} states of the {norb} orbitals of "
                             f"{crystal.formula} (with spin): choose a filling between 0 and {capacity}")

    # R = 0 block: on-site energies
    translations = [np.zeros(3, dtype=int)]
    if len(bonds):
        uniq = np.unique(np.concatenate([image, -image]), axis=0)
        translations += [r for r in uniq if np.any(r)]
    translations = np.array(translations, dtype=int).reshape(-1, 3)
    index = {tuple(r): a for a, r in enumerate(translations)}
    HR = np.zeros((len(translations), norb, norb))
    HR[0, np.arange(norb), np.arange(norb)] = [s.onsite_eV[o] for s in sp for o in s.orbitals]

    # hoppings, grouped by ordered species pair so that each group shares one orbital layout
    cart = vec_frac @ crystal.lattice_A
    dist = np.linalg.norm(cart, axis=1)
    if len(bonds) and dist.min() < 1e-6:
        raise StructureError("a bond has zero length in this geometry; atoms coincide")
    ridx = np.array([index[tuple(r)] for r in image], dtype=int) if len(bonds) else np.zeros(0, int)
    rneg = np.array([index[tuple(-r)] for r in image], dtype=int) if len(bonds) else np.zeros(0, int)
    for m, blocks in bond_blocks(crystal, params, bonds, cart):  # blocks (p, na, nb)
        rows = offset[bonds.i[m]][:, None] + np.arange(blocks.shape[1])[None, :]
        cols = offset[bonds.j[m]][:, None] + np.arange(blocks.shape[2])[None, :]
        np.add.at(HR, (ridx[m][:, None, None], rows[:, :, None], cols[:, None, :]), blocks)
        np.add.at(HR, (rneg[m][:, None, None], cols[:, :, None], rows[:, None, :]), np.swapaxes(blocks, 1, 2))

    if soc:
        HR, names, site = _add_spin_orbit(HR, sp, offset, names, site)
        norb *= 2

    periodic = tuple(bool(x) for x in np.any(image != 0, axis=0)) if len(bonds) else (False, False, False)
    # pair +R with −R: keep R = 0 and one of each pair
    half = [a for a, r in enumerate(translations) if a > 0 and _canonical(np.array([1]), np.array([1]), r[None])[0]]
    half = np.array(half, dtype=int)
    flat = HR.reshape(len(translations), -1).astype(complex)
    HRT = np.conj(np.swapaxes(HR, 1, 2)).reshape(len(translations), -1)
    rhalf = translations[half].astype(float)
    sym = flat[half] + HRT[half]  # multiplies cos φ
    anti = 1j * (flat[half] - HRT[half])  # multiplies sin φ
    weights = np.concatenate([flat[:1], sym, anti]).view(float).reshape(1 + 2 * len(half), 2 * norb * norb)
    weights = np.ascontiguousarray(weights)
    for arr in (HR, translations, rhalf, weights, dist):
        arr.setflags(write=False)
    return TightBindingModel(
        crystal=crystal, params=params, bonds=bonds, orbital_site=site, orbital_name=names,
        n_electrons=n_electrons, spin_degeneracy=2 if spin == 1 else 1, periodic=periodic,
        translations=translations, hopping_eV=HR, bond_length_A=dist,
        _rhalf=rhalf, _weights=weights,
    )


def _add_spin_orbit(HR, sp, offset, names, site):
    """Double the basis (spin innermost: a_up, a_dn, b_up, ...) and add λ L·S on every atom with λ ≠ 0."""
    nR, norb, _ = HR.shape
    out = np.zeros((nR, 2 * norb, 2 * norb), dtype=complex)
    eye2 = np.eye(2)
    for r in range(nR):
        out[r] = np.kron(HR[r], eye2)
    L = angular_momentum_matrices()
    pauli = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)
    for atom, s in enumerate(sp):
        if s.soc_eV == 0:
            continue
        idx = orbital_indices(s.orbitals)
        # λ L·S with S = σ/2; L projected on the orbitals present
        block = 0.5 * s.soc_eV * sum(np.kron(L[k][np.ix_(idx, idx)], pauli[k]) for k in range(3))
        lo = 2 * offset[atom]
        hi = lo + 2 * len(idx)
        out[0, lo:hi, lo:hi] += block
    names2 = tuple(f"{o}_{sfx}" for o in names for sfx in ("up", "dn"))
    site2 = np.repeat(site, 2)
    return out, names2, site2


def single_blas_thread():
    """Context manager limiting BLAS to one thread around stacks of small eigenproblems.

    H(k) matrices here have 1–100 orbitals; a threaded BLAS spends more time synchronising its threads than it
    saves on them (a 27-atom cell's bands took 270 s with default threads and 3.4 s with one on a loaded two-core
    machine; rank of rocksalt GeTe 13.7 s → 5.1 s), so parallelism comes from processes instead.
    """
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=1, user_api="blas")
