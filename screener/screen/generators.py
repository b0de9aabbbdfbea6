"""Candidate distortion generators: Crystal -> family of Crystals(λ).

Every family is a frozen displacement pattern on a commensurate supercell of the parent,

    r_j(λ) = r_j + λ e_j cos(2π q·x_j + φ) / max_j |e_j cos(2π q·x_j + φ)|,

so the amplitude λ (Å) is the largest atomic displacement from the parent. ``q`` is given in fractions of the
parent's reciprocal vectors and ``x_j`` are the atoms' coordinates in fractions of the parent's lattice vectors.
Atom order in the supercell is fixed for the whole family, so the parent's bond list applies at every λ.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, replace
from fractions import Fraction

import numpy as np

from screener.errors import ParameterError
from screener.screen import DEFAULT_GENERATORS, GENERATORS  # noqa: F401  (the names, re-exported)
from screener.structure.crystal import Crystal
from screener.structure.symmetry import SYMPREC_A

#: Soft-mode candidates: q denominators searched, most candidates handed to the comparator, largest supercell.
SOFT_MODE_Q_GRID = 2
SOFT_MODE_MAX = 3
SOFT_MODE_MAX_ATOMS = 32



@dataclass(frozen=True, eq=False)
class DistortionFamily:
    """A one-parameter family of distorted structures built on a commensurate supercell of the parent."""

    generator: str
    """Name of the generator: 'dimerise', 'rhombohedral-split' or 'modulate'."""
    description: str
    """One line saying what moves where."""
    q_frac: tuple[float, float, float]
    """Wave-vector, fractions of the parent's reciprocal lattice vectors."""
    q_label: str
    """q written with exact fractions, e.g. '(1/2, 1/2, 1/2)'."""
    supercell_matrix: np.ndarray
    """(3, 3) int, supercell lattice = supercell_matrix @ parent lattice."""
    reference: Crystal
    """The undistorted parent expressed in the supercell (λ = 0)."""
    pattern_A: np.ndarray
    """(n, 3) float, displacement of each supercell atom per unit λ (Å/Å); largest row norm is 1."""
    polarisation: tuple[float, float, float]
    """Unit Cartesian displacement direction (for longitudinal modes, parallel to q)."""
    strain_axis: tuple[float, float, float] | None = None
    """Unit Cartesian axis of an optional volume-conserving uniaxial cell strain relaxed with λ (None: fixed cell)."""
    strain_tensor: np.ndarray | None = None
    """(3, 3) symmetric homogeneous strain per unit λ (a strain family: the cell becomes L (1 + λ E), fractional
    positions kept); scaled so that λ is the largest change of a parent nearest-neighbour bond vector, Å."""

    def at(self, amplitude_A: float, strain: float = 0.0) -> Crystal:
        """The distorted structure at amplitude λ = ``amplitude_A`` (largest displacement, Å)."""
        return self.at_with_shift(amplitude_A, strain)[0]

    def at_with_shift(self, amplitude_A: float, strain: float = 0.0) -> tuple[Crystal, np.ndarray]:
        """The distorted structure and, per atom, the integer lattice shift its wrapping into the cell applied.

        A bond (i, j, image) of the reference stays the same physical bond at amplitude λ with image
        ``image + shift[j] - shift[i]`` (see `follow_bonds`). ``strain`` ε stretches the cell by 1 + ε along
        ``strain_axis`` at constant volume (for the rhombohedral split: changes the rhombohedral angle).
        """
        ref = self.reference
        frac = ref.frac + float(amplitude_A) * self.pattern_A @ np.linalg.inv(ref.lattice_A)
        lattice = ref.lattice_A
        if self.strain_tensor is not None:
            lattice = lattice @ (np.eye(3) + float(amplitude_A) * np.asarray(self.strain_tensor))
        if strain:
            if self.strain_axis is None:
                raise ParameterError(f"the {self.generator} family has no strain axis; strain must be 0")
            n = np.asarray(self.strain_axis)
            s = (np.eye(3) + float(strain) * np.outer(n, n)) / (1.0 + float(strain)) ** (1 / 3)
            lattice = lattice @ s
        crystal = Crystal(lattice, frac, ref.species, ref.labels, min_distance_A=ref.min_distance_A)
        shift = np.rint(frac - crystal.frac).astype(int)
        return crystal, shift

    @property
    def n_atoms(self) -> int:
        """Atoms in the supercell."""
        return self.reference.n_atoms


# ----------------------------------------------------------------------------------------------- helpers
def _vec(v) -> str:
    return "[" + ", ".join(f"{x + 0.0:.3g}" for x in np.asarray(v, dtype=float)) + "]"


def fraction_label(q) -> str:
    """'(1/2, 0, 1/3)' for a rational vector."""
    return "(" + ", ".join(str(Fraction(float(x)).limit_denominator(24)) for x in q) + ")"


def _rationalise(q, max_denominator: int = 12) -> np.ndarray:
    q = np.asarray(q, dtype=float)
    fr = [Fraction(float(x)).limit_denominator(max_denominator) for x in q]
    if np.max(np.abs(np.array([float(f) for f in fr]) - q)) > 1e-6:
        raise ParameterError(
            f"q = {q.tolist()} is not commensurate: give components as fractions with denominators up to "
            f"{max_denominator}, e.g. 1/2, 1/3, 1/4"
        )
    return np.array([float(f) for f in fr])


def _kernel_basis(num, den: int, index: int) -> np.ndarray:
    """(3, 3) int rows spanning {n ∈ Z³ : num·n ≡ 0 (mod den)}, a sublattice of Z³ of index ``index``.

    Column operations of the extended Euclidean algorithm give a unimodular U with num·U = (h, 0, 0),
    h = ±gcd(num); the condition on n = U m then reads h m₀ ≡ 0 (mod den), i.e. m₀ ∈ (den / gcd(h, den)) Z,
    so the rows index·U[:, 0], U[:, 1], U[:, 2] are a basis. Exact integer arithmetic throughout.
    """
    a = [int(x) for x in num]
    cols = [[int(i == j) for i in range(3)] for j in range(3)]  # the columns of U
    for j in (1, 2):
        while a[j] != 0:
            t = a[0] // a[j]
            a[0] -= t * a[j]
            cols[0] = [x - t * y for x, y in zip(cols[0], cols[j], strict=True)]
            a[0], a[j] = a[j], a[0]
            cols[0], cols[j] = cols[j], cols[0]
    if den // math.gcd(a[0], den) != index:
        raise ParameterError(f"could not build a commensurate supercell of index {index}")
    return np.array([[index * x for x in cols[0]], cols[1], cols[2]], dtype=np.int64)


def _gram_schmidt(b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gram–Schmidt coefficients mu (3, 3) and orthogonalised rows of ``b`` (3, 3)."""
    bs = np.array(b, dtype=float)
    mu = np.eye(3)
    for i in range(3):
        for j in range(i):
            mu[i, j] = b[i] @ bs[j] / (bs[j] @ bs[j])
            bs[i] = bs[i] - mu[i, j] * bs[j]
    return mu, bs


def _lll(m: np.ndarray, lattice: np.ndarray, delta: float = 0.99) -> np.ndarray:
    """Integer rows ``m`` LLL-reduced against the Cartesian metric of ``lattice``: the same lattice, short rows
    (Lenstra, Lenstra & Lovász, Math. Ann. 261, 515 (1982))."""
    m = np.array(m, dtype=np.int64)
    k = 1
    for _ in range(10_000):  # a 3-D reduction ends after a few swaps; the cap only guards against round-off cycles
        if k >= 3:
            break
        for j in range(k - 1, -1, -1):
            mu, _ = _gram_schmidt(m @ lattice)
            r = int(round(mu[k, j]))
            if r:
                m[k] -= r * m[j]
        mu, bs = _gram_schmidt(m @ lattice)
        if bs[k] @ bs[k] >= (delta - mu[k, k - 1] ** 2) * (bs[k - 1] @ bs[k - 1]):
            k += 1
        else:
            m[[k - 1, k]] = m[[k, k - 1]]
            k = max(k - 1, 1)
    return m


#: Largest box of coefficients searched around the reduced basis for the shortest supercell vectors; a reduced
#: 3-D basis needs a few per direction, so the cap is never reached in practice (common practice, no source).
_MAX_SEARCH = 2_000_000


def commensurate_supercell(q_frac, lattice_A) -> np.ndarray:
    """Smallest integer matrix M whose rows n_i satisfy q·n_i ∈ Z, preferring short Cartesian vectors.

    The supercell of index N / gcd(N, N q) holds the modulation exp(2πi q·n) with period one. Its lattice
    {n : q·n ∈ Z} is built directly (`_kernel_basis`) and reduced (`_lll`); then every lattice vector no longer
    than the longest reduced row is listed, and M takes the shortest, the shortest one not parallel to it and
    the shortest that completes a basis, with det M = +index.
    """
    q = _rationalise(q_frac)
    fr = [Fraction(float(x)).limit_denominator(12) for x in q]
    den = int(np.lcm.reduce([f.denominator for f in fr]))
    num = np.array([int(f * den) for f in fr])
    index = den // int(np.gcd.reduce(np.append(num, den)))
    if index == 1:
        return np.eye(3, dtype=int)
    lattice = np.asarray(lattice_A, dtype=float)
    red = _lll(_kernel_basis(num, den, index), lattice)
    b = red @ lattice
    reach = float(np.max(np.linalg.norm(b, axis=1))) * (1 + 1e-9) + 1e-12
    # a vector c·b no longer than `reach` has |c_i| ≤ reach |d_i| with d the dual rows of b
    bound = np.floor(reach * np.linalg.norm(np.linalg.inv(b).T, axis=1) + 1e-9).astype(int)
    if np.prod(2 * bound + 1) <= _MAX_SEARCH:
        grid = np.stack(np.meshgrid(*(np.arange(-c, c + 1) for c in bound), indexing="ij"), -1).reshape(-1, 3)
        cands = grid[np.any(grid != 0, axis=1)] @ red
        lengths = np.linalg.norm(cands @ lattice, axis=1)
        keep = lengths <= reach
        cands, lengths = cands[keep], lengths[keep]
        # shortest first, then the smallest integer coefficients, then lexicographic (a fixed order)
        order = np.lexsort((cands[:, 2], cands[:, 1], cands[:, 0], np.abs(cands).sum(1), lengths))
        cands, lengths = cands[order], lengths[order]
        # the first basis found is a shortest one; the others as short compete for the most uniform k-mesh: they
        # use only rows no longer than its longest (a prefix of the length-sorted list), in the same order
        first, best, best_spread, short, tol = None, None, np.inf, len(cands), 0.0
        for a, c in itertools.combinations(range(min(len(cands), 40)), 2):
            if first is not None and (c >= short or lengths[a] + lengths[c] > first[1] + first[2] + tol):
                continue  # a row longer than the shortest basis's, or v1, v2 together longer than two of its rows
            v1, v2 = cands[a], cands[c]
            normal = np.cross(v1, v2)
            if not normal.any():
                continue
            dets = cands[:short] @ normal  # det [v1; v2; v3] for every candidate v3, exact in integers
            for h in np.flatnonzero(np.abs(dets) == index):
                if first is None:
                    first = np.sort(lengths[[a, c, h]])
                    short, tol = int(np.count_nonzero(lengths <= first[2] * (1 + 1e-9))), 1e-9 * first[2]
                if np.any(np.abs(np.sort(lengths[[a, c, h]]) - first) > tol):
                    continue
                rows = np.array([v1, v2, cands[h] if dets[h] > 0 else -cands[h]])
                # among equally short bases, the one whose reciprocal vectors are closest to equal length: its
                # k-mesh is closest to uniform, so more of the crystal's rotations map it onto itself and the
                # irreducible wedge stays small (a skewed basis of the same lattice breaks the mesh's symmetry)
                recip = np.linalg.norm(np.linalg.inv(rows @ lattice), axis=0)
                spread = float(recip.max() / recip.min())
                if spread < best_spread * (1 - 1e-9):
                    best, best_spread = rows, spread
        if best is not None:
            return best
    if round(float(np.linalg.det(red))) < 0:
        red[2] = -red[2]
    return red


def _build_family(parent: Crystal, generator: str, description: str, q_frac, polarisation_cart,
                  phase: float | None = None) -> DistortionFamily | None:
    """Displacement pattern u_j ∝ e cos(2π q·x_j + φ) on the commensurate supercell; None if it moves nothing."""
    # q itself sets the phases of basis atoms; only q modulo the reciprocal lattice is reported and sets the cell
    q = _rationalise(q_frac)
    q_reduced = q - np.floor(q + 1e-9)
    m = commensurate_supercell(q_reduced, parent.lattice_A)
    ref = parent.supercell(m)
    # parent-fractional coordinates of every supercell atom (parent atom + lattice translation)
    x_parent = ref.frac @ m
    e = np.asarray(polarisation_cart, dtype=float)
    e = e / np.linalg.norm(e)
    phases = [phase] if phase is not None else [0.0, np.pi / 4, np.pi / 2]
    best = None
    # a wave whose nodes sit on every atom moves nothing: its sine partner (nodes moved a quarter period) is the
    # same pattern for a crystal written with another origin, so it is tried before the family is given up
    if phase is not None:
        c0 = np.cos(2 * np.pi * (x_parent @ q) + phase)
        if np.max(np.abs(c0)) < 1e-9:
            phases = [phase + np.pi / 2]
    for phi in phases:
        c = np.cos(2 * np.pi * (x_parent @ q) + phi)
        c[np.abs(c) < 1e-12] = 0.0
        score = np.mean(np.abs(c))
        if best is None or score > best[0] + 1e-9:
            best = (score, c, phi)
    _, c, phi = best
    if np.max(np.abs(c)) < 1e-9:
        return None
    pattern = c[:, None] * e[None, :] / np.max(np.abs(c))
    return DistortionFamily(
        generator=generator,
        description=description,
        q_frac=tuple(float(x) for x in q_reduced),
        q_label=fraction_label(q_reduced),
        supercell_matrix=m,
        reference=ref,
        pattern_A=pattern,
        polarisation=tuple(float(x) for x in e),
    )


def bonded_directions(parent) -> np.ndarray:
    """(3,) bool: True along lattice vectors that some nearest-neighbour bond of the parent crosses."""
    return np.any(_parent(parent).shells.image != 0, axis=0)


def _parent(parent, symprec: float | None = None):
    from screener.screen.parent import as_parent

    return as_parent(parent, symprec)


def follow_bonds(i: np.ndarray, j: np.ndarray, image: np.ndarray, shift: np.ndarray) -> np.ndarray:
    """Bond images after atoms were wrapped by integer ``shift`` (see DistortionFamily.at_with_shift)."""
    return image + shift[j] - shift[i]


def _distinct_directions(vectors: np.ndarray, rot_cart: np.ndarray) -> list[np.ndarray]:
    """Representatives of symmetry-distinct directions (a direction and its opposite are the same)."""
    units = vectors / np.linalg.norm(vectors, axis=1, keepdims=True)
    reps: list[np.ndarray] = []
    for u in units:
        images = rot_cart @ u
        if any(np.any(np.abs(np.abs(images @ r) - 1) < 1e-4) for r in reps):
            continue
        reps.append(u)
    return reps


# ----------------------------------------------------------------------------------------------- generators
def dimerise(parent, symprec: float = SYMPREC_A) -> list[DistortionFamily]:
    """One family per symmetry-distinct nearest-neighbour bond direction: a longitudinal zone-boundary mode.

    The cell doubles along the chain and sites move alternately along the bond, so consecutive bonds of that
    direction become short/long. q is the shortest half reciprocal-lattice vector h/2 with q·b ≡ 1/2 for every
    bond b of that direction (most nearly parallel to the chain).
    """
    ctx = _parent(parent, symprec)
    parent = ctx.crystal
    nl = ctx.shells
    rot = ctx.point_group_cart
    bond_frac = parent.frac[nl.j] + nl.image - parent.frac[nl.i]
    rec = parent.reciprocal_A
    h_all = np.array([h for h in itertools.product((-1, 0, 1), repeat=3) if any(h)], dtype=float)
    families = []
    for u in _distinct_directions(nl.vector_A, rot):
        par = np.abs(np.abs(nl.vector_A @ u) / nl.distance_A - 1) < 1e-4
        bf = bond_frac[par]
        best = None
        for h in h_all:
            q = h / 2
            if np.all(np.abs(np.mod(bf @ q, 1.0) - 0.5) < 1e-6):
                length = np.linalg.norm(q @ rec)
                if best is None or length < best[0] - 1e-9:
                    best = (length, q)
        if best is None:
            continue
        ucart = u if np.dot(u, [1, 2, 3]) >= 0 else -u
        fam = _build_family(
            parent, "dimerise",
            f"bonds along {_vec(ucart)} alternate short/long "
            f"(d = {nl.distance_A[par][0]:.3f} Å); cell doubled along the chain",
            best[1], ucart, phase=0.0,
        )
        if fam is not None:
            families.append(fam)
    return families


def _cubic_axes(ctx):
    """Three orthogonal unit vectors if every atom's first shell is six bonds along ±three orthogonal axes."""
    parent, nl = ctx.crystal, ctx.shells
    counts = np.bincount(nl.i, minlength=parent.n_atoms)
    if not np.all(counts == 6):
        return None, nl
    units = nl.vector_A / nl.distance_A[:, None]
    axes = _distinct_directions(units[nl.i == 0], np.eye(3)[None])
    if len(axes) != 3:
        return None, nl
    axes = np.array(axes)
    if np.max(np.abs(axes @ axes.T - np.eye(3))) > 0.05:
        return None, nl
    for a in range(parent.n_atoms):
        ua = units[nl.i == a]
        if not np.all(np.max(np.abs(ua @ axes.T), axis=1) > 0.95):
            return None, nl
    return axes, nl


def rhombohedral_split(parent, symprec: float = SYMPREC_A, relax_cell: bool = False
                       ) -> list[DistortionFamily]:
    """For (pseudo-)simple-cubic bond networks: sites move alternately along a body diagonal.

    Each site gets 3 short and 3 long bonds; a simple-cubic parent becomes R-3m (the A7 type). The wave-vector
    is the body-diagonal zone-boundary point of the simple-cubic bond network, q = (1,1,1)/(2 d) in the cubic
    axes, expressed in the parent's reciprocal basis. ``relax_cell`` lets the comparator relax the rhombohedral
    angle (a volume-conserving stretch along the same diagonal) together with the displacement.
    """
    ctx = _parent(parent, symprec)
    parent = ctx.crystal
    axes, nl = _cubic_axes(ctx)
    if axes is None:
        return []
    d = float(np.mean(nl.distance_A))
    # orient axes right-handed so the diagonal is well defined; sign choice does not matter by symmetry
    diag = axes.sum(axis=0)
    diag /= np.linalg.norm(diag)
    q_cart = axes.sum(axis=0) / (2 * d)
    q_frac = q_cart @ parent.lattice_A.T
    fam = _build_family(
        parent, "rhombohedral-split",
        "sites move alternately along a body diagonal of the simple-cubic bond network: 3 short + 3 long bonds"
        + ("; rhombohedral angle relaxed" if relax_cell else ""),
        q_frac, diag, phase=0.0,
    )
    if fam is not None and relax_cell:
        fam = replace(fam, strain_axis=tuple(float(x) for x in diag))
    return [fam] if fam is not None else []


def modulate(parent, q_frac, polarisation="longitudinal", phase: float = 0.0) -> DistortionFamily:
    """A commensurate displacement wave u_j = λ e cos(2π q·x_j + φ) with a chosen polarisation.

    ``polarisation``: 'longitudinal' (along q, the default) or a Cartesian vector (e.g. a bond direction).
    ``parent`` is a Parent or a Crystal.
    """
    parent = parent.crystal if hasattr(parent, "symmetry") else parent
    q = _rationalise(q_frac)
    if isinstance(polarisation, str):
        if polarisation != "longitudinal":
            raise ParameterError(
                f"polarisation must be 'longitudinal' or a Cartesian vector, got {polarisation!r}"
            )
        e = q @ parent.reciprocal_A
        if np.linalg.norm(e) < 1e-12:
            raise ParameterError("a longitudinal modulation needs q ≠ 0; give a polarisation vector for q = 0")
        kind = "longitudinal"
    else:
        e = np.asarray(polarisation, dtype=float)
        if e.shape != (3,) or np.linalg.norm(e) < 1e-12:
            raise ParameterError(f"polarisation vector must be 3 numbers, not all zero; got {polarisation!r}")
        kind = f"along {_vec(e / np.linalg.norm(e))}"
    fam = _build_family(parent, "modulate", f"{kind} displacement wave at q = {fraction_label(q)}", q, e, phase)
    if fam is None:
        raise ParameterError(f"the modulation at q = {fraction_label(q)} with phase {phase} moves no atom")
    return fam


def mode_family(parent, q_frac, vector, generator: str = "soft-mode", description: str = "") -> DistortionFamily | None:
    """The displacement pattern u_s(L) = Re(e_s exp(2πi q·L + iφ)) of one Φ(q) eigenvector on the commensurate
    supercell (convention of screener.screen.modes); φ ∈ {0, π/4, π/2} chosen to move the atoms most. ``vector``
    is (3N,) complex, atom-major. None if the pattern moves nothing."""
    crystal = parent.crystal if hasattr(parent, "symmetry") else parent
    q = _rationalise(q_frac)
    q_reduced = q - np.floor(q + 1e-9)
    m = commensurate_supercell(q_reduced, crystal.lattice_A)
    ref = crystal.supercell(m)
    from screener.structure.crystal import lattice_points_in_supercell

    trans = lattice_points_in_supercell(m)
    e = np.asarray(vector, dtype=complex).reshape(crystal.n_atoms, 3)
    wave = np.exp(2j * np.pi * (trans @ q_reduced))  # (det,)
    # supercell atoms are parent-atom-major: index s·det + t
    z = (e[:, None, :] * wave[None, :, None]).reshape(-1, 3)
    best = None
    for phi in (0.0, np.pi / 4, np.pi / 2):
        u = (z * np.exp(1j * phi)).real
        score = float(np.mean(np.linalg.norm(u, axis=1)))
        if best is None or score > best[0] + 1e-9:
            best = (score, u)
    u = best[1]
    norms = np.linalg.norm(u, axis=1)
    if norms.max() < 1e-9:
        return None
    u[norms < 1e-9 * norms.max()] = 0.0
    pattern = u / norms.max()
    pol = pattern[int(np.argmax(norms))]
    return DistortionFamily(
        generator=generator,
        description=description or f"soft pattern at q = {fraction_label(q_reduced)}",
        q_frac=tuple(float(x) for x in q_reduced),
        q_label=fraction_label(q_reduced),
        supercell_matrix=m,
        reference=ref,
        pattern_A=pattern,
        polarisation=tuple(float(x) for x in pol / np.linalg.norm(pol)),
    )


def soft_modes(parent, q_grid: int = SOFT_MODE_Q_GRID, max_modes: int = SOFT_MODE_MAX,
               max_atoms: int = SOFT_MODE_MAX_ATOMS, notes: list | None = None) -> list[DistortionFamily]:
    """Candidates from the parent's own stiffness: the softest eigenvectors of Φ(q) over the q grid (one per q
    star, most negative first), each as a family of its own (generator 'soft-mode'). A uniform translation at Γ is
    not a pattern. ``notes`` gets the q searched and what was left out."""
    from screener.screen.modes import describe_pattern, survey

    ctx = _parent(parent)
    res = survey(ctx, q_grid)
    n = ctx.crystal.n_atoms
    found = []
    for st in res.stiffness:
        vals, vecs = st.eigenvalues_eV_per_A2, st.patterns
        scale = 1e-6 * max(1.0, float(np.max(np.abs(vals))))
        for a in np.flatnonzero(vals < -scale):
            v = vecs[:, a]
            if not any(st.q_frac):
                # remove the uniform translation component (it moves nothing relative to anything); what is left
                # must still move atoms
                t = v.reshape(n, 3).mean(axis=0)
                if np.linalg.norm(v.reshape(n, 3) - t) < 1e-3:
                    continue
                v = (v.reshape(n, 3) - t).reshape(-1)
            # a degenerate soft level: its eigenvectors are an arbitrary basis, so take the most symmetric
            # pattern of the level (the A7 split of simple cubic is the (1,1,1) combination of three at R)
            level = np.flatnonzero(np.abs(vals - vals[a]) < 1e-4 * max(1.0, abs(float(vals[a]))))
            patterns = _symmetric_patterns(ctx, st.q_frac, vecs[:, level]) if len(level) > 1 else [v]
            found.append((float(vals[a]), st.q_frac, patterns))
            break  # the softest level of this q
    found.sort(key=lambda x: x[0])
    if notes is not None:
        notes.append(f"soft-mode search: {len(res.searched)} q (denominators up to {q_grid}), "
                     f"{len(found)} soft, the {min(max_modes, len(found))} softest handed on")
    out = []
    for value, q, patterns in found[:max_modes]:
        for v in patterns:
            fam = mode_family(ctx, q, v, description=f"soft pattern ({value:.2f} eV/Å²): "
                                                       f"{describe_pattern(ctx.crystal, v, q)}")
            if fam is None:
                continue
            if fam.reference.n_atoms > max_atoms:
                if notes is not None:
                    notes.append(f"soft pattern at q = {fam.q_label} needs {fam.reference.n_atoms} atoms (limit "
                                 f"{max_atoms}): left out")
                break
            out.append(fam)
    return out


#: Trial directions for the most symmetric pattern of a degenerate level: ⟨100⟩, ⟨110⟩, ⟨111⟩ (Cartesian).
_TRIAL_DIRECTIONS = np.array([d for d in itertools.product((-1, 0, 1), repeat=3) if any(d)
                              and next(x for x in d if x) > 0], dtype=float)


def _symmetric_patterns(ctx, q_frac, basis: np.ndarray, most: int = 3) -> list[np.ndarray]:
    """High-symmetry vectors of a degenerate level spanned by ``basis`` (3N × d): the projections of one Cartesian
    direction on every atom (⟨100⟩, ⟨110⟩, ⟨111⟩) and the basis itself, one per distinct space group of the
    distorted structure, most symmetric first (at most ``most``). At harmonic order they cost the same; which one
    the crystal takes is decided by the energy at finite amplitude, so each becomes a candidate (at R of simple
    cubic: the tetragonal, orthorhombic and the A7 rhombohedral split)."""

    n = ctx.crystal.n_atoms
    q_basis, _ = np.linalg.qr(basis)
    trials = []
    for d in _TRIAL_DIRECTIONS:
        t = np.tile(d / np.linalg.norm(d), n).astype(complex)
        proj = q_basis @ (q_basis.conj().T @ t)
        if np.linalg.norm(proj) > 1e-3:
            trials.append(proj / np.linalg.norm(proj))
    trials += [q_basis[:, k] for k in range(q_basis.shape[1])]
    return _one_per_product_group(ctx, ((v, mode_family(ctx, q_frac, v)) for v in trials), most)


def _one_per_product_group(ctx, candidates, most: int) -> list:
    """From (payload, family or None) pairs: the payload of the most symmetric family per distinct space group of
    the distorted structure (operations per atom at a small amplitude; the first wins a tie), most symmetric
    groups first, at most ``most``."""
    from screener.structure.symmetry import analyse

    by_group: dict[int, tuple[float, object]] = {}
    for payload, fam in candidates:
        if fam is None:
            continue
        sym = analyse(fam.at(0.05), ctx.settings.symprec_A)
        ops = len(sym.rotations) / fam.reference.n_atoms
        if sym.number not in by_group or ops > by_group[sym.number][0] + 1e-9:
            by_group[sym.number] = (ops, payload)
    ranked = sorted(by_group.items(), key=lambda kv: (-kv[1][0], -kv[0]))
    return [payload for _, (_, payload) in ranked[:most]]


#: Trial strains (Voigt) for the most symmetric members of a degenerate unstable strain level: uniaxial,
#: tetragonal, orthorhombic, simple shears, trigonal shears along the body diagonals.
_TRIAL_STRAINS = np.array([
    [1, 0, 0, 0, 0, 0], [0, 1, 0, 0, 0, 0], [0, 0, 1, 0, 0, 0],
    [2, -1, -1, 0, 0, 0], [-1, 2, -1, 0, 0, 0], [-1, -1, 2, 0, 0, 0],
    [1, -1, 0, 0, 0, 0], [1, 0, -1, 0, 0, 0], [0, 1, -1, 0, 0, 0],
    [0, 0, 0, 1, 0, 0], [0, 0, 0, 0, 1, 0], [0, 0, 0, 0, 0, 1],
    [0, 0, 0, 1, 1, 1], [0, 0, 0, 1, -1, -1], [0, 0, 0, -1, 1, -1], [0, 0, 0, -1, -1, 1],
], dtype=float)


def strain_family(parent, voigt, description: str = "", generator: str = "soft-mode") -> DistortionFamily:
    """A homogeneous-strain family of the parent's own cell: L → L (1 + λ E(voigt)), positions kept, with λ the
    largest change of a nearest-neighbour bond vector (Å), so its scan range is that of the displacement families."""
    from screener.screen.modes import strain_matrix

    ctx = _parent(parent)
    crystal = ctx.crystal
    e = strain_matrix(np.asarray(voigt, dtype=float))
    bonds = ctx.shells.vector_A
    scale = float(np.max(np.linalg.norm(bonds @ e, axis=1)))
    if scale < 1e-12:
        raise ParameterError("the strain changes no nearest-neighbour bond")
    e = e / scale
    w, v = np.linalg.eigh(e)
    axis = v[:, int(np.argmax(np.abs(w)))]
    return DistortionFamily(
        generator=generator, description=description or "homogeneous strain", q_frac=(0.0, 0.0, 0.0),
        q_label=fraction_label((0, 0, 0)), supercell_matrix=np.eye(3, dtype=int), reference=crystal,
        pattern_A=np.zeros((crystal.n_atoms, 3)), polarisation=tuple(float(x) for x in axis), strain_tensor=e)


def strain_instabilities(parent, most: int = 3, notes: list | None = None) -> list[DistortionFamily]:
    """Candidates from the parent's unstable homogeneous strains (negative eigenvalues of its elastic constants,
    screener.screen.modes.strain_stiffness): per degenerate level, one strain per distinct product space group,
    most symmetric first (at most ``most``). A cell with vacuum has none."""
    from screener.screen.modes import describe_strain, strain_stiffness

    ctx = _parent(parent)
    if not all(ctx.model.periodic):
        return []
    st = strain_stiffness(ctx)
    out = []
    for value, basis in st.unstable:
        q_basis, _ = np.linalg.qr(basis)
        trials = [q_basis @ (q_basis.T @ t) for t in _TRIAL_STRAINS]
        if all(np.linalg.norm(t) < 1e-3 for t in trials):
            trials = [q_basis[:, k] for k in range(basis.shape[1])]  # no standard strain in the level: its basis
        fams = []
        for t in trials:
            if np.linalg.norm(t) < 1e-3:
                continue
            t = t / np.linalg.norm(t)
            try:
                fams.append(strain_family(ctx, t, description=f"unstable strain "
                                                              f"({describe_strain((value, t[:, None]))})"))
            except ParameterError:
                continue
        out += _one_per_product_group(ctx, ((f, f) for f in fams), most)
    if notes is not None:
        notes.append(f"strain search: {len(st.unstable)} unstable strain level(s) of the model's elastic constants, "
                     f"{len(out)} strain candidate(s) handed on")
    return out


def zone_boundary_points(parent, symprec: float = SYMPREC_A) -> list[np.ndarray]:
    """Symmetry-distinct non-zero time-reversal-invariant points q ∈ {0, 1/2}³ of the parent's reciprocal cell."""
    ctx = _parent(parent, symprec)
    rots = ctx.symmetry.rotations
    bonded = bonded_directions(ctx)
    out: list[np.ndarray] = []
    for h in itertools.product((0, 0.5), repeat=3):
        q = np.array(h)
        # a wave along a direction no bond crosses (vacuum) only moves isolated pieces rigidly
        if not q.any() or np.any(q[~bonded] != 0):
            continue
        # k transforms with the transpose of the fractional rotation
        star = np.einsum("nji,j->ni", rots, q)
        if any(np.any(np.all(np.abs(np.mod(star - p + 1e-9, 1.0) - 1e-9) < 1e-6, axis=1)) for p in out):
            continue
        out.append(q)
    return out


def _same_mode(a: DistortionFamily, b: DistortionFamily, rot_frac: np.ndarray, rot_cart: np.ndarray) -> bool:
    """True if b is a symmetry image of a (same q star and polarisation)."""
    if (a.strain_tensor is None) != (b.strain_tensor is None):
        return False  # a cell strain and an atomic displacement pattern are never the same candidate
    qa, qb = np.array(a.q_frac), np.array(b.q_frac)
    star = np.einsum("nji,j->ni", rot_frac, qa)
    diff = star - qb
    q_match = np.all(np.abs(diff - np.round(diff)) < 1e-6, axis=1)
    e_match = np.abs(np.abs((rot_cart @ np.array(a.polarisation)) @ np.array(b.polarisation)) - 1) < 1e-6
    return bool(np.any(q_match & e_match))


def default_candidates(parent, generators=None, extra_q=(), symprec: float = SYMPREC_A,
                       relax_cell: bool = False, notes: list | None = None) -> list[DistortionFamily]:
    """The default candidate set: every applicable dimerise and rhombohedral-split, plus longitudinal modulations
    at the zone-boundary points of the parent's cell; duplicates by symmetry are dropped (first name wins).

    ``generators`` restricts the set (names from GENERATORS); ``extra_q`` adds longitudinal modulations;
    ``relax_cell`` relaxes the rhombohedral angle of the rhombohedral split. ``parent`` is a Parent (see
    screener.screen.parent) or a Crystal. ``notes`` (a list) collects one line per family that moves no atom.
    """
    parent = _parent(parent, symprec)
    gens = tuple(generators) if generators else DEFAULT_GENERATORS
    bad = [g for g in gens if g not in GENERATORS]
    if bad:
        raise ParameterError(f"unknown generator {bad[0]!r}; choose from {', '.join(GENERATORS)}")
    fams: list[DistortionFamily] = []
    if "dimerise" in gens:
        fams += dimerise(parent, symprec)
    if "rhombohedral-split" in gens:
        fams += rhombohedral_split(parent, symprec, relax_cell=relax_cell)
    qs = [np.asarray(q, dtype=float) for q in extra_q]
    if "modulate" in gens:
        qs = [q for q in zone_boundary_points(parent, symprec)] + qs
    for q in qs:
        try:
            fams.append(modulate(parent, q))
        except ParameterError as exc:
            if any(np.allclose(q, x) for x in extra_q):
                raise
            if notes is not None:
                notes.append(f"no displacement pattern of the modulate kind at q = {fraction_label(q)}: {exc}")
    if "soft-mode" in gens:
        fams += soft_modes(parent, notes=notes)
        fams += strain_instabilities(parent, notes=notes)
    rot_frac = parent.symmetry.rotations
    rot_cart = parent.point_group_cart
    unique: list[DistortionFamily] = []
    for f in fams:
        if not any(_same_mode(u, f, rot_frac, rot_cart) for u in unique):
            unique.append(f)
    return unique

