"""The tetrahedron grid of one k-mesh: row windows, electron count, Fermi level, occupations, DOS."""

from __future__ import annotations

import threading

import numpy as np

from screener.bz.common import _CHUNK_ROWS, _gap, _pair_blocks, _solve_count
from screener.bz.kmesh import IrreducibleMesh, RecentItems
from screener.bz.tetrahedron import (
    _corner_table,
    _cube_corner_index,
    _path_corners,
    _row_extremes,
    _sort4,
    _sort4_stable,
    _split_flip,
    _tet_corner_dos,
    _tet_count,
    _tet_dos,
    _tet_weights_at,
)
from screener.errors import ParameterError


class _MeshTables:
    """What a tetrahedron grid needs of its k-mesh alone (not of the energies): grid → irreducible point, the
    distinct tetrahedra with their multiplicities, grid points per irreducible point."""

    __slots__ = ("key", "source", "mapping", "grid_address", "grid_to_ir", "corner_ir", "corner_cols", "mult",
                 "n_tet", "k_count", "point_rows", "lock")

    def rows_at_points(self):
        """(rows, starts): the distinct tetrahedra having irreducible point k as a corner are
        ``rows[starts[k]:starts[k + 1]]`` (a tetrahedron with a repeated corner appears once per corner). Built on
        first use and kept (read-only)."""
        with self.lock:
            if self.point_rows is None:
                flat = self.corner_ir.reshape(-1)
                # the stable sort of 16-bit keys is a radix sort (several times faster; the same order)
                key = flat.astype(np.uint16) if len(self.k_count) <= 1 << 16 else flat
                order = np.argsort(key, kind="stable")
                rows = order // 4
                if len(self.corner_ir) < 1 << 31:  # half the memory (it is kept with the mesh's tables)
                    rows = rows.astype(np.int32)
                starts = np.zeros(len(self.k_count) + 1, dtype=np.int64)
                np.cumsum(np.bincount(flat, minlength=len(self.k_count)), out=starts[1:])
                rows.setflags(write=False)
                starts.setflags(write=False)
                self.point_rows = (rows, starts)
            return self.point_rows


#: Tables of the last few meshes: a screen integrates many models on one mesh and symmetry, and the tables cost
#: more than an integration. A hit needs equal mapping and grid addresses (compared in full, not hashed), or the
#: very mesh object the tables were built from when its arrays are read-only (as `irreducible_mesh` returns them).
#: The tables are read-only.
_TABLE_CACHE = RecentItems(4)


def _mesh_tables(kmesh: IrreducibleMesh, mesh: tuple, flip: tuple, n_ir: int) -> _MeshTables:
    """The tables of ``kmesh`` split along the diagonal from ``flip``: from the cache, or built and cached."""
    mapping, addr = np.asarray(kmesh.mapping), np.asarray(kmesh.grid_address)
    key = (mesh, flip, n_ir, mapping.shape, addr.shape)
    frozen = not (mapping.flags.writeable or addr.flags.writeable)
    def same(t):
        return t.key == key and ((frozen and t.source is kmesh) or (np.array_equal(t.mapping, mapping)
                                                                    and np.array_equal(t.grid_address, addr)))

    hit = _TABLE_CACHE.find(same)
    if hit is not None:
        return hit
    t = _build_mesh_tables(mapping, addr, mesh, flip, n_ir)
    t.key = key
    t.source = kmesh if frozen else None
    return _TABLE_CACHE.add(t)


def _build_mesh_tables(mapping: np.ndarray, addr: np.ndarray, mesh: tuple, flip: tuple, n_ir: int) -> _MeshTables:
    n_full = int(np.prod(mesh))
    m = np.asarray(mesh, dtype=np.int64)
    if len(mapping) != n_full or len(addr) != n_full:
        raise ParameterError(
            f"the tetrahedron method needs the full {tuple(mesh)} grid ({n_full} points), but the k-mesh holds "
            f"{len(mapping)}; build it with screener.bz.kmesh.irreducible_mesh"
        )
    a = addr.astype(np.int64)
    if a.size and a.min() >= -m.min() and a.max() < m.min():  # usual addresses: one wrap
        a = a + m * (a < 0)
    else:
        a = np.mod(a, m)
    flat = (a[:, 0] * m[1] + a[:, 1]) * m[2] + a[:, 2]
    if np.any(np.bincount(flat, minlength=n_full) != 1):
        raise ParameterError(f"k-mesh grid addresses do not cover the {tuple(mesh)} grid once each")
    grid_to_ir = np.empty(n_full, dtype=np.int64)  # grid point (row-major index) -> irreducible point
    grid_to_ir[flat] = mapping.astype(np.int64)
    t = _MeshTables()
    t.point_rows, t.lock = None, threading.Lock()
    t.mapping, t.grid_address = mapping.copy(), addr.copy()
    t.n_tet = 6 * n_full
    t.k_count = np.bincount(grid_to_ir, minlength=n_ir)
    t.mult, t.corner_cols = None, None
    if n_ir == n_full and np.array_equal(grid_to_ir, np.arange(n_full)):
        t.grid_to_ir, t.corner_ir = None, _corner_table(mesh, flip)
    else:
        t.grid_to_ir, t.corner_ir = grid_to_ir, None
        # Tetrahedra whose corners are the same irreducible points carry the same energies in every band, so one
        # of each, weighted by how many it stands for, gives the same sums; corners in ascending point order.
        if float(n_ir) ** 4 < 2.0**62:
            # (8, N) irreducible point at each cube corner of each grid point (32-bit: half the memory traffic)
            cube_ir = grid_to_ir.astype(np.int32)[_cube_corner_index(mesh)]
            bits = _path_corners(flip)
            c = [np.concatenate([cube_ir[bits[j, k]] for j in range(6)]) for k in range(4)]  # row jN + p
            del cube_ir
            tmp = np.empty_like(c[0])
            for i, j in ((0, 1), (2, 3), (0, 2), (1, 3), (1, 2)):  # sort the four corner columns (as _sort4)
                np.minimum(c[i], c[j], out=tmp)
                np.maximum(c[i], c[j], out=c[j])
                c[i], tmp = tmp, c[i]
            code = c[0].astype(np.int64)
            for k in (1, 2, 3):  # four corners, not k-points
                code *= n_ir
                code += c[k]
            del c, tmp
            # np.unique(code, return_counts=True), with the stable sort: 3x faster than the default one on these
            # codes (measured, 333k codes of a 48x34x34 mesh: 5 ms against 16 ms); same values and counts
            code.sort(kind="stable")
            first = np.flatnonzero(np.concatenate(([True], code[1:] != code[:-1])))
            counts = np.diff(np.append(first, len(code)))
            code = code[first]
            if len(code) < 0.7 * t.n_tet:  # else not worth the indirection
                cols = [None] * 4
                for j in (3, 2, 1, 0):  # four corners, not k-points; each column decoded contiguous
                    code, cols[j] = np.divmod(code, n_ir)
                t.corner_ir, t.mult, t.corner_cols = np.stack(cols, 1), counts.astype(float), cols
        if t.corner_ir is None:
            t.corner_ir = grid_to_ir[_corner_table(mesh, flip)]
    for a in [t.mapping, t.grid_address, t.grid_to_ir, t.corner_ir, t.mult, t.k_count] + (t.corner_cols or []):
        if a is not None:
            a.setflags(write=False)
    return t


def _weighted_level(e: np.ndarray, w: np.ndarray, target: float) -> float:
    """Smallest value v of ``e`` with Σ w[e ≤ v] ≥ ``target`` (the largest value if none), for whole-number weights
    ``w`` summing to at least ``target``: what sorting e, accumulating w and searching for ``target`` gives, but by
    selection. Two pivots around the expected position split the values per pass, so a few partitions of a shrinking
    set replace the sort; sums of whole numbers are exact, so the comparisons are those the sort would make."""
    if target <= 0:
        return float(e.min())
    base = 0.0  # weight of the values below the current set (less than target)
    while len(e) > 2048:  # a few passes, each keeping the part of the values that holds the level
        n = len(e)
        total = float(w.sum())
        q = (target - base) / total if total > 0 else 1.0
        d = max(8, n // 64)
        k1 = min(max(int(q * n) - d, 0), n - 1)
        k2 = min(max(int(q * n) + d, 0), n - 1)
        part = np.partition(e, [k1, k2])
        p1, p2 = float(part[k1]), float(part[k2])
        below1 = e < p1
        w_lt1 = float(w[below1].sum())
        if base + w_lt1 >= target:
            e, w = e[below1], w[below1]
            continue
        at_or_below1 = e <= p1
        w_le1 = float(w[at_or_below1].sum())
        if base + w_le1 >= target:
            return p1
        at_or_below2 = e <= p2
        w_le2 = float(w[at_or_below2].sum())
        if base + w_le2 >= target:
            keep = ~at_or_below1 & at_or_below2
            base += w_le1
        else:
            keep = ~at_or_below2
            base += w_le2
        if not keep.any():  # rounding of the target beyond the total: the largest value, as the search gives
            return float(e.max())
        e, w = e[keep], w[keep]
    order = np.argsort(e)
    cum = base + np.cumsum(w[order])
    i = int(np.searchsorted(cum, target))
    return float(e[order[min(i, len(e) - 1)]])


class _RowWindow:
    """Sorted corner energies of the rows overlapping a bracket (lo, hi], set up for repeated count and DOS.

    Per row the count is a cubic in ε on each of its three pieces (Blöchl, Jepsen & Andersen, PRB 49, 16223
    (1994), App. B); the piece coefficients are formed once, so each evaluation is a few passes over the rows.
    """

    def __init__(self, cols: list[np.ndarray], below: float, mult: np.ndarray | None = None,
                 rows: np.ndarray | None = None, lo: float = -np.inf, hi: float = np.inf):
        self.below = below  # rows wholly at or below the bracket's lower end
        # every row overlapping (lo, hi] is held (perhaps more); ``rows`` names each, b·U + t, in band-then-row order
        self.lo, self.hi = lo, hi
        a1, a2, a3, a4 = cols
        # each row stands for ``mult`` grid rows (None: one): the multiplicity is folded into the coefficients
        w = np.ones(len(a1)) if mult is None else mult
        with np.errstate(divide="ignore", invalid="ignore"):  # coefficients of pieces a row never enters
            d21, d31, d41, d32, d42, d43 = a2 - a1, a3 - a1, a4 - a1, a3 - a2, a4 - a2, a4 - a3
            q = w / (d31 * d41)
            self.arrays = [a1, a2, a3, a4, w / (d21 * d31 * d41), w / (d41 * d42 * d43),
                           d21 * d21 * q, 3 * d21 * q, 3 * q, (d31 + d42) / (d32 * d42) * q, w,
                           np.zeros(len(a1), dtype=np.int64) if rows is None else rows]

    def __len__(self) -> int:
        return len(self.arrays[0])

    def restrict(self, lo: float, hi: float) -> _RowWindow:
        """Drop rows that no longer overlap (lo, hi]; those wholly at or below lo join ``below``."""
        a1, a4 = self.arrays[0], self.arrays[3]
        keep = (a4 > lo) & (a1 <= hi)
        n_keep = int(np.count_nonzero(keep))
        if n_keep > 0.7 * len(self):  # not worth the copies yet
            return self
        new = object.__new__(_RowWindow)
        new.below = self.below + float(self.arrays[10][a4 <= lo].sum())
        new.arrays = [x[keep] for x in self.arrays]
        new.lo, new.hi = lo, hi
        return new

    def straddling(self, lo: float, hi: float) -> np.ndarray | None:
        """Row ids b·U + t (band-then-row order) of the rows with highest corner > lo and lowest < hi, or None
        when (lo, hi) is not inside the bracket this window holds every row of."""
        if not (self.lo <= lo and hi <= self.hi):
            return None
        return self.arrays[11][(self.arrays[3] > lo) & (self.arrays[0] < hi)]

    def count_slope(self, eps: float) -> tuple[float, float]:
        """(rows below eps counting partial ones fractionally, d/dε of that), rows per eV."""
        a1, a2, a3, a4, i1, i3, p0, p1, p2, p3, w = self.arrays[:11]
        # the pieces exclude rows wholly at or below eps (a row whose top corners all sit at eps is one of them);
        # piece k holds ε_k < eps ≤ ε_k+1, each gathered by index
        done = a4 <= eps
        n = self.below + float(np.sum(w, where=done))
        piece = (a1 < eps).view(np.int8) + (a2 < eps).view(np.int8)
        piece += (a3 < eps).view(np.int8)
        piece[done] = 0
        s = 0.0
        m = np.flatnonzero(piece == 1)
        if len(m):
            x = eps - a1.take(m)
            x2i = x * x * i1.take(m)
            n += float(np.sum(x2i * x))  # not a BLAS dot: its threads stall on a loaded machine
            s += 3.0 * float(x2i.sum())
        m = np.flatnonzero(piece == 2)
        if len(m):
            x = eps - a2.take(m)
            q1, q2, q3 = p1.take(m), p2.take(m), p3.take(m)
            n += float(np.sum(p0.take(m) + x * (q1 + x * (q2 - x * q3))))
            s += float(np.sum(q1 + x * (2.0 * q2 - 3.0 * x * q3)))
        m = np.flatnonzero(piece == 3)
        if len(m):
            y = a4.take(m) - eps
            y2i = y * y * i3.take(m)
            n += float(w.take(m).sum()) - float(np.sum(y2i * y))
            s += 3.0 * float(y2i.sum())
        return n, s


class _TetrahedronGrid:
    """Band × tetrahedron rows of the full mesh, ready for repeated integration.

    Row r = b * U + t is band b on tetrahedron t of the U distinct ones: on a symmetry-reduced mesh, grid
    tetrahedra with the same four irreducible corners are held once with their multiplicity ``mult`` (they carry
    the same energies in every band), otherwise U = T, the grid's own tetrahedra in grid order. For every row only its lowest and highest corner energy is
    needed to classify it: at any energy ε almost all rows lie wholly below (count 1, weight ¼ per corner) or
    wholly above (nothing), and only the few straddling ε need their four corners gathered, sorted and put through
    Blöchl's formulas. Whole bands are classified first from their extremes, and the row extremes of a band are
    computed only when it crosses the energies asked about.
    """

    def __init__(self, eigs_ir: np.ndarray, kmesh: IrreducibleMesh, reciprocal_A=None):
        mesh = np.asarray(kmesh.mesh, dtype=int)
        nb = eigs_ir.shape[1]
        if eigs_ir.shape[0] != len(kmesh.ir_index):
            raise ParameterError(
                f"got eigenvalues at {eigs_ir.shape[0]} k-points but the mesh has {len(kmesh.ir_index)} irreducible "
                "points; compute them at kmesh.kfrac"
            )
        self._flip = _split_flip(mesh, reciprocal_A)  # the diagonal's start (path 0 starts there)
        self._mesh = tuple(int(m) for m in mesh)
        tables = _mesh_tables(kmesh, self._mesh, self._flip, eigs_ir.shape[0])
        self._tables = tables
        self._grid_to_ir = tables.grid_to_ir
        self.corner_ir = tables.corner_ir  # (U, 4) irreducible index of each corner of each distinct tetrahedron
        self.mult = tables.mult  # (U,) grid tetrahedra each distinct one stands for; None: one each, grid order
        self.n_tet = tables.n_tet  # tetrahedra of the full grid
        self.n_unique = len(self.corner_ir)
        self._corner_cols = tables.corner_cols  # the four columns of corner_ir, each contiguous (or None)
        self.n_bands = nb
        self.n_ir = eigs_ir.shape[0]
        self.n_rows = self.n_tet * nb  # rows of the full grid
        self.volume = 1.0 / self.n_tet  # volume fraction of one tetrahedron
        self.eigs_ir = eigs_ir
        self._bands = np.ascontiguousarray(eigs_ir.T)  # (nb, M): one band's energies, contiguous
        self.k_count = tables.k_count  # grid points per irreducible point
        # every irreducible point is the image of some grid point, so band extremes equal row extremes
        self.band_min = self._bands.min(axis=1)
        self.band_max = self._bands.max(axis=1)
        self.emin = float(self.band_min.min())
        self.emax = float(self.band_max.max())
        self._rows_of_band: list = [None] * nb
        self._win: _RowWindow | None = None  # the last Fermi-level window, whose rows the occupations reuse

    # ------------------------------------------------------------------------------------------ row access
    def band_rows(self, b: int) -> tuple[np.ndarray, np.ndarray]:
        """(U,) lowest and (U,) highest corner energy of band ``b`` on every distinct tetrahedron (computed once)."""
        if self._rows_of_band[b] is None:
            self._prepare_rows([b])
        return self._rows_of_band[b]

    def _prepare_rows(self, bands) -> None:
        """Compute the row extremes of those of ``bands`` not done yet, in one pass."""
        todo = [b for b in bands if self._rows_of_band[b] is None]
        if todo and self.mult is not None:  # distinct tetrahedra: gather their corners
            buf = np.empty(self.n_unique)
            for b in todo:  # loop over bands only; in place, as fresh temporaries of this size cost more
                energy = self._bands[b]
                lo = energy.take(self._corner_cols[0])
                hi = lo.copy()
                for col in self._corner_cols[1:]:  # three more corners
                    np.take(energy, col, out=buf)
                    np.minimum(lo, buf, out=lo)
                    np.maximum(hi, buf, out=hi)
                self._rows_of_band[b] = (lo, hi)
        elif todo:  # the grid's own tetrahedra: from the cubes they split
            e = self._bands[todo] if self._grid_to_ir is None else self._bands[todo][:, self._grid_to_ir]
            rmin, rmax = _row_extremes(e, self._mesh, self._flip)
            for i, b in enumerate(todo):
                self._rows_of_band[b] = (rmin[i], rmax[i])

    def _distinct_rows(self) -> tuple[np.ndarray, np.ndarray]:
        """(U·nb,) lowest and highest corner energy of every distinct row, row b·U + t."""
        self._prepare_rows(range(self.n_bands))
        return (np.concatenate([self.band_rows(b)[0] for b in range(self.n_bands)]),
                np.concatenate([self.band_rows(b)[1] for b in range(self.n_bands)]))

    def _grid_rows(self) -> tuple[np.ndarray, np.ndarray]:
        """(T·nb,) lowest and highest corner energy of every row of the full grid, row b·T + t."""
        if self.mult is None:
            return self._distinct_rows()
        rmin, rmax = _row_extremes(self._bands[:, self._grid_to_ir], self._mesh, self._flip)
        return rmin.reshape(-1), rmax.reshape(-1)

    @property
    def row_min(self) -> np.ndarray:
        """(T·nb,) lowest corner energy of every row of the full grid, row b·T + t."""
        return self._grid_rows()[0]

    @property
    def row_max(self) -> np.ndarray:
        """(T·nb,) highest corner energy of every row of the full grid, row b·T + t."""
        return self._grid_rows()[1]

    @property
    def row_mult(self) -> np.ndarray | None:
        """(U·nb,) grid rows each row stands for, or None when each is one grid row."""
        return None if self.mult is None else np.tile(self.mult, self.n_bands)

    def _sorted_rows(self, rows: np.ndarray):
        """(n, 4) ascending corner energies of ``rows``, the irreducible point of each sorted slot, the band."""
        band, tet = np.divmod(rows, self.n_unique)
        corner = self.corner_ir[tet]
        e = self.eigs_ir[corner, band[:, None]]
        # stable, so tied corners keep their path order (which corner gets which weight at a tie)
        e, corner = _sort4_stable(e, corner)
        return e, corner, band

    def _window(self, lo: float, hi: float) -> _RowWindow:
        """Rows overlapping (lo, hi], sorted; rows wholly at or below lo are only counted.

        A row starting exactly at hi counts nothing there unless all its corners sit at hi, so it is kept.
        """
        cross = [b for b in range(self.n_bands) if self.band_max[b] > lo and self.band_min[b] <= hi]
        below = float(self.n_tet * int(np.count_nonzero(self.band_max <= lo)))
        found = {}  # band -> (rows, (n, 4) corner energies, multiplicities)
        for b in cross:  # loop over bands only: bands entering the window at an edge, from their few points
            edge = None if self.mult is None or self._rows_of_band[b] is not None else self._edge_rows(b, lo, hi)
            if edge is not None:
                tets, cols, below_b = edge
                below += below_b
                found[b] = (tets, np.stack(cols, 1), self.mult.take(tets))
        rest = [b for b in cross if b not in found]
        self._prepare_rows(rest)
        for b in rest:  # loop over bands only
            rmin, rmax = self.band_rows(b)
            tets = np.flatnonzero((rmax > lo) & (rmin <= hi))
            if self.mult is None:
                below += int(np.count_nonzero(rmax <= lo))
                found[b] = (tets, self._bands[b][self.corner_ir[tets]], None)
            else:
                below += float(np.sum(self.mult, where=rmax <= lo))
                energy = self._bands[b]
                found[b] = (tets, np.stack([energy.take(col.take(tets)) for col in self._corner_cols], 1),
                            self.mult.take(tets))
        # band-then-row order, as the occupations expect
        ids = [found[b][0] + b * self.n_unique for b in cross]
        parts = [found[b][1] for b in cross]
        mult = [found[b][2] for b in cross] if self.mult is not None else []
        e = np.concatenate(parts) if parts else np.empty((0, 4))
        rows = np.concatenate(ids) if ids else np.empty(0, dtype=np.int64)
        self._win = _RowWindow(_sort4(e), below, np.concatenate(mult) if mult else None, rows, lo, hi)
        return self._win

    def _edge_rows(self, b: int, lo: float, hi: float):
        """Rows of band ``b`` overlapping (lo, hi] found from its few points on one side, or None.

        A row has a corner above lo exactly when it is a row of a point above lo, and a corner at or below hi
        exactly when it is a row of a point at or below hi. When only a few of the band's points lie above lo (the
        band's top enters the window) or at or below hi (its bottom does), the rows of those points are the only
        candidates, and the band's other rows need not be gathered. Returns (rows ascending, their four corner
        energy columns, grid rows of the band wholly at or below lo) — what the full pass would give — or None
        when neither side is small.
        """
        energy = self._bands[b]
        n_ir = len(energy)
        top = energy > lo
        n_top = int(np.count_nonzero(top))
        if 8 * n_top <= n_ir:
            points = np.flatnonzero(top)
        else:
            bottom = energy <= hi
            if 8 * int(np.count_nonzero(bottom)) > n_ir:
                return None
            points = np.flatnonzero(bottom)
        rows_of, starts = self._tables.rows_at_points()
        first, length = starts[points], starts[points + 1] - starts[points]
        total = int(length.sum())
        pos = np.repeat(first - (np.cumsum(length) - length), length) + np.arange(total)
        mark = np.zeros(self.n_unique, dtype=bool)
        mark[rows_of[pos]] = True
        cand = np.flatnonzero(mark)
        cols = [energy.take(col.take(cand)) for col in self._corner_cols]
        rmin = np.minimum(np.minimum(cols[0], cols[1]), np.minimum(cols[2], cols[3]))
        rmax = np.maximum(np.maximum(cols[0], cols[1]), np.maximum(cols[2], cols[3]))
        if 8 * n_top <= n_ir:  # candidates: every row with a corner above lo
            keep = rmin <= hi
            below_b = float(self.n_tet) - float(self.mult.take(cand).sum())
        else:  # candidates: every row with a corner at or below hi, among them all rows wholly at or below lo
            keep = rmax > lo
            below_b = float(np.sum(self.mult.take(cand), where=~keep))
        return cand[keep], [c[keep] for c in cols], below_b

    def count(self, eps: float) -> float:
        """States per cell (one spin) below eps."""
        return self.volume * self._window(eps, eps).count_slope(eps)[0]

    # ------------------------------------------------------------------------------------------ Fermi level
    def _sampled_level(self, states: float) -> tuple[float, float]:
        """Rough level holding ``states`` (one spin) when each grid point's levels are counted as steps, and a
        typical energy spread of one tetrahedron near it.

        Only a starting guess for the window search, so a strided subsample of the points is enough, and only
        bands that can hold the level are looked at: a band lies wholly below the level if at least ``states``
        bands start below its top, wholly above if fewer than ``states`` bands end below its bottom.
        """
        nb = self.n_bands
        low = np.sort(self.band_min)[min(max(int(np.ceil(states)) - 1, 0), nb - 1)]
        high = np.sort(self.band_max)[min(int(np.floor(states)), nb - 1)]
        cand = np.flatnonzero((self.band_max > low) & (self.band_min < high))
        if len(cand) == 0:
            return float(0.5 * (low + high)), 0.0
        n_low = int(np.count_nonzero(self.band_max <= low))
        step = max(1, -(-self.n_ir * len(cand) // 20000))
        e = self._bands[cand, ::step].reshape(-1)
        kc = self.k_count[::step]
        frac = min(max((states - n_low) / len(cand), 0.0), 1.0)
        if self._grid_to_ir is None:  # equal weights: a selection, no sort
            i = min(int(frac * len(e)), len(e) - 1)
            level = float(np.partition(e, i)[i])
        else:
            w = np.tile(kc.astype(float), len(cand))
            level = _weighted_level(e, w, frac * float(w.sum()))
        # energy change along the (flipped) main diagonal of a grid cube at the sampled points, candidate bands
        m = np.asarray(self._mesh)
        n_grid = len(self.k_count) if self._grid_to_ir is None else len(self._grid_to_ir)
        if self._grid_to_ir is not None:  # a reduced mesh: its grid is larger than the irreducible points sampled
            step = max(1, -(-n_grid * len(cand) // 20000))
            while np.gcd(step, m[2]) > 1:  # a stride sharing a factor with the fastest axis samples few lines of it
                step += 1
        pts = np.arange(0, n_grid, step)
        idx = np.unravel_index(pts, self._mesh)
        sign = 1 - 2 * np.asarray(self._flip)
        nxt = np.ravel_multi_index(tuple(np.mod(idx[a] + sign[a] * (m[a] > 1), m[a]) for a in range(3)),
                                   self._mesh)
        g2i = self._grid_to_ir
        here, there = (pts, nxt) if g2i is None else (g2i[pts], g2i[nxt])
        spread = float(np.mean(np.abs(self._bands[np.ix_(cand, there)] - self._bands[np.ix_(cand, here)])))
        return level, spread

    def fermi_level(self, n_electrons: float, g: int) -> float:
        if n_electrons <= 0:
            return self.emin
        if n_electrons >= g * self.n_bands:
            return self.emax
        gap, vbm, cbm = _gap(self.eigs_ir, n_electrons, g)
        if gap > 0:
            # the linear-tetrahedron count is exactly flat between the band extremes of the mesh
            return float(0.5 * (vbm + cbm))
        floor, ceil = self.emin - 1e-6, self.emax + 1e-6
        target = n_electrons / (g * self.volume)  # in rows: one row holds one state per spin per tetrahedron
        # the count is 0 at floor and every row at ceil: a bracket to start from
        lo, hi, f_lo, f_hi = floor, ceil, -target, float(self.n_rows) - target
        # Safeguarded Newton on the exact count, whose slope is the tetrahedron DOS from the same rows, started
        # from the grid-point estimate; a step leaving the bracket, or a zero slope, falls back to bisection.
        # Only rows overlapping a window around the iterate are held (a quarter of the typical energy spread of
        # one tetrahedron sets its starting half-width: the sampled start is usually well within that, measured on
        # the meshes of the demo screens); the window is rebuilt, wider, when a step leaves it, and shrinks with the
        # bracket down to about the rows straddling the level itself. The count at an energy inside the window does
        # not depend on its extent (the same straddling rows in the same order, whole-number sums for the rest), so
        # the width changes the work only.
        mu, spread = self._sampled_level(n_electrons / g)
        half = max(0.25 * spread, 1e-6 * (ceil - floor))
        w_lo, w_hi = max(mu - half, lo), min(mu + half, hi)
        win = self._window(w_lo, w_hi)
        last_step = None
        for _ in range(200):
            if not w_lo <= mu <= w_hi:
                half *= 4
                w_lo, w_hi = max(mu - half, lo), min(mu + half, hi)
                win = self._window(w_lo, w_hi)
            f, slope = win.count_slope(mu)
            f -= target
            if f == 0:
                return float(mu)
            if f < 0:
                lo, f_lo = mu, f
            else:
                hi, f_hi = mu, f
            new = mu - f / slope if slope > 0 else lo
            newton = lo < new < hi
            if not newton:
                new = 0.5 * (lo + hi)
            tol = 1e-13 * max(1.0, abs(new))
            if hi - lo <= 2 * tol:
                # the count jumps here (tetrahedra flattened along a single-point mesh direction, all corners
                # equal): take the bracket end whose count is nearer the target, as Brent's method would
                return float(lo if -f_lo <= f_hi else hi)
            step = abs(new - mu)
            if newton and step <= tol:
                return float(new)
            # after two Newton steps in a row the step ratio r bounds what is left after this one by
            # step·r/(1 − r) (Newton converges at least that fast once in reach); if that is below the tolerance,
            # confirming with one more count would not change the answer
            if newton and last_step is not None and step < 0.5 * last_step:
                r = step / last_step
                if step * r / (1 - r) <= 0.1 * tol:
                    return float(new)
            last_step = step if newton else None
            mu = new
            if w_lo <= lo and hi <= w_hi:
                smaller = win.restrict(lo, hi)
                if smaller is not win:
                    win, w_lo, w_hi = smaller, lo, hi
                    self._win = win
        win = self._window(lo, hi)
        return _solve_count(lambda x: g * self.volume * win.count_slope(x)[0], n_electrons, lo, hi,
                            "the tetrahedron method")

    # ------------------------------------------------------------------------------------------ occupations
    def occupations(self, eps: float, blochl: bool = True) -> np.ndarray:
        """(M, nb) one-spin occupation weights folded onto the irreducible points (Σ = count(eps))."""
        nb, U = self.n_bands, self.n_unique
        # Tetrahedra flattened along a single-point mesh direction have a DOS that jumps at a corner energy, and
        # E_F often sits exactly on one (e.g. at a folded band crossing on an even mesh): take the mean of the
        # two one-sided limits there. Elsewhere D_T is continuous and the mean equals the value.
        h = 1e-9 * max(1.0, self.emax - self.emin)
        # every grid point is a corner of 24 tetrahedra (6 per cube × 4 corners, all translates)
        corner_count = 24.0 * self.k_count
        acc = np.zeros((self.n_ir, nb))
        cross = [b for b in range(nb) if eps - h < self.band_max[b] and self.band_min[b] < eps + h]
        for b in np.flatnonzero(self.band_max <= eps - h):  # rows wholly below eps − h: ¼ per corner, no Blöchl
            acc[:, b] = 0.25 * corner_count
        # The straddling rows (highest corner above eps − h, lowest below eps + h): from the Fermi-level window
        # when it holds every row there, else from each crossing band's row extremes.
        rows = None if self._win is None else self._win.straddling(eps - h, eps + h)
        if rows is None:
            self._prepare_rows(cross)
            parts = []
            for b in cross:  # loop over bands only
                rmin, rmax = self.band_rows(b)
                parts.append(np.flatnonzero((rmax > eps - h) & (rmin < eps + h)) + b * U)
            rows = np.concatenate(parts) if parts else np.empty(0, dtype=np.int64)
        bands, tets = np.divmod(rows, U)
        # A point below eps + h lies on no row wholly above, so the rows wholly below eps − h about it are all its
        # rows but the straddling ones; a point at or above eps + h lies on none wholly below. Row counts (with
        # multiplicity) are whole numbers, so these differences are exact.
        slot = np.full(nb, -1, dtype=np.int64)
        slot[cross] = np.arange(len(cross))
        key = (slot[bands] * self.n_ir)[:, None] + self.corner_ir[tets]
        mw = None if self.mult is None else np.repeat(self.mult[tets], 4)
        straddled = np.bincount(key.ravel(), weights=mw, minlength=len(cross) * self.n_ir)
        straddled = straddled.reshape(len(cross), self.n_ir)
        for i, b in enumerate(cross):  # loop over bands only
            acc[:, b] = np.where(self._bands[b] < eps + h, 0.25 * (corner_count - straddled[i]), 0.0)
        # the straddling rows of all crossing bands go through the formulas together, in memory-bounded blocks;
        # each band's rows are contiguous
        ends = np.searchsorted(bands, np.asarray(cross, dtype=np.int64), side="right")
        firsts = np.searchsorted(bands, np.asarray(cross, dtype=np.int64), side="left")
        for s in range(0, len(tets), _CHUNK_ROWS):
            t, band = tets[s:s + _CHUNK_ROWS], bands[s:s + _CHUNK_ROWS]
            corner = self.corner_ir[t]
            e, corner = _sort4_stable(self._bands[band[:, None], corner], corner)
            w = _tet_weights_at(e, eps, h, blochl)
            if self.mult is not None:
                w *= self.mult[t][:, None]
            for b, first, end in zip(cross, firsts, ends):  # bands only
                sl = slice(max(first, s) - s, min(end, s + len(t)) - s)
                if sl.stop > sl.start:
                    acc[:, b] += np.bincount(corner[sl].ravel(), weights=w[sl].ravel(), minlength=self.n_ir)
        return self.volume * acc

    # ------------------------------------------------------------------------------------------ DOS
    def dos_on_grid(self, energies: np.ndarray, proj_ir: np.ndarray | None):
        """(ne,) one-spin DOS, (ne,) count and (ne, nproj) projected DOS on an energy grid."""
        energies = np.asarray(energies, dtype=float)
        ne = len(energies)
        order_e = np.argsort(energies)
        es = energies[order_e]
        nproj = 0 if proj_ir is None else proj_ir.shape[2]
        pdos = np.zeros((ne, nproj))
        # a row counts fully at energies ≥ its top corner; energies strictly inside (e1, e4) are evaluated as
        # (row, energy) pairs, processed in blocks of bounded pair count so memory stays bounded
        row_min, row_max = self._distinct_rows()
        lo = np.searchsorted(es, row_min, side="right")
        hi = np.searchsorted(es, row_max, side="left")
        mult = self.row_mult
        below = np.bincount(hi, weights=mult, minlength=ne + 1)[:ne].cumsum().astype(float)
        dos = np.zeros(ne)
        active = np.flatnonzero(hi > lo)
        for sub, eidx in _pair_blocks(lo[active], hi[active]):
            # pairs come ordered by row: sort each block's rows once, then spread them over their pairs
            first = int(sub[0])
            e_blk, corner_blk, band_blk = self._sorted_rows(active[first:int(sub[-1]) + 1])
            loc = sub - first
            er, x = e_blk[loc], es[eidx]
            mw = 1.0 if mult is None else mult[active[sub]]
            below += np.bincount(eidx, weights=mw * _tet_count(er, x), minlength=ne)
            if nproj:
                cw = _tet_corner_dos(er, x)  # (p, 4)
                if mult is not None:
                    cw *= mw[:, None]
                dos += np.bincount(eidx, weights=cw.sum(1), minlength=ne)
                contrib = np.einsum("pc,pcj->pj", cw, proj_ir[corner_blk[loc], band_blk[loc][:, None], :])
                for j in range(nproj):  # loop over projection channels only
                    pdos[:, j] += np.bincount(eidx, weights=contrib[:, j], minlength=ne)
            else:
                dos += np.bincount(eidx, weights=mw * _tet_dos(er, x), minlength=ne)
        inv = np.empty(ne, dtype=int)
        inv[order_e] = np.arange(ne)
        v = self.volume
        return v * dos[inv], v * below[inv], v * pdos[inv]


