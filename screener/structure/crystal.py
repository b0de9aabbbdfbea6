"""The one structure object, `Crystal`.

Conventions: lattice vectors are the *rows* of `lattice_A` (Å); fractional coordinates are fractions of those
rows, so Cartesian positions are ``frac @ lattice_A``.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from screener.errors import StructureError
from screener.structure.elements import normalise_symbol
from screener.structure.neighbours import (
    NeighbourList,
    NeighbourShell,
    find_neighbours,
    group_shells,
)

#: Default smallest interatomic distance accepted (Å). Shorter contacts are almost always duplicated sites or
#: unit errors (common practice, no source).
MIN_DISTANCE_A = 0.5
#: Smallest cell volume per atom accepted (Å^3); guards against degenerate cells.
MIN_VOLUME_PER_ATOM_A3 = 0.5
#: Longest lattice vector accepted (Å). Crystal cells, even supercells or slabs with vacuum, are far shorter;
#: longer ones are unit errors or corrupted numbers, and beyond ~1e15 Å double precision cannot resolve the
#: atoms' positions within the cell (common practice, no source).
MAX_CELL_LENGTH_A = 1000.0


def _readonly(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Crystal:
    """A periodic crystal structure. Construct with ``Crystal(lattice_A, frac, species, labels=None)``.

    The constructor normalises and validates its input (shapes, finiteness, positive volume, known elements,
    minimum interatomic distance) and says which check failed on what value.
    """

    lattice_A: np.ndarray
    """(3, 3) float, lattice vectors as rows, Å."""
    frac: np.ndarray
    """(n, 3) float, fractional coordinates wrapped into [0, 1)."""
    species: tuple[str, ...]
    """n element symbols, canonical spelling."""
    labels: tuple[str, ...] | None = None
    """n site labels (defaults to element + running index)."""
    min_distance_A: float = field(default=MIN_DISTANCE_A, repr=False)
    """Smallest interatomic distance accepted, Å."""

    def __post_init__(self) -> None:
        lat = np.asarray(self.lattice_A, dtype=float) if _is_numeric(self.lattice_A) else None
        if lat is None or lat.shape != (3, 3):
            raise StructureError(
                f"lattice must be a 3x3 matrix of numbers (rows are lattice vectors in Å), got "
                f"{np.shape(self.lattice_A) if lat is not None else type(self.lattice_A).__name__}"
            )
        if not np.all(np.isfinite(lat)):
            raise StructureError(f"lattice contains non-finite numbers: {lat.tolist()}")
        frac = np.asarray(self.frac, dtype=float) if _is_numeric(self.frac) else None
        if frac is None or frac.ndim != 2 or frac.shape[1] != 3:
            raise StructureError(
                f"fractional coordinates must be an (n, 3) array of numbers, got shape {np.shape(self.frac)}"
            )
        n = frac.shape[0]
        if n == 0:
            raise StructureError("structure has no atoms")
        if not np.all(np.isfinite(frac)):
            bad = int(np.argwhere(~np.isfinite(frac))[0, 0])
            raise StructureError(f"fractional coordinates of atom {bad + 1} are not finite: {frac[bad].tolist()}")
        species = tuple(self.species) if not isinstance(self.species, str) else None
        if species is None or len(species) != n:
            raise StructureError(
                f"got {n} positions but {len(self.species) if species is not None else 'a string of'} "
                f"element symbols; give one symbol per atom"
            )
        species = tuple(normalise_symbol(s) for s in species)
        if self.labels is None:
            labels = tuple(f"{s}{i + 1}" for i, s in enumerate(species))
        else:
            labels = tuple(str(x) for x in self.labels)
            if len(labels) != n:
                raise StructureError(f"got {n} positions but {len(labels)} site labels")
        lengths = np.linalg.norm(lat, axis=1)
        if lengths.max() > MAX_CELL_LENGTH_A:
            raise StructureError(
                f"lattice vector of {lengths.max():.4g} Å, longer than {MAX_CELL_LENGTH_A:g} Å: not a crystal cell "
                "this tool can handle (wrong units, or a corrupted number?)"
            )
        volume = float(np.linalg.det(lat))
        # lattice vector lengths set the scale for "near-zero"
        scale = float(np.prod(np.linalg.norm(lat, axis=1)))
        if volume <= 0 and scale > 0 and abs(volume) > 1e-8 * scale:
            raise StructureError(
                f"lattice vectors form a left-handed or negative cell (determinant {volume:.4g} Å^3); "
                "reorder or flip a lattice vector so the determinant is positive"
            )
        if scale == 0 or abs(volume) <= 1e-8 * scale or volume / n < MIN_VOLUME_PER_ATOM_A3:
            raise StructureError(
                f"cell is degenerate: volume {volume:.4g} Å^3 for {n} atoms (lattice lengths "
                f"{np.round(np.linalg.norm(lat, axis=1), 4).tolist()} Å); check the cell parameters"
            )
        frac = frac - np.floor(frac)
        frac[np.isclose(frac, 1.0, atol=1e-12)] = 0.0
        object.__setattr__(self, "lattice_A", _readonly(lat))
        object.__setattr__(self, "frac", _readonly(frac))
        object.__setattr__(self, "species", species)
        object.__setattr__(self, "labels", labels)
        dmin, i, j = self._shortest_contact()
        if dmin < self.min_distance_A:
            raise StructureError(
                f"atoms {labels[i]} and {labels[j]} are {dmin:.3f} Å apart, closer than the minimum "
                f"{self.min_distance_A} Å: duplicated site, wrong units or wrong cell?"
            )

    # ------------------------------------------------------------------ basic properties
    @property
    def n_atoms(self) -> int:
        """Number of atoms in the cell."""
        return len(self.species)

    @property
    def cart_A(self) -> np.ndarray:
        """(n, 3) Cartesian positions, Å."""
        return self.frac @ self.lattice_A

    @property
    def volume_A3(self) -> float:
        """Cell volume, Å^3."""
        return float(np.linalg.det(self.lattice_A))

    @property
    def reciprocal_A(self) -> np.ndarray:
        """(3, 3) reciprocal lattice vectors as rows, *without* the 2π factor (1/Å): ``lattice @ rec.T = 1``."""
        return np.linalg.inv(self.lattice_A).T

    @property
    def formula(self) -> str:
        """Reduced-order formula in order of first appearance, e.g. 'As2' or 'GeTe'."""
        counts = Counter(self.species)
        return "".join(f"{s}{counts[s] if counts[s] > 1 else ''}" for s in dict.fromkeys(self.species))

    def replace(self, *, lattice_A=None, frac=None, species=None, labels=None) -> Crystal:
        """A new validated Crystal with some fields replaced."""
        return Crystal(
            self.lattice_A if lattice_A is None else lattice_A,
            self.frac if frac is None else frac,
            self.species if species is None else species,
            self.labels if labels is None and species is None else labels,
            min_distance_A=self.min_distance_A,
        )

    def supercell(self, matrix) -> Crystal:
        """Supercell with lattice ``matrix @ lattice_A`` (integer matrix, or 3 integers for a diagonal one).

        Atoms are ordered parent-atom-major: all images of parent atom 0 first, then of atom 1, ...
        Labels get the image index appended only where needed to stay unique.
        """
        m = np.asarray(matrix)
        if m.shape == ():
            m = np.full(3, m)
        if m.shape == (3,):
            m = np.diag(m)
        if m.shape != (3, 3) or not np.allclose(m, np.round(m)):
            raise StructureError(f"supercell matrix must be a 3x3 integer matrix or 3 integers, got {matrix!r}")
        m = np.round(m).astype(int)
        det = round(float(np.linalg.det(m)))
        if det <= 0:
            raise StructureError(f"supercell matrix must have a positive determinant, got {det} for {m.tolist()}")
        new_lat = m @ self.lattice_A
        translations = lattice_points_in_supercell(m)  # (det, 3) fractional in parent basis
        minv = np.linalg.inv(m)
        frac_parent = (self.frac[:, None, :] + translations[None, :, :]).reshape(-1, 3)
        frac_new = frac_parent @ minv
        species = tuple(s for s in self.species for _ in range(det))
        labels = tuple(f"{lab}_{t}" if det > 1 else lab for lab in self.labels for t in range(det))
        return Crystal(new_lat, frac_new, species, labels, min_distance_A=self.min_distance_A)

    # ------------------------------------------------------------------ neighbours
    def neighbours(self, cutoff_A: float) -> NeighbourList:
        """All ordered pairs (i, j, image) with 0 < |r_j + image·L − r_i| ≤ cutoff_A (both directions listed)."""
        return find_neighbours(self.lattice_A, self.frac, cutoff_A)

    def neighbour_shells(self, cutoff_A: float | None = None, tol_A: float = 1e-3) -> list[NeighbourShell]:
        """Distinct neighbour distances up to cutoff_A (default 1.6 × shortest contact), with counts per atom."""
        if cutoff_A is None:
            cutoff_A = 1.6 * self._shortest_contact()[0]
        nl = self.neighbours(cutoff_A)
        return group_shells(nl.distance_A, tol_A, self.n_atoms)

    def _shortest_contact(self) -> tuple[float, int, int]:
        """Shortest interatomic distance (Å) including periodic images, and the pair (found once per crystal)."""
        found = self.__dict__.get("_contact")
        if found is None:
            found = self._search_shortest_contact()
            object.__setattr__(self, "_contact", found)
        return found

    def _search_shortest_contact(self) -> tuple[float, int, int]:
        n = self.n_atoms
        # generous cutoff: the longest cell diagonal, capped; shells guarantee at least one contact
        # an atom's own image along the shortest lattice vector bounds the shortest contact from above
        shortest_vector = float(np.linalg.norm(self.lattice_A, axis=1).min())
        trial = min((self.volume_A3 / n) ** (1 / 3) * 1.5, shortest_vector * 1.0001) + 1e-6
        for _ in range(8):
            nl = find_neighbours(self.lattice_A, self.frac, trial, include_zero=True)
            if len(nl.distance_A):
                k = int(np.argmin(nl.distance_A))
                return float(nl.distance_A[k]), int(nl.i[k]), int(nl.j[k])
            trial *= 2
        return float("inf"), 0, 0


def supercell_pairs(parent: Crystal, matrix, supercell: Crystal, i, j, image) -> tuple[np.ndarray, ...]:
    """Copies of the parent's pairs (i, j, image) in ``supercell = parent.supercell(matrix)``, each copy once.

    Returns (i, j, image) in the supercell's atom indices (parent-atom-major order of `Crystal.supercell`), so a
    pair list found once for the parent serves every commensurate supercell without a new neighbour search.
    """
    m = np.round(np.asarray(matrix)).astype(int)
    det = round(abs(float(np.linalg.det(m))))
    minv = np.linalg.inv(m)
    trans = lattice_points_in_supercell(m)  # (det, 3), parent fractional, order of Crystal.supercell
    i, j, image = np.asarray(i, dtype=int), np.asarray(j, dtype=int), np.asarray(image, dtype=int)
    # which supercell copy of atom j the bond from copy t of atom i reaches: T_t + R modulo the supercell lattice,
    # identified through integer keys det·(T @ M⁻¹ mod 1)
    def key(points):
        f = np.mod(np.rint(points @ minv * det).astype(np.int64), det)
        return (f[..., 0] * det + f[..., 1]) * det + f[..., 2]

    lookup = np.full(det**3, -1, dtype=np.int64)
    lookup[key(trans)] = np.arange(det)
    reach = trans[None, :, :] + image[:, None, :]  # (p, det, 3)
    t_to = lookup[key(reach)]
    if np.any(t_to < 0):
        raise StructureError("internal: a replicated pair did not land on a supercell copy; is the matrix integer?")
    t_from = np.broadcast_to(np.arange(det), t_to.shape)
    si = (i[:, None] * det + t_from).reshape(-1)
    sj = (j[:, None] * det + t_to).reshape(-1)
    vec = ((parent.frac[j] + image - parent.frac[i]) @ minv)[:, None, :]
    vec = np.broadcast_to(vec, (len(i), det, 3)).reshape(-1, 3)
    simage = np.rint(supercell.frac[si] + vec - supercell.frac[sj]).astype(int)
    return si, sj, simage


def _is_numeric(x) -> bool:
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        return False
    return a.dtype.kind == "f"


def lattice_points_in_supercell(m: np.ndarray) -> np.ndarray:
    """Parent lattice translations (integer, parent fractional basis) inside the supercell ``m @ L``, sorted."""
    m = np.asarray(m, dtype=int)
    det = round(abs(float(np.linalg.det(m))))
    corners = np.array([[a, b, c] for a in (0, 1) for b in (0, 1) for c in (0, 1)]) @ m
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    grid = np.stack(
        np.meshgrid(*(np.arange(lo[d], hi[d] + 1) for d in range(3)), indexing="ij"), axis=-1
    ).reshape(-1, 3)
    f = grid @ np.linalg.inv(m)
    inside = np.all((f > -1e-9) & (f < 1 - 1e-9), axis=1)
    pts = grid[inside]
    if len(pts) != det:
        raise StructureError(f"internal: found {len(pts)} lattice points in a supercell of index {det}")
    order = np.lexsort(pts.T[::-1])
    return pts[order]


