"""CIF reader and writer (parsing through gemmi).

Reading takes the first data block that has a cell (or the block named by ``block=``), expands the asymmetric
unit with the file's symmetry operators, merges sites that land on the same point and returns an ordered
`Crystal`. Numbers may carry standard uncertainties, e.g. ``3.7598(1)``; the uncertainty is dropped.

Symmetry is taken from, in order: an explicit operator loop (``_space_group_symop_operation_xyz`` or
``_symmetry_equiv_pos_as_xyz``), the Hall symbol, the Hermann–Mauguin symbol (rhombohedral or hexagonal axes
chosen from the cell angles), the International Tables number; a file with none of these is read as P1.

The structure must be ordered: a site with occupancy below 1, or two elements sharing one position, is an
error that names the site. Writing produces a P1 CIF with every atom listed.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from screener.errors import FormatError, ScreenerError, StructureError
from screener.structure.crystal import MIN_DISTANCE_A, Crystal
from screener.structure.elements import normalise_symbol

#: Sites closer than this (Å) after symmetry expansion are one site listed twice (same element) or a mixed
#: site (different elements). Well below any bond, well above rounding of coordinates printed to 4 digits.
MERGE_TOL_A = 0.2
#: Default largest number of atoms a structure file may expand to (raise with --max-atoms): beyond it every later
#: stage (neighbours, symmetry, bands) needs minutes and gigabytes. Common practice, no source.
MAX_ATOMS = 2000
#: Occupancies this close to 1 count as full (files often print 0.999 or 1.00(1)).
OCCUPANCY_TOL = 0.02

_CELL_TAGS = ("_cell_length_a", "_cell_length_b", "_cell_length_c",
              "_cell_angle_alpha", "_cell_angle_beta", "_cell_angle_gamma")


def read(path: Path, *, block: str | None = None, min_distance_A: float = MIN_DISTANCE_A,
         max_atoms: int | None = None) -> Crystal:
    """Read an ordered crystal structure from a CIF file.

    Parameters
    ----------
    path : Path
        CIF file.
    block : str, optional
        Name of the data block to read (without ``data_``); default: the first block with a cell.
    min_distance_A : float
        Smallest interatomic distance accepted, Å.
    """
    import gemmi

    text = _read_text(path)
    try:
        doc = gemmi.cif.read_string(text)
    except (RuntimeError, ValueError) as exc:
        raise FormatError(f"not a readable CIF file: {_parser_message(exc)}") from None
    blk = _choose_block(doc, block)
    lattice = _lattice(blk)
    try:
        small = gemmi.make_small_structure_from_block(blk)
    except (RuntimeError, ValueError, IndexError) as exc:
        raise FormatError(f"data block {blk.name!r}: {_parser_message(exc)}") from None
    ops = _operations(small, blk, lattice)
    labels, species, frac, occ = _asymmetric_unit(blk)
    for lab, o in zip(labels, occ, strict=True):
        if o < 1 - OCCUPANCY_TOL:
            raise StructureError(
                f"site {lab} has occupancy {o:g}: screener needs an ordered structure (every site fully "
                "occupied by one element); choose one ordered arrangement, e.g. an ordered supercell"
            )
    frac_all, species_all, labels_all = _expand(frac, species, labels, ops, lattice, max_atoms)
    return Crystal(lattice, frac_all, species_all, labels_all, min_distance_A=min_distance_A)


def write(crystal: Crystal, path: Path, *, title: str | None = None) -> None:
    """Write ``crystal`` as a P1 CIF file (cell lengths/angles, every atom with fractional coordinates).

    The cell is re-expressed by lengths and angles, so a reader may orient it differently; distances and
    symmetry are unchanged.
    """
    a, b, c, alpha, beta, gamma = cell_parameters(crystal.lattice_A)
    name = re.sub(r"[^A-Za-z0-9_.-]", "_", title or crystal.formula) or "structure"
    lines = [
        f"# written by screener: {crystal.formula}, {crystal.n_atoms} atoms, P1 setting",
        f"data_{name}",
        "_symmetry_space_group_name_H-M   'P 1'",
        "_space_group_IT_number           1",
        f"_cell_length_a                   {a:.10f}",
        f"_cell_length_b                   {b:.10f}",
        f"_cell_length_c                   {c:.10f}",
        f"_cell_angle_alpha                {alpha:.10f}",
        f"_cell_angle_beta                 {beta:.10f}",
        f"_cell_angle_gamma                {gamma:.10f}",
        f"_cell_volume                     {crystal.volume_A3:.6f}",
        "loop_",
        "_space_group_symop_operation_xyz",
        "'x, y, z'",
        "loop_",
        "_atom_site_label",
        "_atom_site_type_symbol",
        "_atom_site_fract_x",
        "_atom_site_fract_y",
        "_atom_site_fract_z",
        "_atom_site_occupancy",
    ]
    width = max(len(x) for x in crystal.labels)
    for lab, el, (x, y, z) in zip(crystal.labels, crystal.species, crystal.frac, strict=True):
        safe = re.sub(r"\s", "_", lab)
        lines.append(f"{safe:<{width}} {el:<2} {x:.10f} {y:.10f} {z:.10f} 1")
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


def cell_parameters(lattice_A) -> tuple[float, float, float, float, float, float]:
    """(a, b, c, α, β, γ) in Å and degrees from lattice rows."""
    lat = np.asarray(lattice_A, dtype=float)
    a, b, c = np.linalg.norm(lat, axis=1)

    def angle(u, v):
        return math.degrees(math.acos(float(np.clip(u @ v / (np.linalg.norm(u) * np.linalg.norm(v)), -1, 1))))

    return float(a), float(b), float(c), angle(lat[1], lat[2]), angle(lat[0], lat[2]), angle(lat[0], lat[1])


def lattice_from_parameters(a, b, c, alpha, beta, gamma) -> np.ndarray:
    """Lattice rows with a along x and b in the xy plane (the usual crystallographic orthogonalisation)."""
    ca, cb, cg = (math.cos(math.radians(t)) for t in (alpha, beta, gamma))
    sg = math.sin(math.radians(gamma))
    cx = c * cb
    cy = c * (ca - cb * cg) / sg
    cz2 = c * c - cx * cx - cy * cy
    cz = math.sqrt(cz2) if cz2 > 0 else 0.0
    return np.array([[a, 0.0, 0.0], [b * cg, b * sg, 0.0], [cx, cy, cz]])


# ------------------------------------------------------------------------------------------------ helpers
def _read_text(path: Path) -> str:
    data = Path(path).read_bytes()
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]  # a UTF-8 byte-order mark, written by some editors: not part of the CIF text
    if not data.strip():
        raise FormatError("file is empty; expected a CIF with a data_ block, a cell and atom sites")
    if b"\x00" in data:
        raise FormatError("file contains binary data (NUL bytes), not CIF text")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # CIF 1.1 is ASCII; older files carry Latin-1 author names. Every byte decodes in Latin-1.
        return data.decode("latin-1")


def _parser_message(exc: Exception) -> str:
    """The CIF parser's complaint with its in-memory source name replaced by the line (and block) it names."""
    msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    msg = re.sub(r"^string:(\d+) in (\S+?):\s*", r"line \1 (\2): ", msg)
    return re.sub(r"^string:(\d+):\S*\s*", r"line \1: ", msg)


def _choose_block(doc, name: str | None):
    if len(doc) == 0:
        raise FormatError("no data_ block found; a CIF file starts its content with data_<name>")
    if name is not None:
        for blk in doc:
            if blk.name == name:
                return blk
        raise FormatError(f"no data block named {name!r}; the file has {', '.join(b.name for b in doc)}")
    for blk in doc:
        if blk.find_value("_cell_length_a") is not None:
            return blk
    raise FormatError(
        f"no data block has a cell (_cell_length_a ...); blocks found: {', '.join(b.name for b in doc)}"
    )


def _number(blk, tag: str) -> float:
    import gemmi

    raw = blk.find_value(tag)
    if raw is None:
        raise FormatError(f"data block {blk.name!r}: missing {tag}; the cell needs all of {', '.join(_CELL_TAGS)}")
    value = gemmi.cif.as_number(raw)
    if not math.isfinite(value):
        raise FormatError(f"data block {blk.name!r}: {tag} is {raw!r}, expected a number such as 3.7598(1)")
    return value


def _lattice(blk) -> np.ndarray:
    a, b, c, alpha, beta, gamma = (_number(blk, t) for t in _CELL_TAGS)
    if min(a, b, c) <= 0:
        raise StructureError(f"cell lengths must be positive, got a={a:g}, b={b:g}, c={c:g} Å")
    for tag, ang in zip(_CELL_TAGS[3:], (alpha, beta, gamma), strict=True):
        if not 0 < ang < 180:
            raise StructureError(f"{tag} is {ang:g}°, expected an angle between 0 and 180°")
    lat = lattice_from_parameters(a, b, c, alpha, beta, gamma)
    if lat[2, 2] <= 1e-6 * c:
        raise StructureError(
            f"cell angles α={alpha:g}°, β={beta:g}°, γ={gamma:g}° do not form a cell with positive volume"
        )
    return lat


def _operations(small, blk, lattice) -> list[tuple[np.ndarray, np.ndarray]]:
    """Symmetry operations as (rotation 3x3, translation 3) in fractional coordinates."""
    import gemmi

    if small.symops:
        ops = []
        for triplet in small.symops:
            try:
                ops.append(gemmi.Op(triplet))
            except (RuntimeError, ValueError) as exc:
                raise FormatError(f"symmetry operator {triplet!r} cannot be read: {_parser_message(exc)}") from None
    else:
        sg = small.spacegroup
        if sg is None:
            hm = (small.spacegroup_hm or "").strip()
            hall = (small.spacegroup_hall or "").strip()
            if hm or hall:
                raise FormatError(
                    f"space group {hm or hall!r} is not a Hermann–Mauguin or Hall symbol the CIF reader knows; "
                    "list the symmetry operators in a _space_group_symop_operation_xyz loop or fix the symbol"
                )
            number = small.spacegroup_number
            if number and number > 0:
                sg = gemmi.find_spacegroup_by_number(number)
                if sg is not None and sg.hm.startswith("R"):
                    a, b, c, alpha, beta, gamma = cell_parameters(lattice)
                    sg = gemmi.find_spacegroup_by_name(sg.hm, alpha=alpha, gamma=gamma)
            if sg is None:
                return [(np.eye(3), np.zeros(3))]  # no symmetry information at all: P1
        ops = list(sg.operations())
    return [(np.array(op.rot, dtype=float) / op.DEN, np.array(op.tran, dtype=float) / op.DEN) for op in ops]


def _column(blk, tag: str):
    col = blk.find_values(tag)
    return list(col) if col is not None and len(col) else None


def _asymmetric_unit(blk):
    import gemmi

    xs, ys, zs = (_column(blk, f"_atom_site_fract_{c}") for c in "xyz")
    if xs is None or ys is None or zs is None:
        raise FormatError(
            f"data block {blk.name!r}: no _atom_site_fract_x/_y/_z loop; screener needs fractional coordinates"
        )
    n = len(xs)
    labels = _column(blk, "_atom_site_label")
    types = _column(blk, "_atom_site_type_symbol")
    occs = _column(blk, "_atom_site_occupancy")
    if labels is None and types is None:
        raise FormatError(f"data block {blk.name!r}: atom sites have neither _atom_site_label nor _type_symbol")
    labels = [gemmi.cif.as_string(x) for x in labels] if labels else [None] * n
    frac = np.empty((n, 3))
    species, occ, out_labels = [], [], []
    for k in range(n):
        lab = labels[k] or f"site {k + 1}"
        for d, col in enumerate((xs, ys, zs)):
            value = gemmi.cif.as_number(col[k])
            if not math.isfinite(value):
                raise FormatError(f"site {lab}: fractional coordinate {'xyz'[d]} is {col[k]!r}, expected a number")
            if abs(value) > 10:
                # far outside the cell: almost surely a corrupted number, and wrapping it would hide that
                raise StructureError(f"site {lab}: fractional coordinate {'xyz'[d]} = {col[k]} is outside -10..10")
            frac[k, d] = value
        symbol = gemmi.cif.as_string(types[k]) if types else labels[k]
        try:
            species.append(normalise_symbol(symbol))
        except ScreenerError as exc:
            raise StructureError(f"site {lab}: {exc}") from None
        raw = occs[k] if occs else "?"
        if gemmi.cif.is_null(raw):
            o = 1.0  # '?' (unknown) or '.' (inapplicable) occupancy: CIF 1.1 null values, read as full
        else:
            o = gemmi.cif.as_number(raw)
            if not math.isfinite(o):
                raise FormatError(f"site {lab}: occupancy {raw!r} is not a number such as 1 or 0.98(2)")
            if o > 1 + 1e-3 or o < 0:
                raise StructureError(f"site {lab}: occupancy {raw} is outside 0..1")
        occ.append(o)
        out_labels.append(lab)
    return out_labels, species, frac, occ


def _expand(frac, species, labels, ops, lattice, max_atoms=None):
    """Apply every operation to every asymmetric site; merge images closer than MERGE_TOL_A.

    Images are processed in file order: an image that lands within MERGE_TOL_A of an earlier kept image is the
    same atom (a special position, or a site listed twice) and is dropped; if the two differ in element it is a
    mixed site (error). Distinct labelled sites that merge although more than 0.01 Å apart get a warning naming
    both. Close pairs come from a k-d tree over the images plus copies across the cell faces, so the merge
    scales as N log N in the number of images.
    """
    import warnings

    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    from screener.errors import ScreenerWarning

    rot = np.array([r for r, _ in ops])
    tran = np.array([t for _, t in ops])
    frac = np.asarray(frac, dtype=float)
    n_sites, n_ops = len(frac), len(ops)
    max_atoms = MAX_ATOMS if max_atoms is None else int(max_atoms)
    if n_sites * n_ops > 50 * max_atoms:
        raise StructureError(f"{n_sites} sites under {n_ops} symmetry operators would make up to {n_sites * n_ops} "
                             f"atoms, far beyond the limit of {max_atoms}; raise it with --max-atoms if intended")
    images = np.einsum("oij,sj->soi", rot, frac) + tran[None, :, :]
    images = (images - np.floor(images)).reshape(-1, 3)
    site_of = np.repeat(np.arange(n_sites), n_ops)
    # copies across faces: only images within the tolerance of a face can meet an image on the other side
    delta = MERGE_TOL_A * np.linalg.norm(np.linalg.inv(lattice).T, axis=1)
    idx_parts, shift_parts = [np.arange(len(images))], [np.zeros((len(images), 3))]
    for t in _NEIGHBOUR_CELLS:
        if not t.any():
            continue
        ok = np.ones(len(images), bool)
        for a in range(3):
            if t[a] > 0:
                ok &= images[:, a] < delta[a]
            elif t[a] < 0:
                ok &= images[:, a] > 1 - delta[a]
        sel = np.flatnonzero(ok)
        idx_parts.append(sel)
        shift_parts.append(np.broadcast_to(t, (len(sel), 3)))
    idx = np.concatenate(idx_parts)
    copies = (images[idx] + np.concatenate(shift_parts)) @ lattice
    tree = cKDTree(copies)
    pairs = tree.query_ball_point(images @ lattice, r=MERGE_TOL_A, return_sorted=False)
    # images joined by close pairs form one atom; it keeps the first image in file order
    rows = np.repeat(np.arange(len(images)), [len(p) for p in pairs])
    cols = idx[np.concatenate([np.asarray(p, dtype=int) for p in pairs])] if len(rows) else rows
    graph = coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(images), len(images)))
    _, group = connected_components(graph, directed=False)
    first = np.full(group.max() + 1, len(images))
    np.minimum.at(first, group, np.arange(len(images)))
    rep = first[group]
    keep = rep == np.arange(len(images))
    if len(np.flatnonzero(keep)) > max_atoms:
        raise StructureError(f"the symmetry operators make {int(keep.sum())} atoms in the cell, more than the limit "
                             f"of {max_atoms}; raise it with --max-atoms if this is intended")
    site_rep = site_of[rep]
    mixed = np.flatnonzero(np.array(species, dtype=object)[site_of] != np.array(species, dtype=object)[site_rep])
    if len(mixed):
        a, b = site_rep[mixed[0]], site_of[mixed[0]]
        raise StructureError(
            f"sites {labels[a]} ({species[a]}) and {labels[b]} ({species[b]}) share one position: a "
            "mixed site; screener needs an ordered structure with one element per site"
        )
    cross = np.flatnonzero(site_rep != site_of)
    if len(cross):
        d = frac_distance_A(images[cross], images[rep[cross]], lattice)
        far = cross[d > 0.01]
        for a, b in sorted({(int(site_rep[m]), int(site_of[m])) for m in far})[:5]:
            warnings.warn(f"sites {labels[a]} and {labels[b]} ({species[b]}) are closer than {MERGE_TOL_A} Å after "
                          "symmetry expansion and were merged into one atom", ScreenerWarning, stacklevel=2)
    out_f = images[keep]
    kept_site = site_of[keep]
    counts = np.bincount(kept_site, minlength=n_sites)
    out_s = [species[s] for s in kept_site]
    out_l, seen = [], np.zeros(n_sites, int)
    for s in kept_site:
        seen[s] += 1
        out_l.append(labels[s] if counts[s] == 1 else f"{labels[s]}_{seen[s]}")
    return out_f, out_s, out_l


_NEIGHBOUR_CELLS = np.array([[a, b, c] for a in (-1, 0, 1) for b in (-1, 0, 1) for c in (-1, 0, 1)], dtype=float)


def frac_distance_A(f1, f2, lattice) -> np.ndarray:
    """Shortest periodic distance (Å) between matching rows of two fractional arrays (27 nearest translations)."""
    d = f1 - f2
    d -= np.round(d)
    cart = (d[:, None, :] + _NEIGHBOUR_CELLS[None, :, :]) @ lattice
    return np.linalg.norm(cart, axis=-1).min(axis=-1)
