"""Stiffness of the parent at a wave vector q: force constants Φ(q) from the model, soft patterns.

Φ(q) (3N × 3N, eV/Å², no masses) is the sum of

* the band part, second-order perturbation theory on the parent's tight-binding model (the free energy with
  smeared occupations, Fermi–Dirac or Gaussian, so the sum over pairs is regular):

      Φ_{sα,tβ}(q) = g Σ_k w_k [ Σ_n f_nk <nk|∂²H/∂u*_{sα}∂u_{tβ}|nk>
                                 + Σ_{n,m} (f_nk − f_m,k+q)/(ε_nk − ε_m,k+q) <nk|∂H/∂u*_{sα}|m,k+q><m,k+q|∂H/∂u_{tβ}|nk> ]

  with the limit df/dε for (near-)degenerate pairs, and at q = 0 the term that keeps the electron count fixed
  (Fermi level following the displacement). The derivatives of H come from the two-centre blocks of every bond
  (Slater & Koster, Phys. Rev. 94, 1498 (1954)) with their distance law, by central finite differences of the block
  in the bond vector, vectorised over bonds; k and k + q lie on the same Γ-centred mesh, so one set of parent
  eigenvectors serves every q commensurate with it;
* the elastic part, analytic from the closure in use (the parent's pair repulsion A (d0/d)^m or bond springs, the
  same one `rank` uses): the Hessian φ'' n nᵀ + (φ'/d)(1 − n nᵀ) of each bond.

Convention: a displacement u_s(L) = e_s exp(2πi q·L) of atom s in cell L (q in fractions of the parent's
reciprocal vectors). For q ≡ −q (q ∈ {0, ½}³) and a real e the energy per primitive cell changes by ½ eᵀ Φ e λ².
Negative eigenvalues are soft patterns.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from screener.bz.susceptibility import grid_shift, pair_factor, shifted_index
from screener.errors import ParameterError

#: Finite-difference step in the bond vector for the first and second derivatives of the two-centre blocks, Å.
_STEP1_A = 1e-3
_STEP2_A = 2e-3


@dataclass(frozen=True, eq=False)
class Stiffness:
    """Force constants of the parent at one wave vector."""

    q_frac: tuple[float, float, float]
    """Wave vector, fractions of the parent's reciprocal vectors."""
    band_eV_per_A2: np.ndarray
    """(3N, 3N) complex Hermitian band part of Φ(q), eV/Å² (rows atom-major: atom s, Cartesian α → 3s + α)."""
    elastic_eV_per_A2: np.ndarray
    """(3N, 3N) complex Hermitian elastic part of Φ(q), eV/Å²."""
    eigenvalues_eV_per_A2: np.ndarray
    """(3N,) eigenvalues of the total Φ(q), ascending, eV/Å²."""
    patterns: np.ndarray
    """(3N, 3N) complex eigenvectors as columns (atom-major Cartesian displacements, unit norm)."""
    kmesh: tuple[int, int, int]
    """Γ-centred k-mesh of the parent the sums ran over."""

    @property
    def total_eV_per_A2(self) -> np.ndarray:
        """(3N, 3N) Φ(q) = band + elastic part, eV/Å²."""
        return self.band_eV_per_A2 + self.elastic_eV_per_A2


# ---------------------------------------------------------------------------------------------- bond blocks
def _bond_data(model):
    """Per bond: atom i, atom j, image R, Cartesian vector d, and a function d → (p, norb, norb) padded blocks."""
    from screener.tb.model import bond_blocks

    crystal, params = model.crystal, model.params
    if model.spin_degeneracy != 2:
        raise NotImplementedError("force constants of a model with spin–orbit coupling are not implemented")
    b = model.bonds
    vec_frac = crystal.frac[b.j] + b.image - crystal.frac[b.i]
    cart = vec_frac @ crystal.lattice_A
    norb = model.n_orbitals
    offset = np.searchsorted(model.orbital_site, np.arange(crystal.n_atoms))
    def blocks(d_cart: np.ndarray) -> np.ndarray:
        """(p, norb, norb) block of each bond at bond vectors d_cart, padded into the [i-orbitals, j-orbitals] place."""
        out = np.zeros((len(d_cart), norb, norb))
        for m, blk in bond_blocks(crystal, params, b, d_cart):
            rows = offset[b.i[m]][:, None] + np.arange(blk.shape[1])[None, :]
            cols = offset[b.j[m]][:, None] + np.arange(blk.shape[2])[None, :]
            out[m[:, None, None], rows[:, :, None], cols[:, None, :]] = blk
        return out

    return b.i, b.j, b.image, cart, blocks


def _block_derivatives(cart, blocks):
    """First (p, 3, norb, norb) and second (p, 3, 3, norb, norb) derivatives of the blocks in the bond vector."""
    eye = np.eye(3)
    h1, h2 = _STEP1_A, _STEP2_A
    g1 = np.stack([(blocks(cart + h1 * eye[a]) - blocks(cart - h1 * eye[a])) / (2 * h1) for a in range(3)], axis=1)
    g2 = np.empty(g1.shape[:2] + (3,) + g1.shape[2:])
    b0 = blocks(cart)
    for a in range(3):
        for c in range(a, 3):  # six second derivatives, each a vectorised call over all bonds
            if a == c:
                val = (blocks(cart + h2 * eye[a]) - 2 * b0 + blocks(cart - h2 * eye[a])) / h2**2
            else:
                ea, ec = h2 * eye[a], h2 * eye[c]
                val = (blocks(cart + ea + ec) - blocks(cart + ea - ec) - blocks(cart - ea + ec)
                       + blocks(cart - ea - ec)) / (4 * h2**2)
            g2[:, a, c] = g2[:, c, a] = val
    return g1, g2


def _coefficients(i, j, image, q, n_atoms) -> np.ndarray:
    """(p, N) complex c_s = δ_sj exp(2πi q·R) − δ_si: how the bond vector follows atom s's Bloch displacement."""
    c = np.zeros((len(i), n_atoms), dtype=complex)
    rows = np.arange(len(i))
    np.add.at(c, (rows, j), np.exp(2j * np.pi * (image @ q)))
    np.add.at(c, (rows, i), -1.0)
    return c


# ---------------------------------------------------------------------------------------------- electrons
@dataclass(frozen=True, eq=False)
class MeshStates:
    """Eigenvalues, eigenvectors and smeared occupations of the parent on a full Γ-centred mesh (no symmetry)."""

    mesh: tuple[int, int, int]
    """Mesh sizes."""
    kfrac: np.ndarray
    """(nk, 3) k-points, index = (a·m1 + b)·m2 + c for grid address (a, b, c)."""
    energies_eV: np.ndarray
    """(nk, nb) eigenvalues, eV."""
    vectors: np.ndarray
    """(nk, norb, nb) eigenvectors as columns (lattice gauge)."""
    occupations: np.ndarray
    """(nk, nb) occupation per spin state, 0 … 1."""
    dfde_per_eV: np.ndarray
    """(nk, nb) df/dε per eV (≤ 0)."""
    fermi_level_eV: float
    """Fermi level, eV."""
    n_electrons: float
    """Electrons per cell placed in the bands."""
    method: str
    """Smearing: 'fermi-dirac' or 'gaussian'."""
    width_eV: float
    """Smearing width σ, eV."""
    spin_degeneracy: int
    """2 (spin–orbit coupling is not handled here)."""
    free_energy_eV: float
    """Free energy E − σS per cell of these occupations, eV."""


def mesh_states(model, mesh, *, method: str = "fermi-dirac", width_eV: float = 0.05,
                n_electrons: float | None = None) -> MeshStates:
    """Diagonalise the model once on the full Γ-centred ``mesh`` and occupy the bands (rigid-band ``n_electrons``)."""
    from screener.bz.common import SMEARING_METHODS
    from screener.bz.integrate import integrate
    from screener.bz.kmesh import _check_mesh, check_mesh_size, irreducible_mesh
    from screener.bz.smearing import delta, occupation
    from screener.tb.model import single_blas_thread

    if method not in ("fermi-dirac", "gaussian"):
        raise ParameterError(f"stiffness needs smeared occupations: method must be 'fermi-dirac' or 'gaussian', "
                             f"got {method!r} (allowed smearing methods: {', '.join(SMEARING_METHODS)})")
    mesh = _check_mesh(mesh)
    check_mesh_size(mesh, model.n_orbitals, model.crystal.formula)
    addr = np.stack(np.meshgrid(*(np.arange(n) for n in mesh), indexing="ij"), -1).reshape(-1, 3)
    k = addr / np.asarray(mesh, dtype=float)
    with single_blas_thread():
        e, v = model.eigensystem(k)
    n = model.n_electrons if n_electrons is None else float(n_electrons)
    ir = irreducible_mesh(model.crystal, mesh, use_symmetry=False)
    res = integrate(_reorder(e, ir.grid_address, mesh), ir, n, method=method, width_eV=width_eV,
                    spin_degeneracy=model.spin_degeneracy)
    x = (e - res.fermi_level_eV) / width_eV
    f = occupation(x, method)
    dfde = -delta(x, method) / width_eV
    return MeshStates(mesh=mesh, kfrac=k, energies_eV=e, vectors=v, occupations=f, dfde_per_eV=dfde,
                      fermi_level_eV=res.fermi_level_eV, n_electrons=n, method=method, width_eV=float(width_eV),
                      spin_degeneracy=model.spin_degeneracy, free_energy_eV=res.free_energy_eV)


def _reorder(e, grid_address, mesh):
    """Eigenvalues in our row-major grid order → the order of ``grid_address``."""
    a = np.mod(grid_address, mesh)
    idx = (a[:, 0] * mesh[1] + a[:, 1]) * mesh[2] + a[:, 2]
    return e[idx]


# ---------------------------------------------------------------------------------------------- Φ(q)
def band_force_constants(model, states: MeshStates, q_frac) -> np.ndarray:
    """(3N, 3N) complex band part of Φ(q), eV/Å², from the eigenvectors in ``states`` (see module docstring)."""
    q = np.asarray(q_frac, dtype=float)
    shift = grid_shift(states.mesh, q)
    n_atoms = model.crystal.n_atoms
    i, j, image, cart, blocks = _bond_data(model)
    g1, g2 = _block_derivatives(cart, blocks)
    c = _coefficients(i, j, image, q, n_atoms)
    k = states.kfrac
    nk = len(k)
    w = 1.0 / nk
    g = states.spin_degeneracy
    ph = np.exp(2j * np.pi * (k @ image.T))  # (nk, p)
    phq = np.exp(-2j * np.pi * (image @ q))  # (p,)
    # first-order operator D_{sα}(k) from k to k + q
    wp = ph[:, :, None] * c[None]  # (nk, p, N)
    wm = np.conj(ph)[:, :, None] * (c * phq[:, None])[None]
    g1t = np.swapaxes(g1, 2, 3)
    d_op = (np.einsum("kps,paxy->ksaxy", wp, g1) + np.einsum("kps,paxy->ksaxy", wm, g1t))
    d_op = d_op.reshape(nk, 3 * n_atoms, *g1.shape[2:])
    kq = shifted_index(states.mesh, shift)
    vk, vq = states.vectors, states.vectors[kq]
    mel = np.einsum("kxm,kdxy,kyn->kdmn", np.conj(vq), d_op, vk)  # <m,k+q|D_d|n,k>
    fac = pair_factor(states.energies_eV[:, None, :], states.energies_eV[kq][:, :, None],
                       states.occupations[:, None, :], states.occupations[kq][:, :, None],
                       states.dfde_per_eV[:, None, :], states.dfde_per_eV[kq][:, :, None])  # (nk, m, n)
    resp = g * w * np.einsum("kmn,kamn,kbmn->ab", fac, np.conj(mel), mel)
    # second-order (diagonal in k) term through the one-cell density matrix ρ_R = Σ_k w e^{2πik·R} Σ_n f ψψ†
    rho = np.einsum("kxn,kn,kyn->kxy", vk, states.occupations, np.conj(vk))  # ρ(k)[x, y]
    # Tr(ρ(k) A) for A in the [i, j] place with phase e^{ikR}, plus its transpose in the [j, i] place with e^{-ikR}
    tr = np.einsum("kp,kyx,pabxy->pab", ph, rho, g2) + np.einsum("kp,kxy,pabxy->pab", np.conj(ph), rho, g2)
    diag = g * w * np.einsum("ps,pt,pab->satb", np.conj(c), c, tr).reshape(3 * n_atoms, 3 * n_atoms)
    phi = resp + diag
    if np.all(shift == 0):
        # fixed electron count: the Fermi level follows the first-order shifts of the levels
        nu = g * w * np.einsum("kn,kdnn->d", states.dfde_per_eV, mel)
        dos = -g * w * float(np.sum(states.dfde_per_eV))
        if dos > 1e-12:
            phi = phi - np.outer(np.conj(nu), nu) / dos
    return 0.5 * (phi + np.conj(phi.T))


def elastic_force_constants(crystal, elastic, q_frac) -> np.ndarray:
    """(3N, 3N) complex elastic part of Φ(q), eV/Å², from an ``ElasticModel`` of the parent (analytic)."""
    q = np.asarray(q_frac, dtype=float)
    vec = (crystal.frac[elastic.j] + elastic.image - crystal.frac[elastic.i]) @ crystal.lattice_A
    d = np.linalg.norm(vec, axis=1)
    n = vec / d[:, None]
    m, a, d0, k = elastic.exponent, elastic.repulsion_eV, elastic.rest_length_A, elastic.spring_eV_per_A2
    d1 = -m * a * d0**m / d ** (m + 1) + k * (d - d0)
    d2 = m * (m + 1) * a * d0**m / d ** (m + 2) + k
    nn = n[:, :, None] * n[:, None, :]
    hess = d2[:, None, None] * nn + (d1 / d)[:, None, None] * (np.eye(3)[None] - nn)
    c = _coefficients(elastic.i, elastic.j, elastic.image, q, crystal.n_atoms)
    na = crystal.n_atoms
    phi = np.einsum("ps,pt,pab->satb", np.conj(c), c, hess).reshape(3 * na, 3 * na)
    if elastic.bending_eV > 0 and len(elastic.angle_cos0):
        phi = phi + _bending_force_constants(elastic, vec, c, q, na)
    return phi


def _bending_force_constants(elastic, vec, c, q, n_atoms) -> np.ndarray:
    """(3N, 3N) Φ(q) of the bond-bending term ½ κ Σ (cos θ − cos θ⁰)² at its rest geometry: κ Σ_t g_t* g_tᵀ, with
    g_t the gradient of cos θ_t in the atoms' Bloch displacements (the curvature term (cos θ − cos θ⁰) ∇²cos θ is 0
    there). An arm whose bond ends at the shared atom (sign −1) starts one lattice vector R back, so its row of
    coefficients carries exp(−2πi q·R) to refer it to the shared atom's cell."""
    pb, sg = elastic.angle_bonds, elastic.angle_signs
    a, b = vec[pb[:, 0]] * sg[:, :1], vec[pb[:, 1]] * sg[:, 1:]
    la, lb = np.linalg.norm(a, axis=1)[:, None], np.linalg.norm(b, axis=1)[:, None]
    cos = np.einsum("ij,ij->i", a, b)[:, None] / (la * lb)
    grad_a = b / (la * lb) - cos * a / la**2  # ∂cos θ / ∂a
    grad_b = a / (la * lb) - cos * b / lb**2
    back = np.exp(-2j * np.pi * (elastic.image @ q))  # (p,) phase of a bond's start cell seen from its end atom
    coef = []
    for arm in (0, 1):
        rows = c[pb[:, arm]] * np.where(sg[:, arm] > 0, 1.0, back[pb[:, arm]])[:, None]
        coef.append(sg[:, arm][:, None] * rows)  # (t, N): d(arm) = sign · d(bond vector)
    g = coef[0][:, :, None] * grad_a[:, None, :] + coef[1][:, :, None] * grad_b[:, None, :]  # (t, N, 3)
    return elastic.bending_eV * np.einsum("psa,pub->saub", np.conj(g), g).reshape(3 * n_atoms, 3 * n_atoms)


def stiffness(parent, q_frac, *, mesh=None, states: MeshStates | None = None, method: str = "fermi-dirac",
              width_eV: float = 0.05, n_electrons: float | None = None) -> Stiffness:
    """Φ(q) of a Parent (band part from its model, elastic part from its closure), eigenvalues ascending."""
    from screener.screen.closure import elastic_model_for

    model = parent.model
    if states is None:
        if mesh is None:
            raise ParameterError("give a k-mesh (mesh=...) or precomputed states for the stiffness")
        states = mesh_states(model, mesh, method=method, width_eV=width_eV, n_electrons=n_electrons)
    en = parent.energetics
    el = elastic_model_for(parent.crystal, parent.params, parent.bonds, en.repulsion_eV, en.pair_exponent,
                           en.bending_eV)
    band = band_force_constants(model, states, q_frac)
    elas = elastic_force_constants(parent.crystal, el, q_frac)
    vals, vecs = np.linalg.eigh(band + elas)
    return Stiffness(q_frac=tuple(float(x) for x in q_frac), band_eV_per_A2=band, elastic_eV_per_A2=elas,
                     eigenvalues_eV_per_A2=vals, patterns=vecs, kmesh=states.mesh)


def describe_pattern(crystal, pattern, q_frac) -> str:
    """Which atoms move and along which direction, in words."""
    u = np.asarray(pattern).reshape(-1, 3)
    amp = np.linalg.norm(u, axis=1)
    moving = amp > 0.2 * amp.max()
    q = ", ".join(str(Fraction(float(x)).limit_denominator(12)) for x in q_frac)
    parts = []
    for s in np.flatnonzero(moving):
        v = u[s] * np.exp(-1j * np.angle(u[s][np.argmax(np.abs(u[s]))]))
        d = v.real / max(np.linalg.norm(v.real), 1e-12)
        parts.append(f"{crystal.labels[s]} along [{', '.join(f'{x + 0.0:.2f}' for x in d)}]")
    kind = "uniform" if not any(q_frac) else "modulated"
    return f"{kind} at q = ({q}): " + "; ".join(parts)


def q_grid(parent, max_denominator: int = 4) -> list[np.ndarray]:
    """Commensurate q with denominators up to ``max_denominator`` along each bonded direction, one per star.

    Two q are the same when a rotation of the parent (q → Rᵀ q, fractional) or time reversal (q → −q) maps one
    onto the other modulo the reciprocal lattice. The high-symmetry points with such denominators (Γ, the zone
    faces and corners, fcc's W = (½, ¼, ¾) …) are on this grid.
    """
    n = int(max_denominator)
    if n < 1:
        raise ParameterError(f"--q-grid must be a positive integer (largest denominator of q), got {max_denominator!r}")
    vals = sorted({Fraction(a, d) for d in range(1, n + 1) for a in range(d)})
    periodic = np.asarray(parent.model.periodic, dtype=bool)
    axes = [[float(v) for v in vals] if periodic[c] else [0.0] for c in range(3)]
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), -1).reshape(-1, 3)
    rots = np.asarray(parent.symmetry.rotations)
    seen = np.zeros(len(grid), dtype=bool)
    keys = {tuple(np.round(np.mod(q, 1.0) * 840).astype(int) % 840): a for a, q in enumerate(grid)}
    out = []
    for a, q in enumerate(grid):
        if seen[a]:
            continue
        out.append(q)
        star = np.einsum("nji,j->ni", rots, q)
        for p in np.concatenate([star, -star]):
            key = tuple(np.round(np.mod(p, 1.0) * 840).astype(int) % 840)
            if key in keys:
                seen[keys[key]] = True
    return out


def modes_mesh(parent, qs, k_step_per_A: float = 0.15) -> tuple[int, int, int]:
    """Γ-centred mesh holding every q of ``qs`` and at least as fine as ``k_step_per_A`` (Å⁻¹, 2π included)."""
    from screener.bz.kmesh import mesh_from_spacing

    den = [int(np.lcm.reduce([Fraction(float(q[c])).limit_denominator(24).denominator for q in qs]))
           for c in range(3)]
    base = mesh_from_spacing(parent.crystal, k_step_per_A, parent.model.periodic)
    return tuple(int(-(-b // d) * d) if b > 1 else (d if d > 1 else 1) for b, d in zip(base, den, strict=True))


@dataclass(frozen=True, eq=False)
class ModesResult:
    """Stiffness and χ0 of a parent over a q grid."""

    stiffness: tuple[Stiffness, ...]
    """Φ(q) per q, in the order of ``searched``."""
    chi0_states_per_eV: tuple[tuple[float, float], ...]
    """(with overlap factors, without) χ0(q) per q, states/eV per cell."""
    searched: tuple[tuple[float, float, float], ...]
    """The q that were searched (one per star), fractions of the parent's reciprocal vectors."""
    kmesh: tuple[int, int, int]
    """The one Γ-centred mesh of parent eigenvectors used for every q."""
    fermi_level_eV: float
    """Fermi level of the filling used, eV."""
    n_electrons: float
    """Electrons per primitive cell placed in the bands."""


def survey(parent, max_denominator: int = 4, *, method: str = "fermi-dirac", width_eV: float = 0.05,
           n_electrons: float | None = None, k_step_per_A: float = 0.15) -> ModesResult:
    """Φ(q) and χ0(q) on the q grid of the parent, from one set of parent eigenvectors."""
    from screener.bz.susceptibility import lindhard

    qs = q_grid(parent, max_denominator)
    mesh = modes_mesh(parent, qs, k_step_per_A)
    st = mesh_states(parent.model, mesh, method=method, width_eV=width_eV, n_electrons=n_electrons)
    res = [stiffness(parent, q, states=st) for q in qs]
    chi = [tuple(lindhard(mesh, st.energies_eV, st.vectors, st.occupations, st.dfde_per_eV, q, overlaps=o,
                          spin_degeneracy=st.spin_degeneracy) for o in (True, False)) for q in qs]
    return ModesResult(stiffness=tuple(res), chi0_states_per_eV=tuple(chi),
                       searched=tuple(tuple(float(x) for x in q) for q in qs), kmesh=mesh,
                       fermi_level_eV=st.fermi_level_eV, n_electrons=st.n_electrons)


# ---------------------------------------------------------------------------------------------- along the route
@dataclass(frozen=True, eq=False)
class PathModes:
    """χ0 and the lowest stiffness along the special-point route, at q on one Γ-centred mesh."""

    q_frac: np.ndarray
    """(n, 3) q actually used: the route's points rounded to the mesh (multiples of 1/N), in route order."""
    distance_inv_A: np.ndarray
    """(n,) position along the route, Å⁻¹ (2π included) of the route point nearest to each q; no length is added
    across a break, so the special points sit at the route's own tick positions."""
    labels: tuple[str, ...]
    """n labels: the special point's name where a q stands for one (joined as 'X|M' at a break), else ''."""
    tick_x: np.ndarray
    """(m,) positions of the route's special points on the distance axis, Å⁻¹."""
    tick_labels: tuple[str, ...]
    """m special-point labels at ``tick_x``."""
    segments: tuple[tuple[int, int], ...]
    """Continuous pieces of the route as (start, stop) index ranges into ``q_frac`` (stop exclusive)."""
    chi0_with_overlaps: np.ndarray
    """(n,) χ0(q) with orbital overlap factors, states/eV per cell."""
    chi0_without_overlaps: np.ndarray
    """(n,) χ0(q) with every overlap factor set to 1, states/eV per cell."""
    lowest_stiffness_eV_per_A2: np.ndarray
    """(n,) lowest eigenvalue of Φ(q), eV/Å² (negative: a soft pattern)."""
    off_route_inv_A: np.ndarray
    """(n,) Cartesian distance of each q from the route point it stands for, Å⁻¹ (0 where the route meets the
    mesh)."""
    kmesh: tuple[int, int, int]
    """The one Γ-centred mesh of parent eigenvectors every q of the route was evaluated on."""
    lattice_type: str
    """Lattice type of the route (Setyawan & Curtarolo 2010), as in ``bands``."""
    fermi_level_eV: float
    """Fermi level of the filling used, eV."""
    n_electrons: float
    """Electrons per primitive cell placed in the bands."""

    def maxima(self, limit: int | None = None) -> list[dict]:
        """Local maxima of χ0 (with overlaps) along the route, largest first, each q once.

        A point is a maximum when the point before it on its piece of the route is lower (or it is the piece's
        first) and the stretch of equal values it starts ends in a lower point or the piece's end; "equal" and
        "lower" within 1e-9 of the largest |χ0|, so rounding noise on a flat stretch makes no maxima, and a flat top
        counts once, at its first point. At q = 0 χ0 is the density of states at E_F; on a mesh whose level spacing
        at E_F exceeds the smearing the smallest q fall below it (seen for simple cubic As on 24³), so Γ can appear
        among the smaller maxima. Returns dicts with ``q_frac``,
        ``distance_inv_A``, ``label``, ``chi0_with_overlaps``, ``chi0_without_overlaps`` and
        ``lowest_stiffness_eV_per_A2``.
        """
        y = self.chi0_with_overlaps
        tol = 1e-9 * max(1.0, float(np.max(np.abs(y)))) if len(y) else 0.0
        found = np.zeros(len(y), dtype=bool)
        for start, stop in self.segments:
            seg = y[start:stop]
            if len(seg) < 2:
                continue
            left = np.concatenate([[-np.inf], seg[:-1]])
            right = np.concatenate([seg[1:], [-np.inf]])
            # a flat top: only its first point (the left neighbour lower, the right one not higher)
            found[start:stop] = (seg > left + tol) & (seg >= right - tol)
            # ... and it must come down again on the right before rising (else it is a shoulder, not a top)
            for a in np.flatnonzero(found[start:stop]):
                b = a + 1
                while b < len(seg) and abs(seg[b] - seg[a]) <= tol:
                    b += 1
                if b < len(seg) and seg[b] > seg[a] + tol:
                    found[start + a] = False
        order = sorted(np.flatnonzero(found), key=lambda a: -y[a])
        seen, out = set(), []
        for a in order:
            key = tuple(np.round(np.mod(self.q_frac[a] * self.kmesh, self.kmesh)).astype(int) % self.kmesh)
            if key in seen:
                continue
            seen.add(key)
            out.append({"q_frac": [float(x) + 0.0 for x in self.q_frac[a]],
                        "distance_inv_A": float(self.distance_inv_A[a]), "label": self.labels[a],
                        "chi0_with_overlaps": float(y[a]),
                        "chi0_without_overlaps": float(self.chi0_without_overlaps[a]),
                        "lowest_stiffness_eV_per_A2": float(self.lowest_stiffness_eV_per_A2[a])})
        return out if limit is None else out[:limit]


def route_on_mesh(parent, mesh, *, n_per_leg: int | None = None):
    """The special-point route of ``parent`` rounded onto the Γ-centred ``mesh``.

    Returns (q_frac (n, 3), distance (n,) Å⁻¹, labels (n,), off-route distance (n,) Å⁻¹, segments, route). The
    route is sampled finer than the mesh (or with ``n_per_leg`` intervals per leg between special points), each
    sample rounded to the nearest multiple of 1/N per direction, and runs of equal rounded q merged, piece by piece,
    keeping route order. Each q takes the route position of the sample nearest to it.
    """
    from screener.bz.routes import zone_route

    m = np.asarray(mesh, dtype=float)
    rec2pi = 2 * np.pi * np.asarray(parent.crystal.reciprocal_A)
    periodic = np.asarray(parent.model.periodic, dtype=bool)
    if n_per_leg is None:
        # a quarter of the finest mesh step (Cartesian) per route step: every mesh point the route passes is hit
        step = np.linalg.norm(rec2pi, axis=1) / m
        density = 4.0 / float(np.min(step[periodic])) if periodic.any() else 1.0
        route = zone_route(parent.crystal, density, parent.settings.symprec_A, periodic=parent.model.periodic)
    else:
        if int(n_per_leg) < 1:
            raise ParameterError(f"the route needs at least one interval per leg, got {n_per_leg!r}")
        route = zone_route(parent.crystal, 1e-9, parent.settings.symprec_A, min_points_per_leg=int(n_per_leg),
                           periodic=parent.model.periodic)
    k = np.asarray(route.kfrac, dtype=float)
    x = np.asarray(route.x_inv_A, dtype=float)
    addr = np.round(k * m).astype(int)
    q = addr / m
    piece = np.zeros(len(k), dtype=int)
    for n, (start, stop) in enumerate(route.segments):
        piece[start:stop] = n
    new = np.ones(len(k), dtype=bool)
    new[1:] = np.any(addr[1:] != addr[:-1], axis=1) | (piece[1:] != piece[:-1])
    group = np.cumsum(new) - 1
    n_q = int(group[-1]) + 1
    # each q's foot on the route: projection onto the route step after and before each of its samples (Cartesian),
    # the nearest foot wins; position along the route and distance from it follow
    kc, qc = k @ rec2pi, q @ rec2pi
    same_piece = np.concatenate([piece[1:] == piece[:-1], [False]])
    best_miss = np.full(len(k), np.inf)
    best_x = x.copy()
    for a, b, ok in ((np.arange(len(k)), np.minimum(np.arange(len(k)) + 1, len(k) - 1), same_piece),
                     (np.maximum(np.arange(len(k)) - 1, 0), np.arange(len(k)), np.roll(same_piece, 1))):
        d = kc[b] - kc[a]
        length2 = np.einsum("ij,ij->i", d, d)
        t = np.where(ok & (length2 > 0), np.einsum("ij,ij->i", qc - kc[a], d) / np.where(length2 > 0, length2, 1),
                     0.0)
        t = np.clip(t, 0.0, 1.0)
        foot = kc[a] + t[:, None] * d
        miss = np.linalg.norm(qc - foot, axis=1)
        better = miss < best_miss
        best_miss = np.where(better, miss, best_miss)
        best_x = np.where(better, x[a] + t * (x[b] - x[a]), best_x)
    # per q, the sample whose foot is nearest (lexsort: by group, then by distance from the route)
    order = np.lexsort((best_miss, group))
    first = order[np.concatenate([[True], group[order][1:] != group[order][:-1]])]
    q_used = q[first]
    dist = best_x[first]
    miss_used = best_miss[first]
    labels = [""] * n_q
    for idx, lab in route.vertices:
        g = int(group[idx])
        if labels[g] and labels[g] != lab:
            labels[g] = f"{labels[g]}|{lab}"
        elif not labels[g]:
            labels[g] = lab
    # where the route crosses the mesh obliquely, two mesh points can have the same foot (one each side): keep the
    # nearer, unless the farther one stands for a special point
    q_piece = piece[first]
    tie = (np.abs(np.diff(dist)) < 1e-9) & (q_piece[1:] == q_piece[:-1])
    named = np.array([bool(lab) for lab in labels])
    drop = np.zeros(n_q, dtype=bool)
    drop[:-1] |= tie & (miss_used[:-1] > miss_used[1:]) & ~named[:-1]
    drop[1:] |= tie & (miss_used[1:] >= miss_used[:-1]) & ~named[1:]
    keep = ~drop
    q_used, dist, miss_used, q_piece = q_used[keep], dist[keep], miss_used[keep], q_piece[keep]
    labels = [lab for lab, k_ in zip(labels, keep, strict=True) if k_]
    starts = np.flatnonzero(np.concatenate([[True], q_piece[1:] != q_piece[:-1]]))
    segments = tuple((int(a), int(b)) for a, b in zip(starts, list(starts[1:]) + [len(q_used)], strict=True))
    return q_used + 0.0, dist, tuple(labels), miss_used, segments, route


def path_survey(parent, max_denominator: int = 4, *, mesh=None, states: MeshStates | None = None,
                n_per_leg: int | None = None, method: str = "fermi-dirac", width_eV: float = 0.05,
                n_electrons: float | None = None, k_step_per_A: float = 0.15) -> PathModes:
    """χ0(q) (with and without overlap factors) and the lowest eigenvalue of Φ(q) along the special-point route.

    Φ(q) and χ0(q) need k and k + q on one Γ-centred mesh, so the route is evaluated at the mesh points it passes
    (``route_on_mesh``): the mesh of ``states``, else ``mesh``, else the mesh ``survey`` uses for the same
    ``max_denominator`` and ``k_step_per_A`` (so the route's q that are on the survey's grid give the survey's
    values). One set of parent eigenvectors serves every q; each distinct q is evaluated once.
    """
    from screener.bz.susceptibility import lindhard

    if states is None:
        if mesh is None:
            mesh = modes_mesh(parent, q_grid(parent, max_denominator), k_step_per_A)
        states = mesh_states(parent.model, mesh, method=method, width_eV=width_eV, n_electrons=n_electrons)
    mesh = states.mesh
    q, dist, labels, miss, segments, route = route_on_mesh(parent, mesh, n_per_leg=n_per_leg)
    m = np.asarray(mesh)
    key = np.mod(np.round(q * m).astype(int), m)
    _, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    values = np.empty((len(first), 3))
    for u, a in enumerate(first):  # one stiffness and two χ0 per distinct q (a loop over q, not k)
        values[u, 0] = lindhard(mesh, states.energies_eV, states.vectors, states.occupations, states.dfde_per_eV,
                                q[a], overlaps=True, spin_degeneracy=states.spin_degeneracy)
        values[u, 1] = lindhard(mesh, states.energies_eV, states.vectors, states.occupations, states.dfde_per_eV,
                                q[a], overlaps=False, spin_degeneracy=states.spin_degeneracy)
        values[u, 2] = stiffness(parent, q[a], states=states).eigenvalues_eV_per_A2[0]
    per_q = values[inverse]
    return PathModes(q_frac=q, distance_inv_A=dist, labels=labels, tick_x=np.asarray(route.tick_x, dtype=float),
                     tick_labels=tuple(route.tick_labels), segments=segments, chi0_with_overlaps=per_q[:, 0],
                     chi0_without_overlaps=per_q[:, 1], lowest_stiffness_eV_per_A2=per_q[:, 2],
                     off_route_inv_A=miss, kmesh=tuple(int(x) for x in mesh), lattice_type=route.lattice_type,
                     fermi_level_eV=states.fermi_level_eV, n_electrons=states.n_electrons)


#: eV/Å³ in GPa (1 eV = 1.602176634e-19 J exactly, SI 2019; 1 Å³ = 1e-30 m³).
EV_PER_A3_IN_GPA = 160.21766208
#: Voigt index -> Cartesian pair (xx, yy, zz, yz, xz, xy).
_VOIGT = ((0, 0), (1, 1), (2, 2), (1, 2), (0, 2), (0, 1))


@dataclass(frozen=True, eq=False)
class StrainStiffness:
    """Clamped-ion elastic constants of the parent from its model: C_ij = (1/V) ∂²E/∂ε_i∂ε_j (Voigt notation)."""

    elastic_constants_GPa: np.ndarray
    """(6, 6) symmetric C_ij, GPa, Voigt order xx, yy, zz, yz, xz, xy (engineering shear strains)."""
    eigenvalues_GPa: np.ndarray
    """(6,) eigenvalues of C, ascending, GPa: a negative one is a homogeneous-strain (e.g. shear) instability."""
    strain_patterns: np.ndarray
    """(6, 6) eigenvectors of C as columns (Voigt strain vectors, unit norm)."""
    bulk_modulus_GPa: float
    """Voigt bulk modulus (C11 + C22 + C33 + 2 (C12 + C13 + C23)) / 9, GPa."""
    kmesh: tuple[int, int, int]
    """k-mesh of the parent cell the energies were summed on."""
    step: float
    """Strain step of the finite differences."""

    @property
    def unstable(self) -> list[tuple[float, np.ndarray]]:
        """(eigenvalue GPa, (6, d) basis) per degenerate group of negative eigenvalues, most negative first."""
        vals, vecs = self.eigenvalues_GPa, self.strain_patterns
        tol = 1e-3 * max(1.0, float(np.abs(vals).max()))
        groups, a = [], 0
        while a < 6 and vals[a] < -tol:
            b = a + 1
            while b < 6 and abs(vals[b] - vals[a]) < tol:
                b += 1
            groups.append((float(vals[a:b].mean()), vecs[:, a:b]))
            a = b
        return groups


def strain_matrix(voigt) -> np.ndarray:
    """Symmetric strain tensor from a Voigt vector (engineering shears: ε4 = 2 ε_yz, …)."""
    e = np.zeros((3, 3))
    for a, (i, j) in enumerate(_VOIGT):
        e[i, j] = e[j, i] = voigt[a] if i == j else 0.5 * voigt[a]
    return e


def strained_band_energy_eV(crystal, params, bonds, settings, mesh, rotations, strain) -> float:
    """Band energy (eV per cell) of ``crystal`` strained as r → r (1 + ε) (ε the symmetric (3, 3) ``strain``), atoms
    at their fractional positions and bonds following them, on ``mesh`` reduced with the ``rotations`` (parent's,
    fractional) that keep the strained metric."""
    from screener.bz.integrate import solve_on_mesh
    from screener.tb.model import build_model

    rots = np.asarray(rotations)
    lat = crystal.lattice_A @ (np.eye(3) + np.asarray(strain, dtype=float))
    metric = lat @ lat.T
    keep = np.array([np.allclose(r.T @ metric @ r, metric, atol=1e-9 * np.abs(metric).max())
                     for r in np.transpose(rots, (0, 2, 1))], dtype=bool)
    model = build_model(crystal.replace(lattice_A=lat), params, bonds=bonds)
    return solve_on_mesh(model, mesh, method=settings.method, width_eV=settings.width_eV,
                         symprec=settings.symprec_A, rotations=rots[keep]).band_energy_eV


def cube_axes(point_group_cart) -> np.ndarray | None:
    """(3, 3) the cube axes of a cubic point group as rows (Cartesian unit vectors), or None if the group is not
    cubic. Every cubic point group has four 3-fold axes (the body diagonals u); two of them at cos = −1/3 add up
    along a cube axis (common practice, no source: the geometry of the cube)."""
    axes = []
    for r in np.asarray(point_group_cart, dtype=float):
        p = r * np.sign(np.linalg.det(r))  # proper part
        if abs(np.trace(p)) > 1e-6 or np.allclose(p, np.eye(3), atol=1e-6):
            continue  # a 3-fold rotation has trace 1 + 2 cos 120° = 0
        w, v = np.linalg.eig(p)
        u = np.real(v[:, np.argmin(np.abs(w - 1))])
        u = u / np.linalg.norm(u)
        if not any(abs(abs(u @ x) - 1) < 1e-6 for x in axes):
            axes.append(u)
    if len(axes) != 4:
        return None
    cube = []
    for a in range(4):
        for b in range(a + 1, 4):
            d = axes[a] + (-np.sign(axes[a] @ axes[b])) * axes[b]
            d = d / np.linalg.norm(d)
            if not any(abs(abs(d @ x) - 1) < 1e-6 for x in cube):
                cube.append(d)
    if len(cube) != 3 or not np.allclose(np.abs(np.array(cube) @ np.array(cube).T), np.eye(3), atol=1e-6):
        return None
    return np.array(cube)


def cubic_shear_strains(axes, step: float) -> tuple[np.ndarray, np.ndarray]:
    """The two shear strains of a cubic crystal with cube ``axes`` (rows): γ_yz = ``step`` (energy ½ V C44 γ²)
    and ε_xx = −ε_yy = ``step`` (energy 2 V C' ε², C' = (C11 − C12)/2), as Cartesian (3, 3) tensors."""
    x, y, z = np.asarray(axes, dtype=float)
    trig = 0.5 * step * (np.outer(y, z) + np.outer(z, y))
    tetra = step * (np.outer(x, x) - np.outer(y, y))
    return trig, tetra


def strain_stiffness(parent, *, step: float = 0.005, mesh=None) -> StrainStiffness:
    """The parent's 6 × 6 elastic constants from its model (band energy + the closure in use), clamped ions.

    Every atom keeps its fractional position (no internal relaxation: exact for cells whose atoms all sit on
    inversion centres, an upper bound of the shear constants otherwise, e.g. diamond's C44). The cell is strained
    as r → r (1 + ε); the bonds follow the atoms. Second derivatives by central differences with strain ``step``
    on the parent's k-mesh (the one its closure was fitted on); the mesh of each strained cell is reduced with the
    parent's rotations that keep the strained metric.
    """
    from screener.bz.kmesh import mesh_from_spacing
    from screener.screen.closure import elastic_model_for

    crystal, settings, bonds = parent.crystal, parent.settings, parent.bonds
    if not all(parent.model.periodic):
        raise ParameterError("elastic constants need a crystal periodic in three directions (this cell has vacuum)")
    en = parent.energetics
    el = elastic_model_for(crystal, parent.params, bonds, en.repulsion_eV, en.pair_exponent, en.bending_eV)
    if mesh is None:
        mesh = mesh_from_spacing(crystal, settings.k_step_per_A * settings.refine_factor, parent.model.periodic)
    rots = np.asarray(parent.symmetry.rotations)
    cache: dict[tuple, float] = {}

    def energy(voigt) -> float:
        key = tuple(np.round(voigt, 12))
        if key not in cache:
            strain = strain_matrix(voigt)
            lat = crystal.lattice_A @ (np.eye(3) + strain)
            band = strained_band_energy_eV(crystal, parent.params, bonds, settings, mesh, rots, strain)
            cache[key] = band + el.energy_eV(lat, crystal.frac)
        return cache[key]

    h = float(step)
    e0 = energy(np.zeros(6))
    c = np.zeros((6, 6))
    unit = np.eye(6)
    for a in range(6):
        c[a, a] = (energy(h * unit[a]) - 2 * e0 + energy(-h * unit[a])) / h**2
        for b in range(a):
            c[a, b] = c[b, a] = (energy(h * (unit[a] + unit[b])) - energy(h * (unit[a] - unit[b]))
                                 - energy(h * (unit[b] - unit[a])) + energy(-h * (unit[a] + unit[b]))) / (4 * h * h)
    c_gpa = c / crystal.volume_A3 * EV_PER_A3_IN_GPA
    vals, vecs = np.linalg.eigh(c_gpa)
    bulk = (c_gpa[0, 0] + c_gpa[1, 1] + c_gpa[2, 2] + 2 * (c_gpa[0, 1] + c_gpa[0, 2] + c_gpa[1, 2])) / 9
    return StrainStiffness(elastic_constants_GPa=c_gpa, eigenvalues_GPa=vals, strain_patterns=vecs,
                           bulk_modulus_GPa=float(bulk), kmesh=tuple(int(x) for x in mesh), step=h)


def describe_strain(group) -> str:
    """A degenerate group (eigenvalue, (6, d) basis) of strain patterns in words: which strains it combines."""
    names = ("ε_xx", "ε_yy", "ε_zz", "γ_yz", "γ_xz", "γ_xy")
    value, basis = group
    basis = np.asarray(basis, dtype=float).reshape(6, -1)
    weight = np.sum(basis**2, axis=1)
    parts = [n for n, w in zip(names, weight, strict=True) if w > 0.05]
    d = basis.shape[1]
    if d == 1:
        v = basis[:, 0] / np.abs(basis[:, 0]).max()
        text = " ".join(f"{x:+.2f} {n}" for x, n in zip(v, names, strict=True) if abs(x) > 0.05)
    else:
        text = f"any combination of {', '.join(parts)}" + (" with zero trace (volume kept)"
                                                          if set(parts) <= set(names[:3]) and d == 2 else "")
    return f"{value:.1f} GPa" + (f" (×{d})" if d > 1 else "") + f": {text}"


def cubic_summary(strain: StrainStiffness) -> str | None:
    """For a cubic C: C11 − C12, C44 and C11 + 2 C12 with the Born stability conditions (all three positive;
    M. Born & K. Huang, Dynamical Theory of Crystal Lattices, 1954). None when C is not of cubic form."""
    c = strain.elastic_constants_GPa
    scale = max(1.0, float(np.abs(c).max()))
    cubic = (np.allclose(np.diag(c)[:3], c[0, 0], atol=1e-3 * scale)
             and np.allclose(np.diag(c)[3:], c[3, 3], atol=1e-3 * scale)
             and np.allclose([c[0, 1], c[0, 2], c[1, 2]], c[0, 1], atol=1e-3 * scale)
             and np.allclose(c[:3, 3:], 0, atol=1e-3 * scale) and np.allclose(c[3:, 3:] - np.diag(np.diag(c)[3:]), 0,
                                                                                atol=1e-3 * scale))
    if not cubic:
        return None
    c11, c12, c44 = c[0, 0], c[0, 1], c[3, 3]
    bad = [name for name, v in (("tetragonal shear C11 − C12", c11 - c12), ("trigonal shear C44", c44),
                                ("compression C11 + 2 C12", c11 + 2 * c12)) if v <= 0]
    verdict = "mechanically stable" if not bad else "unstable to " + " and ".join(bad)
    return (f"cubic: C11 = {c11:.1f}, C12 = {c12:.1f}, C44 = {c44:.1f} GPa; C11 − C12 = {c11 - c12:.1f}, "
            f"C11 + 2 C12 = {c11 + 2 * c12:.1f} GPa → {verdict} (Born conditions)")
