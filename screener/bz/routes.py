"""Routes through the special points of the Brillouin zone for band plots (Setyawan & Curtarolo 2010)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.errors import ParameterError, SymmetryError
from screener.structure.crystal import Crystal
from screener.structure.symmetry import CENTRING

#: Largest |component| (fractions of reciprocal vectors) accepted for explicit k-points: every point has an
#: equivalent within ±0.5, and beyond ~1e15 the Bloch phases lose all precision (common practice, no source).
MAX_K_FRACTION = 10.0

#
# Special points and default paths follow W. Setyawan & S. Curtarolo, Comput. Mater. Sci. 49, 299 (2010)
# (values written here from memory of the paper's tables; tests/bz/test_routes.py checks every one of them lies on
# the Brillouin-zone surface or at a zone centre, which catches a wrong formula). The paper gives each point as
# fractions of the reciprocal vectors of *its* primitive cell. Fractions of k relative to a basis do not change
# under any isometry applied to both, so they hold in any primitive basis with the same Gram matrix as the
# paper's: we build such a basis from spglib's conventional cell expressed in the input frame, turn the points
# into Cartesian vectors and then into fractions of the input cell's reciprocal vectors.
#
# Labels: Γ is written "Γ" everywhere (plots and JSON alike); subscripts are plain digits ("B1", "Σ1").

_CENTRING = CENTRING


@dataclass(frozen=True)
class ZoneRoute:
    """A piecewise-straight path through the Brillouin zone, sampled for a band-structure plot."""

    kfrac: np.ndarray
    """(n, 3) float, k-points as fractions of the reciprocal vectors of the *input* cell."""
    x_inv_A: np.ndarray
    """(n,) float, cumulative Cartesian path length, Å⁻¹ (2π included); no length is added across a break."""
    tick_x: np.ndarray
    """(m,) float, positions of the labelled vertices on the x axis, Å⁻¹."""
    tick_labels: tuple[str, ...]
    """m vertex labels; a break in the path shows as a joined label such as 'X|R'."""
    segments: tuple[tuple[int, int], ...]
    """Continuous pieces of the path as (start, stop) index ranges into ``kfrac`` (stop exclusive)."""
    vertices: tuple[tuple[int, str], ...]
    """(index into ``kfrac``, label) of every special point on the path, both sides of a break included."""
    lattice_type: str
    """Setyawan–Curtarolo lattice type used (e.g. 'FCC', 'RHL2'), 'fallback-MCL' etc., or 'explicit'."""
    points_frac: dict
    """label -> (3,) fractions of the input cell's reciprocal vectors, for every special point of the type."""


def _lattice_family(number: int, centring: str) -> str:
    """Bravais-lattice family name of Setyawan & Curtarolo from a space-group number and centring letter."""
    if number <= 2:
        return "TRI"
    if number <= 15:
        return "MCLC" if centring in "CAI" else "MCL"
    if number <= 74:
        return {"P": "ORC", "F": "ORCF", "I": "ORCI"}.get(centring, "ORCC")
    if number <= 142:
        return "BCT" if centring == "I" else "TET"
    if number <= 167:
        return "RHL" if centring == "R" else "HEX"
    if number <= 194:
        return "HEX"
    return {"P": "CUB", "F": "FCC", "I": "BCC"}[centring]


def special_points(crystal: Crystal, symprec: float = 1e-3):
    """Special points and default path of ``crystal`` after Setyawan & Curtarolo (2010).

    Returns
    -------
    lattice_type : str
        e.g. 'FCC', 'BCT2', 'RHL1', or 'fallback-<family>' for the lattice types not tabulated here
        (ORCF, MCL, MCLC, TRI): Γ and the face centres X, Y, Z of the reciprocal cell of the
        Niggli-reduced primitive cell, path Γ–X|Y–Γ–Z.
    points : dict
        label -> (3,) fractions of the reciprocal vectors of the *input* cell.
    path : list of list of str
        continuous pieces of the default path.
    """
    import spglib

    from screener.structure.symmetry import dataset

    ds = dataset(crystal, symprec)
    centring = str(ds.international)[0]
    family = _lattice_family(int(ds.number), centring)
    # spglib: (a_s b_s c_s) = (a b c) P^-1 with column vectors; in rows that is conv = P^-T @ lattice.
    conv = np.linalg.inv(np.asarray(ds.transformation_matrix, dtype=float)).T @ crystal.lattice_A
    std = np.asarray(ds.std_lattice, dtype=float)  # idealised, used only for the shape parameters
    a, b, c = np.linalg.norm(std, axis=1)
    lattice_type, prim, pts, path = _tabulated(family, centring, conv, a, b, c)
    if prim is None:
        prim = spglib.niggli_reduce(_CENTRING.get(centring, np.eye(3)) @ conv)
        if prim is None:
            raise SymmetryError(f"the Niggli reduction of the primitive cell of {crystal.formula} failed, so there is "
                                "no default route; give the route's points with --kpoints")
        lattice_type = f"fallback-{family}"
        pts = {"Γ": (0, 0, 0), "X": (0.5, 0, 0), "Y": (0, 0.5, 0), "Z": (0, 0, 0.5)}
        path = [["Γ", "X"], ["Y", "Γ", "Z"]]
    rec_prim = np.linalg.inv(prim).T
    points = {}
    for label, f in pts.items():
        k_cart = np.asarray(f, dtype=float) @ rec_prim  # without 2π on both sides, so it cancels
        points[label] = _snap(k_cart @ crystal.lattice_A.T)
    return lattice_type, points, path


def _snap(f: np.ndarray, denominator: int = 48, tol: float = 1e-10) -> np.ndarray:
    """Round fractions lying within ``tol`` of a multiple of 1/denominator (and turn -0.0 into 0.0).

    The cell transformations leave 1e-16-sized noise on exact values such as 1/2 or 3/8; snapping keeps printed
    coordinates and exact comparisons clean while leaving irrational values (η, ν) alone.
    """
    r = np.round(f * denominator) / denominator
    return np.where(np.abs(f - r) < tol, r, f) + 0.0


def _tabulated(family: str, centring: str, conv: np.ndarray, a: float, b: float, c: float):
    """(type, primitive rows in the input frame, points in its reciprocal basis, path) or (None,)*4."""
    half, quarter = 0.5, 0.25
    if family == "CUB":
        pts = {"Γ": (0, 0, 0), "M": (half, half, 0), "R": (half, half, half), "X": (0, half, 0)}
        return "CUB", conv, pts, [["Γ", "X", "M", "Γ", "R", "X"], ["M", "R"]]
    if family == "FCC":
        pts = {"Γ": (0, 0, 0), "K": (3 / 8, 3 / 8, 3 / 4), "L": (half, half, half), "U": (5 / 8, quarter, 5 / 8),
               "W": (half, quarter, 3 / 4), "X": (half, 0, half)}
        return "FCC", _CENTRING["F"] @ conv, pts, [["Γ", "X", "W", "K", "Γ", "L", "U", "W", "L", "K"], ["U", "X"]]
    if family == "BCC":
        pts = {"Γ": (0, 0, 0), "H": (half, -half, half), "P": (quarter, quarter, quarter), "N": (0, 0, half)}
        return "BCC", _CENTRING["I"] @ conv, pts, [["Γ", "H", "N", "Γ", "P", "H"], ["P", "N"]]
    if family == "TET":
        pts = {"Γ": (0, 0, 0), "A": (half, half, half), "M": (half, half, 0), "R": (0, half, half),
               "X": (0, half, 0), "Z": (0, 0, half)}
        return "TET", conv, pts, [["Γ", "X", "M", "Γ", "Z", "R", "A", "Z"], ["X", "R"], ["M", "A"]]
    if family == "BCT":
        prim = _CENTRING["I"] @ conv
        if c < a:
            eta = (1 + c**2 / a**2) / 4
            pts = {"Γ": (0, 0, 0), "M": (-half, half, half), "N": (0, half, 0), "P": (quarter, quarter, quarter),
                   "X": (0, 0, half), "Z": (eta, eta, -eta), "Z1": (-eta, 1 - eta, eta)}
            return "BCT1", prim, pts, [["Γ", "X", "M", "Γ", "Z", "P", "N", "Z1", "M"], ["X", "P"]]
        eta = (1 + a**2 / c**2) / 4
        zeta = a**2 / (2 * c**2)
        pts = {"Γ": (0, 0, 0), "N": (0, half, 0), "P": (quarter, quarter, quarter), "Σ": (-eta, eta, eta),
               "Σ1": (eta, 1 - eta, -eta), "X": (0, 0, half), "Y": (-zeta, zeta, half), "Y1": (half, half, -zeta),
               "Z": (half, half, -half)}
        return "BCT2", prim, pts, [["Γ", "X", "Y", "Σ", "Γ", "Z", "Σ1", "N", "P", "Y1", "Z"], ["X", "P"]]
    if family == "ORC":
        # the paper orders the axes a < b < c
        prim = conv[np.argsort(np.linalg.norm(conv, axis=1), kind="stable")]
        pts = {"Γ": (0, 0, 0), "R": (half, half, half), "S": (half, half, 0), "T": (0, half, half),
               "U": (half, 0, half), "X": (half, 0, 0), "Y": (0, half, 0), "Z": (0, 0, half)}
        return "ORC", prim, pts, [["Γ", "X", "S", "Y", "Γ", "Z", "U", "R", "T", "Z"], ["Y", "T"], ["U", "X"],
                                  ["S", "R"]]
    if family == "ORCI":
        # body centring is unchanged by permuting the axes, so sort them a < b < c as the paper does
        conv = conv[np.argsort(np.linalg.norm(conv, axis=1), kind="stable")]
        a, b, c = np.linalg.norm(conv, axis=1)
        zeta, eta = (1 + a**2 / c**2) / 4, (1 + b**2 / c**2) / 4
        delta, mu = (b**2 - a**2) / (4 * c**2), (a**2 + b**2) / (4 * c**2)
        pts = {"Γ": (0, 0, 0), "L": (-mu, mu, half - delta), "L1": (mu, -mu, half + delta),
               "L2": (half - delta, half + delta, -mu), "R": (0, half, 0), "S": (half, 0, 0), "T": (0, 0, half),
               "W": (quarter, quarter, quarter), "X": (-zeta, zeta, zeta), "X1": (zeta, 1 - zeta, -zeta),
               "Y": (eta, -eta, eta), "Y1": (1 - eta, eta, -eta), "Z": (half, half, -half)}
        return "ORCI", _CENTRING["I"] @ conv, pts, [["Γ", "X", "L", "T", "W", "R", "X1", "Z", "Γ", "Y", "S", "W"],
                                                    ["L1", "Y"], ["Y1", "Z"]]
    if family == "ORCC":
        # the paper centres the (a, b) face with a < b; an A-centred cell is first turned cyclically into C
        if centring == "A":
            conv = conv[[1, 2, 0]]
        if np.linalg.norm(conv[0]) > np.linalg.norm(conv[1]):
            conv = conv[[1, 0, 2]]
        a, b, c = np.linalg.norm(conv, axis=1)
        zeta = (1 + a**2 / b**2) / 4
        pts = {"Γ": (0, 0, 0), "A": (zeta, zeta, half), "A1": (-zeta, 1 - zeta, half), "R": (0, half, half),
               "S": (0, half, 0), "T": (-half, half, half), "X": (zeta, zeta, 0), "X1": (-zeta, 1 - zeta, 0),
               "Y": (-half, half, 0), "Z": (0, 0, half)}
        return "ORCC", _CENTRING["C"] @ conv, pts, [["Γ", "X", "S", "R", "A", "Z", "Γ", "Y", "X1", "A1", "T", "Y"],
                                                    ["Z", "T"]]
    if family == "HEX":
        third = 1 / 3
        pts = {"Γ": (0, 0, 0), "A": (0, 0, half), "H": (third, third, half), "K": (third, third, 0),
               "L": (half, 0, half), "M": (half, 0, 0)}
        return "HEX", conv, pts, [["Γ", "M", "K", "Γ", "A", "L", "H", "A"], ["L", "M"], ["K", "H"]]
    if family == "RHL":
        prim = _CENTRING["R"] @ conv
        v = prim / np.linalg.norm(prim, axis=1)[:, None]
        cos_alpha = float(np.clip(v[0] @ v[1], -1, 1))
        alpha = np.arccos(cos_alpha)
        if alpha < np.pi / 2:
            eta = (1 + 4 * cos_alpha) / (2 + 4 * cos_alpha)
            nu = 3 / 4 - eta / 2
            pts = {"Γ": (0, 0, 0), "B": (eta, half, 1 - eta), "B1": (half, 1 - eta, eta - 1), "F": (half, half, 0),
                   "L": (half, 0, 0), "L1": (0, 0, -half), "P": (eta, nu, nu), "P1": (1 - nu, 1 - nu, 1 - eta),
                   "P2": (nu, nu, eta - 1), "Q": (1 - nu, nu, 0), "X": (nu, 0, -nu), "Z": (half, half, half)}
            return "RHL1", prim, pts, [["Γ", "L", "B1"], ["B", "Z", "Γ", "X"], ["Q", "F", "P1", "Z"], ["L", "P"]]
        eta = 1 / (2 * np.tan(alpha / 2) ** 2)
        nu = 3 / 4 - eta / 2
        pts = {"Γ": (0, 0, 0), "F": (half, -half, 0), "L": (half, 0, 0), "P": (1 - nu, -nu, 1 - nu),
               "P1": (nu, nu - 1, nu - 1), "Q": (eta, eta, eta), "Q1": (1 - eta, -eta, -eta), "Z": (half, -half, half)}
        return "RHL2", prim, pts, [["Γ", "P", "Z", "Q", "Γ", "F", "P1", "Q1", "L", "Z"]]
    return None, None, None, None


def zone_route(crystal: Crystal, points_per_inv_A: float = 40.0, symprec: float = 1e-3, *,
               kpoints=None, min_points_per_leg: int = 4, periodic=None) -> ZoneRoute:
    """Route through the special points of ``crystal`` (Setyawan & Curtarolo 2010) or through given points.

    Parameters
    ----------
    crystal : Crystal
        The input cell; every k-point returned is in fractions of *its* reciprocal vectors.
    points_per_inv_A : float
        Sampling density along the path, points per Å⁻¹ (2π included).
    symprec : float
        spglib tolerance, Å, for finding the lattice type.
    kpoints : str or array_like, optional
        Explicit vertices instead of the default path: a string ``"x,y,z;x,y,z;..."`` (an optional label may
        precede a point as ``"X=0,0.5,0"``) or an (m, 3) array, fractions of the input cell's reciprocal
        vectors. Consecutive vertices are joined by straight legs; a single vertex gives a single k-point.
    min_points_per_leg : int
        Fewest intervals on any leg, so short legs in a large cell still show curvature.
    periodic : three bools, optional
        Lattice directions the model is periodic along. Along the others (vacuum) bands do not disperse, so the
        default path keeps only special points with no component along them.
    """
    if not (points_per_inv_A > 0):
        raise ParameterError(f"points_per_inv_A must be positive, got {points_per_inv_A!r}")
    if kpoints is not None:
        labels, verts = parse_kpoints(kpoints)
        points = dict(zip(labels, verts, strict=True))
        pieces = [[(lab, v) for lab, v in zip(labels, verts, strict=True)]]
        lattice_type = "explicit"
    else:
        lattice_type, points, path = special_points(crystal, symprec)
        pieces = [[(lab, points[lab]) for lab in piece] for piece in path]
        if periodic is not None and not all(periodic):
            pieces = _periodic_pieces(pieces, ~np.asarray(periodic, dtype=bool))
            lattice_type = f"{lattice_type}, periodic directions only"
    rec2pi = 2 * np.pi * crystal.reciprocal_A
    kf, xs, segments, vertices = [], [], [], []
    x0, n0 = 0.0, 0
    for piece in pieces:
        start = n0
        for leg, ((la, fa), (lb, fb)) in enumerate(zip(piece[:-1], piece[1:])):
            length = float(np.linalg.norm((np.asarray(fb) - np.asarray(fa)) @ rec2pi))
            n = max(int(min_points_per_leg), int(np.ceil(length * points_per_inv_A)))
            t = np.linspace(0.0, 1.0, n + 1)[(1 if leg else 0):]
            kf.append(np.asarray(fa)[None, :] * (1 - t[:, None]) + np.asarray(fb)[None, :] * t[:, None])
            # exact vertices, so energies at special points are not shifted by rounding of the interpolation
            kf[-1][-1] = fb
            if leg == 0:
                kf[-1][0] = fa
                vertices.append((n0, la))
            xs.append(x0 + length * t)
            x0 += length
            n0 += len(t)
            vertices.append((n0 - 1, lb))
        if len(piece) == 1:
            kf.append(np.asarray(piece[0][1], dtype=float)[None, :])
            xs.append(np.array([x0]))
            vertices.append((n0, piece[0][0]))
            n0 += 1
        segments.append((start, n0))
    kfrac = np.concatenate(kf, axis=0)
    x = np.concatenate(xs)
    tick_x, tick_labels = [], []
    for idx, lab in vertices:
        if tick_x and np.isclose(x[idx], tick_x[-1], rtol=0, atol=1e-12):
            if tick_labels[-1] != lab:
                tick_labels[-1] = f"{tick_labels[-1]}|{lab}"
        else:
            tick_x.append(float(x[idx]))
            tick_labels.append(lab)
    return ZoneRoute(
        kfrac=kfrac,
        x_inv_A=x,
        tick_x=np.array(tick_x),
        tick_labels=tuple(tick_labels),
        segments=tuple(segments),
        vertices=tuple(vertices),
        lattice_type=lattice_type,
        points_frac={k: np.asarray(v, dtype=float) for k, v in points.items()},
    )


def _periodic_pieces(pieces, flat: np.ndarray):
    """Drop special points with a component along non-periodic directions; merge repeats; keep ≥ 2-point pieces."""
    kept = []
    for piece in pieces:
        pts = [(lab, v) for lab, v in piece if np.allclose(np.asarray(v, dtype=float)[flat], 0.0, atol=1e-9)]
        pts = [p for n, p in enumerate(pts) if n == 0 or p[0] != pts[n - 1][0]]
        if len(pts) > 1:
            kept.append(pts)
    return kept or [[("Γ", np.zeros(3))]]


def parse_kpoints(text) -> tuple[list[str], np.ndarray]:
    """Labels and (m, 3) fractions from ``"x,y,z;x,y,z;..."`` (optional ``"LABEL=x,y,z"``) or an (m, 3) array.

    Unlabelled points are named by their coordinates as written. Raises ParameterError naming the bad part.
    """
    if not isinstance(text, str):
        try:
            arr = np.asarray(text, dtype=float)
        except (TypeError, ValueError):
            raise ParameterError(f"k-points must be an (m, 3) array of numbers, got {text!r}") from None
        if arr.ndim != 2 or arr.shape[1] != 3 or len(arr) == 0 or not np.all(np.isfinite(arr)):
            raise ParameterError(f"k-points must be an (m, 3) array of finite numbers, got shape {arr.shape}")
        if np.abs(arr).max() > MAX_K_FRACTION:
            raise ParameterError(f"k-points must lie within ±{MAX_K_FRACTION:g} reciprocal vectors (an equivalent "
                                 "point always lies within ±0.5)")
        return [",".join(f"{x:g}" for x in row) for row in arr], arr
    labels, rows = [], []
    parts = [p.strip() for p in text.split(";")]
    if parts and parts[-1] == "" and len(parts) > 1:
        parts = parts[:-1]  # tolerate one trailing ';'
    for n, part in enumerate(parts, start=1):
        label, _, coords = part.rpartition("=")
        fields = [f.strip() for f in coords.split(",")]
        try:
            row = [float(f) for f in fields]
        except ValueError:
            row = []
        if len(row) != 3 or not all(np.isfinite(row)):
            raise ParameterError(
                f"--kpoints {text!r}: point {n} ({part!r}) is not three numbers 'x,y,z'; write points as "
                "'x,y,z;x,y,z;...' in fractions of the reciprocal lattice vectors, e.g. '0,0,0;0.5,0,0'"
            )
        if max(abs(x) for x in row) > MAX_K_FRACTION:
            raise ParameterError(
                f"--kpoints {text!r}: point {n} ({part!r}) lies beyond ±{MAX_K_FRACTION:g} reciprocal vectors; every "
                "k-point has an equivalent within the first zone (components between -0.5 and 0.5)"
            )
        labels.append(label.strip() or ",".join(fields))
        rows.append(row)
    return labels, np.array(rows, dtype=float)
