"""Linear tetrahedron method: per-tetrahedron formulas and the corner tables of a grid.

Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

# ============================================================================================== tetrahedra
# Corner offsets of one grid parallelepiped; corner c has offset bits (c & 1, c >> 1 & 1, c >> 2 & 1).
_CORNER_BITS = np.array([[c & 1, (c >> 1) & 1, (c >> 2) & 1] for c in range(8)])
# The six tetrahedra sharing the main diagonal 0 → (1,1,1): monotone edge paths through the cube, one per
# permutation of the axes (the Freudenthal/Kuhn split; Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), Fig. 2).
_PATHS = np.array([
    [[0, 0, 0], e1, e1 + e2, [1, 1, 1]]
    for e1, e2 in (
        (np.eye(3, dtype=int)[a], np.eye(3, dtype=int)[b])
        for a, b in ((0, 1), (0, 2), (1, 0), (1, 2), (2, 0), (2, 1))
    )
])  # (6, 4, 3)
# Reflections mapping the 0 → 111 diagonal onto each of the four main diagonals.
_FLIPS = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])


def _tetra_offsets(mesh, reciprocal_A) -> np.ndarray:
    """(6, 4, 3) integer corner offsets of the six tetrahedra, split along the shortest main diagonal.

    Directions with a single mesh point are constant (no dispersion is sampled), so their step is taken as
    zero when comparing diagonals; the split then reduces exactly to the lower-dimensional one.
    """
    if reciprocal_A is None:
        flip = _FLIPS[0]
    else:
        rec = np.asarray(reciprocal_A, dtype=float)
        steps = rec / np.asarray(mesh, dtype=float)[:, None]
        steps[np.asarray(mesh) == 1] = 0.0
        signs = 1 - 2 * _FLIPS  # (4, 3)
        lengths = np.linalg.norm(signs @ steps, axis=1)
        # first diagonal within rounding of the shortest, so equal diagonals give a reproducible choice
        flip = _FLIPS[int(np.flatnonzero(lengths <= lengths.min() * (1 + 1e-9) + 1e-300)[0])]
    return np.bitwise_xor(_PATHS, flip[None, None, :])


@lru_cache(maxsize=16)
def _split_flip_cached(mesh: tuple, rec: bytes | None) -> tuple[int, int, int]:
    r = None if rec is None else np.frombuffer(rec, dtype=float).reshape(3, 3)
    return tuple(int(x) for x in _tetra_offsets(np.asarray(mesh), r)[0, 0])


def _split_flip(mesh, reciprocal_A) -> tuple[int, int, int]:
    """Start of the main diagonal `_tetra_offsets` splits along (path 0 starts there), kept per (mesh, vectors)."""
    rec = None if reciprocal_A is None else np.ascontiguousarray(reciprocal_A, dtype=float).reshape(3, 3).tobytes()
    return _split_flip_cached(tuple(int(m) for m in mesh), rec)


def _pieces(e, eps):
    """``eps`` broadcast to the rows of sorted corner energies e (n, 4), and the masks of the three partly
    occupied cases ε1 < ε ≤ ε2, ε2 < ε ≤ ε3, ε3 < ε < ε4 (Blöchl, Jepsen & Andersen 1994, App. B)."""
    eps = np.broadcast_to(np.asarray(eps, dtype=float), (len(e),))
    e1, e2, e3, e4 = e.T
    return eps, (e1 < eps) & (eps <= e2), (e2 < eps) & (eps <= e3), (e3 < eps) & (eps < e4)


def _tet_count(e, eps):
    """Occupied fraction of each tetrahedron, rows of sorted corner energies e (n, 4) (Blöchl 1994, App. B)."""
    eps, c1, c2, c3 = _pieces(e, eps)
    out = np.zeros(len(e))
    out[eps >= e[:, 3]] = 1.0
    if c1.any():
        a1, a2, a3, a4 = e[c1].T
        out[c1] = (eps[c1] - a1) ** 3 / ((a2 - a1) * (a3 - a1) * (a4 - a1))
    if c2.any():
        a1, a2, a3, a4 = e[c2].T
        x = eps[c2] - a2
        d21, d31, d41, d32, d42 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2
        out[c2] = (d21**2 + 3 * d21 * x + 3 * x**2 - (d31 + d42) / (d32 * d42) * x**3) / (d31 * d41)
    if c3.any():
        a1, a2, a3, a4 = e[c3].T
        out[c3] = 1.0 - (a4 - eps[c3]) ** 3 / ((a4 - a1) * (a4 - a2) * (a4 - a3))
    return out


def _dos_piece(k: int, a1, a2, a3, a4, x):
    """Per-tetrahedron DOS (states/eV per unit volume fraction) on piece k (1: ε1 < x ≤ ε2, 2: ε2 < x ≤ ε3,
    3: ε3 < x < ε4) of sorted corners a1 ≤ a2 ≤ a3 ≤ a4 (Blöchl 1994, App. C); x a scalar or matching array."""
    if k == 1:
        return 3 * (x - a1) ** 2 / ((a2 - a1) * (a3 - a1) * (a4 - a1))
    if k == 2:
        y = x - a2
        d21, d31, d41, d32, d42 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2
        return (3 * d21 + 6 * y - 3 * (d31 + d42) / (d32 * d42) * y**2) / (d31 * d41)
    return 3 * (a4 - x) ** 2 / ((a4 - a1) * (a4 - a2) * (a4 - a3))


def _weights_piece(k: int, a1, a2, a3, a4, x) -> np.ndarray:
    """(m, 4) integration weights of the sorted corners on piece k (as in `_dos_piece`), without Blöchl's
    correction (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), Appendix B)."""
    if k == 1:
        x = x - a1
        d21, d31, d41 = a2 - a1, a3 - a1, a4 - a1
        c = 0.25 * x**3 / (d21 * d31 * d41)
        return np.stack([c * (4 - x * (1 / d21 + 1 / d31 + 1 / d41)), c * x / d21, c * x / d31, c * x / d41], 1)
    if k == 2:
        d31, d41, d32, d42 = a3 - a1, a4 - a1, a3 - a2, a4 - a2
        x1, x2, y3, y4 = x - a1, x - a2, a3 - x, a4 - x
        k1 = 0.25 * x1**2 / (d41 * d31)
        k2 = 0.25 * x1 * x2 * y3 / (d41 * d32 * d31)
        k3 = 0.25 * x2**2 * y4 / (d42 * d32 * d41)
        return np.stack([
            k1 + (k1 + k2) * y3 / d31 + (k1 + k2 + k3) * y4 / d41,
            k1 + k2 + k3 + (k2 + k3) * y3 / d32 + k3 * y4 / d42,
            (k1 + k2) * x1 / d31 + (k2 + k3) * x2 / d32,
            (k1 + k2 + k3) * x1 / d41 + k3 * x2 / d42,
        ], 1)
    y = a4 - x
    d41, d42, d43 = a4 - a1, a4 - a2, a4 - a3
    c = 0.25 * y**3 / (d41 * d42 * d43)
    return np.stack([0.25 - c * y / d41, 0.25 - c * y / d42, 0.25 - c * y / d43,
                     0.25 - c * (4 - y * (1 / d41 + 1 / d42 + 1 / d43))], 1)


def _tet_dos(e, eps):
    """DOS of each tetrahedron per unit of its volume fraction, states/eV (Blöchl 1994, App. C)."""
    eps, c1, c2, c3 = _pieces(e, eps)
    out = np.zeros(len(e))
    for k, c in ((1, c1), (2, c2), (3, c3)):
        if c.any():
            out[c] = _dos_piece(k, *e[c].T, eps[c])
    return out


def _tet_weights(e, eps):
    """(n, 4) integration weights of the sorted corners per unit volume fraction, without Blöchl's correction.

    Σ_i w_i is the occupied fraction and Σ_i w_i ε_i the linearly interpolated occupied energy
    (Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), Appendix B).
    """
    eps, c1, c2, c3 = _pieces(e, eps)
    w = np.zeros((len(e), 4))
    w[eps >= e[:, 3]] = 0.25
    for k, c in ((1, c1), (2, c2), (3, c3)):
        if c.any():
            w[c] = _weights_piece(k, *e[c].T, eps[c])
    return w


def _tet_weights_blochl(e, eps, h):
    """``_tet_weights(e, eps)`` plus Blöchl's correction with D_T(ε_F) the mean of ``_tet_dos`` at eps ∓ h."""
    d_f = 0.5 * (_tet_dos(e, eps - h) + _tet_dos(e, eps + h))
    # Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), eq. 22: dw_i = D_T(ε_F)/40 Σ_j (ε_j − ε_i)
    return _tet_weights(e, eps) + d_f[:, None] / 40.0 * (e.sum(1, keepdims=True) - 4 * e)


def _tet_weights_at(e, eps: float, h: float = 0.0, blochl: bool = False) -> np.ndarray:
    """``_tet_weights_blochl(e, eps, h)`` (``blochl``) or ``_tet_weights(e, eps)`` for one energy ``eps``, the same
    formulas evaluated piece by piece on contiguous columns (one classification per energy, index gathers)."""
    n = len(e)
    cols = [np.ascontiguousarray(e[:, i]) for i in range(4)]

    def piece(x):  # 1: ε1 < x ≤ ε2, 2: ε2 < x ≤ ε3, 3: ε3 < x < ε4, else 4 if x ≥ ε4, else 0 (as in _pieces)
        p = (cols[0] < x).view(np.int8) + (cols[1] < x).view(np.int8)
        p += (cols[2] < x).view(np.int8)
        p[(cols[3] <= x) & ((p == 3) | (p == 0))] = 4
        return p

    w = np.zeros((n, 4))
    p = piece(eps)
    w[p == 4] = 0.25
    d_lo, d_hi = np.zeros(n), np.zeros(n)
    # usually no corner lies within h of eps, so every row sits on the same piece at eps − h, eps and eps + h:
    # then the DOS at eps ∓ h is taken from the corners gathered for the weights
    shared = blochl and np.array_equal(piece(eps - h), p) and np.array_equal(piece(eps + h), p)
    for k in (1, 2, 3):
        idx = np.flatnonzero(p == k)
        if len(idx):
            a = [c.take(idx) for c in cols]
            w[idx] = _weights_piece(k, *a, eps)
            if shared:
                d_lo[idx] = _dos_piece(k, *a, eps - h)
                d_hi[idx] = _dos_piece(k, *a, eps + h)
    if not blochl:
        return w
    for x, out in () if shared else ((eps - h, d_lo), (eps + h, d_hi)):  # _tet_dos at eps ∓ h
        p = piece(x)
        for k in (1, 2, 3):
            idx = np.flatnonzero(p == k)
            if len(idx):
                out[idx] = _dos_piece(k, *(c.take(idx) for c in cols), x)
    d_f = 0.5 * (d_lo + d_hi)
    # Blöchl, Jepsen & Andersen, PRB 49, 16223 (1994), eq. 22: dw_i = D_T(ε_F)/40 Σ_j (ε_j − ε_i)
    return w + d_f[:, None] / 40.0 * (e.sum(1, keepdims=True) - 4 * e)


def _tet_corner_dos(e, eps):
    """(n, 4) DOS carried by each sorted corner per unit volume fraction (sums to ``_tet_dos``).

    The linear interpolant's constant-energy cross-section is a triangle or a quadrilateral; each corner's share
    is the cross-section average of its barycentric coordinate (affine maps keep area ratios, so areas are
    measured in barycentric space).
    """
    n = len(e)
    out = np.zeros((n, 4))
    dos = _tet_dos(e, eps)
    eps, c1, c2, c3 = _pieces(e, eps)
    if c1.any():
        a = e[c1]
        t = (eps[c1][:, None] - a[:, :1]) / (a[:, 1:] - a[:, :1])  # positions along edges 1→2, 1→3, 1→4
        lam = np.concatenate([(3 - t.sum(1, keepdims=True)), t], 1) / 3
        out[c1] = dos[c1, None] * lam
    if c3.any():
        a = e[c3]
        t = (a[:, 3:] - eps[c3][:, None]) / (a[:, 3:] - a[:, :3])  # positions along edges 4→1, 4→2, 4→3
        lam = np.concatenate([t, (3 - t.sum(1, keepdims=True))], 1) / 3
        out[c3] = dos[c3, None] * lam
    if c2.any():
        a = e[c2]
        eye = np.eye(4)

        def point(i, j):  # barycentric coordinates of the crossing on edge i→j
            t = ((eps[c2] - a[:, i]) / (a[:, j] - a[:, i]))[:, None]
            return (1 - t) * eye[i] + t * eye[j]

        p13, p14, p24, p23 = point(0, 2), point(0, 3), point(1, 3), point(1, 2)

        def area(p, q, r):
            u, v = q - p, r - p
            return 0.5 * np.sqrt(np.maximum((u * u).sum(1) * (v * v).sum(1) - (u * v).sum(1) ** 2, 0.0))

        s1, s2 = area(p13, p14, p24), area(p13, p24, p23)
        tot = s1 + s2
        tot = np.where(tot > 0, tot, 1.0)
        lam = (s1[:, None] * (p13 + p14 + p24) + s2[:, None] * (p13 + p24 + p23)) / (3 * tot[:, None])
        # a zero-area cross-section (degenerate corners) carries no DOS anyway; fall back to equal shares
        lam = np.where((s1 + s2)[:, None] > 0, lam, 0.25)
        out[c2] = dos[c2, None] * lam
    return out



@lru_cache(maxsize=4)
def _cube_corner_index(mesh: tuple[int, int, int]) -> np.ndarray:
    """(8, N) row-major grid index of cube corner c (offset bits ``_CORNER_BITS[c]``) of every grid point p, wrapped
    periodically; each is an outer sum of three wrapped axis ranges. Kept between calls (read-only)."""
    m = tuple(int(x) for x in mesh)
    out = np.empty((8,) + m, dtype=np.int64)
    for c in range(8):  # eight cube corners, not k-points
        x, y, z = (int(v) for v in _CORNER_BITS[c])
        i0 = (np.arange(m[0]) + x) % m[0]
        i1 = (np.arange(m[1]) + y) % m[1]
        i2 = (np.arange(m[2]) + z) % m[2]
        np.add((i0[:, None] * m[1] + i1[None, :])[:, :, None] * m[2], i2[None, None, :], out=out[c])
    out = out.reshape(8, -1)
    out.setflags(write=False)
    return out


def _path_corners(flip) -> np.ndarray:
    """(6, 4) cube-corner number of each corner of the six tetrahedra split along the diagonal from ``flip``."""
    return (_PATHS ^ np.asarray(flip, dtype=int)[None, None, :]) @ np.array([1, 2, 4])


@lru_cache(maxsize=8)
def _corner_table(mesh: tuple[int, int, int], flip: tuple[int, int, int]) -> np.ndarray:
    """(6N, 4) row-major grid index of every tetrahedron corner; tetrahedron jN + p is path j from point p.

    Depends only on the mesh and the chosen diagonal, so it is kept between calls (read-only).
    """
    cube = _cube_corner_index(tuple(int(x) for x in mesh))
    bits = _path_corners(flip)
    n_full = cube.shape[1]
    table = np.empty((6, n_full, 4), dtype=np.int64)
    for j in range(6):  # six tetrahedra of a cube
        for c in range(4):  # four corners
            table[j, :, c] = cube[bits[j, c]]
    table = table.reshape(-1, 4)
    table.setflags(write=False)
    return table


def _row_extremes(bands: np.ndarray, mesh, flip) -> tuple[np.ndarray, np.ndarray]:
    """Lowest and highest corner energy of every tetrahedron for each band of ``bands`` (nb, N) on the full grid;
    each (nb, T), tetrahedron jN + p.

    All six tetrahedra of a grid cube share the flipped main diagonal, so the grid is padded periodically once,
    each cube corner is a shifted view of it, and the diagonal's extremes are shared by the six.
    """
    nb = bands.shape[0]
    m = tuple(int(x) for x in mesh)
    grid = bands.reshape((nb,) + m)
    pad = np.empty((nb, m[0] + 1, m[1] + 1, m[2] + 1))
    pad[:, :-1, :-1, :-1] = grid
    pad[:, -1, :-1, :-1] = grid[:, 0]
    pad[:, :, -1, :-1] = pad[:, :, 0, :-1]
    pad[:, :, :, -1] = pad[:, :, :, 0]
    f = int(flip[0]) | int(flip[1]) << 1 | int(flip[2]) << 2  # cube-corner number of the diagonal's start

    def corner(c):  # view: energies at cube corner c of every grid point, (nb, m0, m1, m2)
        x, y, z = (int(v) for v in _CORNER_BITS[c])
        return pad[:, x:x + m[0], y:y + m[1], z:z + m[2]]

    dmin = np.minimum(corner(f), corner(7 ^ f))
    dmax = np.maximum(corner(f), corner(7 ^ f))
    row_min = np.empty((nb, 6) + m)
    row_max = np.empty((nb, 6) + m)
    bits = (_PATHS ^ np.asarray(flip)[None, None, :]) @ np.array([1, 2, 4])  # (6, 4) cube-corner numbers
    # each path's second corner is one of three, shared by two paths: fold the diagonal into those once
    with_diag = {int(c1): (np.minimum(corner(c1), dmin), np.maximum(corner(c1), dmax)) for c1 in set(bits[:, 1])}
    for j, (_, c1, c2, _) in enumerate(bits):  # the six tetrahedra of a cube
        np.minimum(with_diag[int(c1)][0], corner(c2), out=row_min[:, j])
        np.maximum(with_diag[int(c1)][1], corner(c2), out=row_max[:, j])
    return row_min.reshape(nb, -1), row_max.reshape(nb, -1)


def _sort4(e: np.ndarray) -> list[np.ndarray]:
    """Columns of the rows of ``e`` (n, 4) sorted ascending (values only; a five-comparator network, which beats
    a per-row argsort by an order of magnitude)."""
    c = [e[:, i] for i in range(4)]
    for i, j in ((0, 1), (2, 3), (0, 2), (1, 3), (1, 2)):
        c[i], c[j] = np.minimum(c[i], c[j]), np.maximum(c[i], c[j])
    return c


def _sort4_stable(e: np.ndarray, corner: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows of ``e`` (n, 4) sorted ascending, ``corner`` permuted alike; tied corners keep their order.

    Odd–even transposition (four rounds of adjacent comparators) swaps only strictly greater neighbours, so the
    result equals ``argsort(kind="stable")`` exactly.
    """
    ec = [e[:, i] for i in range(4)]
    cc = [corner[:, i] for i in range(4)]
    for i in (0, 2, 1, 0, 2, 1):
        j = i + 1
        swap = ec[i] > ec[j]
        ec[i], ec[j] = np.where(swap, ec[j], ec[i]), np.where(swap, ec[i], ec[j])
        cc[i], cc[j] = np.where(swap, cc[j], cc[i]), np.where(swap, cc[i], cc[j])
    return np.stack(ec, 1), np.stack(cc, 1)


