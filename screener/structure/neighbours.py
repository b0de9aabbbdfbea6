"""Periodic neighbour search (KD-tree over the images a cutoff needs) and neighbour shells."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from screener.errors import StructureError


@dataclass(frozen=True)
class NeighbourList:
    """Ordered pairs of atoms within a cutoff, over periodic images."""

    i: np.ndarray
    """(p,) int, index of the first atom."""
    j: np.ndarray
    """(p,) int, index of the second atom."""
    image: np.ndarray
    """(p, 3) int, lattice translation (fractional) added to atom j."""
    vector_A: np.ndarray
    """(p, 3) float, r_j + image·L − r_i, Å."""
    distance_A: np.ndarray
    """(p,) float, bond length, Å."""
    cutoff_A: float | None = None
    """Search radius, Å: every pair up to it is listed (None: unknown)."""


@dataclass(frozen=True)
class NeighbourShell:
    """One shell of equal neighbour distances."""

    distance_A: float
    """Mean distance of the shell, Å."""
    count_per_atom: float
    """Average number of neighbours per atom in this shell."""


#: Largest number of (image, atom) sites a neighbour search may build (about 100 MB of positions).
MAX_IMAGE_SITES = 4_000_000
#: Up to this many (atom, image) distances the search is done directly; beyond it with a KD-tree (scipy), which is
#: slow to import and to build for a handful of atoms.
BRUTE_FORCE_PAIRS = 200_000


def find_neighbours(lattice_A, frac, cutoff_A: float, include_zero: bool = False) -> NeighbourList:
    """Periodic neighbour search with a KD-tree over the images needed to reach ``cutoff_A``."""
    lattice_A = np.asarray(lattice_A, dtype=float)
    frac = np.asarray(frac, dtype=float)
    frac = frac - np.floor(frac)
    n = len(frac)
    rec = np.linalg.inv(lattice_A).T
    spacing = 1.0 / np.linalg.norm(rec, axis=1)  # interplanar spacings, Å
    if not (np.isfinite(cutoff_A) and cutoff_A > 0) or not np.all(np.isfinite(spacing)):
        raise StructureError(f"neighbour search needs a finite positive cutoff and cell, got cutoff {cutoff_A!r} Å")
    reach = np.ceil(cutoff_A / spacing)
    n_images = float(np.prod(2 * reach + 1))
    if n_images * max(n, 1) > MAX_IMAGE_SITES:
        raise StructureError(
            f"the neighbour search out to {cutoff_A:.4g} Å would need {n_images:.3g} periodic images of the cell "
            f"(interplanar spacings {np.round(spacing, 4).tolist()} Å): the cell is too oblique, too thin or the "
            "cutoff too long; reduce the cell (e.g. to its Niggli-reduced form) or the cutoff"
        )
    reach = reach.astype(int)
    rng = [np.arange(-r, r + 1) for r in reach]
    images = np.stack(np.meshgrid(*rng, indexing="ij"), axis=-1).reshape(-1, 3)
    cart = frac @ lattice_A
    img_cart = images @ lattice_A
    all_pos = (cart[None, :, :] + img_cart[:, None, :]).reshape(-1, 3)
    if n * len(all_pos) <= BRUTE_FORCE_PAIRS:
        # small cells: every distance at once is quicker than loading and building a tree
        d2 = np.sum((all_pos[None, :, :] - cart[:, None, :]) ** 2, axis=2)
        ii, flat = np.nonzero(d2 <= (cutoff_A + 1e-9) ** 2)
    else:
        from scipy.spatial import cKDTree

        tree = cKDTree(all_pos)
        hits = tree.query_ball_point(cart, r=cutoff_A + 1e-9)
        ii = np.repeat(np.arange(n), [len(h) for h in hits])
        flat = np.fromiter((x for h in hits for x in h), dtype=int, count=len(ii))
    img_idx, jj = np.divmod(flat, n)
    image = images[img_idx]
    vec = all_pos[flat] - cart[ii]
    dist = np.linalg.norm(vec, axis=1)
    keep = dist > 1e-8 if not include_zero else ~((ii == jj) & np.all(image == 0, axis=1))
    order = np.lexsort((dist[keep], ii[keep]))
    return NeighbourList(
        i=ii[keep][order],
        j=jj[keep][order],
        image=image[keep][order],
        vector_A=vec[keep][order],
        distance_A=dist[keep][order],
        cutoff_A=float(cutoff_A),
    )


def group_shells(distances_A: np.ndarray, tol_A: float, n_atoms: int) -> list[NeighbourShell]:
    """Cluster sorted distances into shells whose members lie within tol_A of the previous member."""
    d = np.sort(np.asarray(distances_A))
    if len(d) == 0:
        return []
    breaks = np.flatnonzero(np.diff(d) > tol_A) + 1
    groups = np.split(d, breaks)
    return [NeighbourShell(float(g.mean()), len(g) / n_atoms) for g in groups]


#: Relative tolerance for "same shell" when finding the nearest-neighbour bonds of a candidate generator's parent
#: (common practice, no source).
FIRST_SHELL_TOLERANCE = 0.05


def nearest_neighbour_bonds(crystal, tolerance: float = FIRST_SHELL_TOLERANCE, neighbours: NeighbourList | None = None
                            ) -> NeighbourList:
    """The first neighbour shell of every atom: NeighbourList of pairs with d ≤ (1 + tolerance)·d_min(atom i).

    ``neighbours``: a search of the same crystal already made (e.g. for its bonds); it is filtered instead of
    searching again when it reaches far enough.
    """
    d_guess = crystal._shortest_contact()[0]
    reach = d_guess * (1 + tolerance) * 1.0001 + 1e-6
    if neighbours is not None and neighbours.cutoff_A is not None and neighbours.cutoff_A >= reach:
        near = neighbours.distance_A <= reach + 1e-9
        nl = NeighbourList(neighbours.i[near], neighbours.j[near], neighbours.image[near], neighbours.vector_A[near],
                           neighbours.distance_A[near], reach)
    else:
        nl = find_neighbours(crystal.lattice_A, crystal.frac, reach)
    dmin_i = np.full(crystal.n_atoms, np.inf)
    np.minimum.at(dmin_i, nl.i, nl.distance_A)
    keep = nl.distance_A <= dmin_i[nl.i] * (1 + tolerance)
    return type(nl)(nl.i[keep], nl.j[keep], nl.image[keep], nl.vector_A[keep], nl.distance_A[keep])


#: A contact shorter than this fraction of the sum of the two covalent radii is implausible for a solid: it is
#: usually a wrong origin choice, a wrong cell or a corrupted coordinate (common practice, no source).
SHORT_CONTACT_FRACTION = 0.75


def short_contacts(crystal, fraction: float = SHORT_CONTACT_FRACTION) -> list[tuple[str, str, float, float]]:
    """Pairs of sites closer than ``fraction`` × the sum of their covalent radii (Cordero et al. 2008).

    Returns (label_i, label_j, distance_A, radii_sum_A) for the shortest such contact of each species pair,
    shortest first. Elements without a tabulated radius are skipped.
    """
    from screener.structure.elements import COVALENT_RADIUS_A

    radii = np.array([COVALENT_RADIUS_A.get(s, np.nan) for s in crystal.species])
    if not np.isfinite(radii).any():
        return []
    cutoff = fraction * 2 * float(np.nanmax(radii))
    nl = find_neighbours(crystal.lattice_A, crystal.frac, cutoff, include_zero=True)
    if not len(nl.distance_A):
        return []
    limit = fraction * (radii[nl.i] + radii[nl.j])
    bad = np.flatnonzero(nl.distance_A < limit)  # NaN limits compare False: no radius, no check
    found: dict[tuple[str, str], tuple[str, str, float, float]] = {}
    for k in bad[np.argsort(nl.distance_A[bad])]:
        i, j = int(nl.i[k]), int(nl.j[k])
        pair = tuple(sorted((crystal.species[i], crystal.species[j])))
        if pair not in found:
            found[pair] = (crystal.labels[i], crystal.labels[j], float(nl.distance_A[k]),
                           float(radii[i] + radii[j]))
    return sorted(found.values(), key=lambda x: x[2])


def contact_ratio(crystal) -> float:
    """Smallest distance / (sum of covalent radii) over all pairs up to 1.5 × that sum; inf when none is that close."""
    from screener.structure.elements import COVALENT_RADIUS_A

    radii = np.array([COVALENT_RADIUS_A.get(s, np.nan) for s in crystal.species])
    if not np.isfinite(radii).any():
        return float("inf")
    nl = find_neighbours(crystal.lattice_A, crystal.frac, 3 * float(np.nanmax(radii)), include_zero=True)
    ratio = nl.distance_A / (radii[nl.i] + radii[nl.j])
    ratio = ratio[np.isfinite(ratio)]
    return float(ratio.min()) if len(ratio) else float("inf")


def warn_short_contacts(crystal, hint: str = "") -> None:
    """A StructureWarning for each species pair whose shortest contact is implausibly short (see short_contacts)."""
    import warnings

    from screener.errors import StructureWarning

    for a, b, d, r in short_contacts(crystal):
        warnings.warn(StructureWarning(
            f"sites {a} and {b} are only {d:.3f} Å apart, less than {SHORT_CONTACT_FRACTION:g} × the sum of their "
            f"covalent radii ({r:.2f} Å, Cordero et al. 2008): the structure is probably not what the file "
            f"means{hint}", "short_contact", labels=[a, b], distance_A=d, radii_sum_A=r), stacklevel=3)


def union_components(n: int, rows, cols) -> np.ndarray:
    """(n,) connected-component label of each of n nodes joined by the pairs (rows[k], cols[k]), labels 0, 1, …
    in the order of each component's lowest node (a small union-find; for big sparse graphs use scipy's)."""
    root = np.arange(n)

    def find(a):
        while root[a] != a:
            root[a] = root[root[a]]
            a = root[a]
        return a

    for a, b in zip(np.asarray(rows, dtype=int).tolist(), np.asarray(cols, dtype=int).tolist(), strict=True):
        ra, rb = find(a), find(b)
        if ra != rb:
            root[max(ra, rb)] = min(ra, rb)
    return np.unique([find(a) for a in range(n)], return_inverse=True)[1]
