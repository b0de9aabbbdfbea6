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
from screener.structure.neighbours import union_components, warn_short_contacts

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
    ops, hint = _operations(small, blk, lattice)
    labels, species, frac, occ = _asymmetric_unit(blk)
    for lab, o in zip(labels, occ, strict=True):
        if o < 1 - OCCUPANCY_TOL:
            raise StructureError(
                f"site {lab} has occupancy {o:g}: screener needs an ordered structure (every site fully "
                "occupied by one element); choose one ordered arrangement, e.g. an ordered supercell"
            )
    frac_all, species_all, labels_all = _expand(frac, species, labels, ops, lattice, max_atoms)
    crystal = Crystal(lattice, frac_all, species_all, labels_all, min_distance_A=min_distance_A)
    if hint:
        _compare_origin_choices(crystal, hint, frac, species, labels, lattice, max_atoms, min_distance_A)
    warn_short_contacts(crystal, "; " + hint if hint else "")
    return crystal


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


def _operations(small, blk, lattice) -> tuple[list[tuple[np.ndarray, np.ndarray]], str]:
    """Symmetry operations as (rotation 3x3, translation 3) in fractional coordinates, and a hint for the
    short-contact warning (the other origin choice, when one was assumed).

    An operator loop must form a group (every rotation of determinant ±1, closed under composition); when the
    file also states a space-group symbol, operators describing another group give a warning (the operators are
    used). A symbol with two origin choices and no qualifier is read in origin choice 2 (inversion centre at the
    origin), with a warning saying so. A file without any symmetry information is read as P1, with a warning.
    """
    import gemmi

    stated, assumed = _stated_group(small, blk, lattice)
    if small.symops:
        ops = []
        for triplet in small.symops:
            try:
                ops.append(gemmi.Op(triplet))
            except (RuntimeError, ValueError) as exc:
                raise FormatError(f"symmetry operator {triplet!r} cannot be read: {_parser_message(exc)}") from None
        out = _as_arrays(ops)
        _check_group(out, list(small.symops))
        if stated is not None:
            _compare_with_symbol(ops, stated)
        return out, ""
    if stated is None:
        _warn("the file gives no space group and no symmetry operators: read as P1, the listed sites being every "
              "atom of the cell", "no_symmetry")
        return [(np.eye(3), np.zeros(3))], ""
    hint = f"{stated.hm}:1" if assumed else ""
    return _as_arrays(list(stated.operations())), hint


def _compare_origin_choices(crystal, other: str, frac, species, labels, lattice, max_atoms, min_distance_A) -> None:
    """When origin choice 2 was assumed: warn if origin choice 1 (``other``) gives markedly more bond-like contacts
    (shortest distance relative to the covalent radii), the usual sign that the file meant origin choice 1."""
    import warnings

    import gemmi

    from screener.structure.neighbours import contact_ratio

    ops = _as_arrays(list(gemmi.find_spacegroup_by_name(other).operations()))
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            f, s, lab = _expand(frac, species, labels, ops, lattice, max_atoms)
            alt = Crystal(lattice, f, s, lab, min_distance_A=min_distance_A)
    except ScreenerError:
        return  # origin choice 1 is not even a valid reading: nothing to suggest
    here, there = contact_ratio(crystal), contact_ratio(alt)
    # a contact below 90 % of the covalent-radius sum where the other choice keeps every contact above it
    # (common practice, no source)
    if here < 0.9 <= there:
        _warn(f"with origin choice 2 the shortest contact is {here:.2f} × the sum of covalent radii ({crystal.n_atoms} "
              f"atoms); with origin choice 1 it would be {there:.2f} × ({alt.n_atoms} atoms): the file probably "
              f"means origin choice 1 — write the symbol as '{other}' to use it", "origin_choice_suspect",
              ratio_used=here, ratio_other=there)


def _warn(message: str, kind: str, **details) -> None:
    import warnings

    from screener.errors import StructureWarning

    warnings.warn(StructureWarning(message, kind, **details), stacklevel=3)


def _as_arrays(ops) -> list[tuple[np.ndarray, np.ndarray]]:
    return [(np.array(op.rot, dtype=float) / op.DEN, np.array(op.tran, dtype=float) / op.DEN) for op in ops]


def _stated_group(small, blk, lattice):
    """(space group the file names by Hall, Hermann–Mauguin symbol or number, or None; whether an origin choice
    had to be assumed)."""
    import gemmi

    hm = (small.spacegroup_hm or "").strip()
    hall = (small.spacegroup_hall or "").strip()
    if small.symops:
        # the operators decide (the parser derives its group from them); the stated symbol is only compared
        try:
            named = gemmi.find_spacegroup_by_name(hm) if hm else None
            if named is None and hall:
                named = gemmi.find_spacegroup_by_ops(gemmi.symops_from_hall(hall))
        except (RuntimeError, ValueError):
            named = None
        return named, False
    sg = small.spacegroup
    raw_hm = next((gemmi.cif.as_string(v) for v in (blk.find_value(t) for t in _HM_TAGS) if v is not None), "")
    if ":" in raw_hm and not hall:
        # an explicit setting qualifier (origin choice ':1'/':2', axes ':H'/':R') is honoured as written
        qualified = gemmi.find_spacegroup_by_name(raw_hm.strip())
        if qualified is not None:
            sg, hm = qualified, raw_hm.strip()
    if sg is None and (hm or hall):
        raise FormatError(
            f"space group {hm or hall!r} is not a Hermann–Mauguin or Hall symbol the CIF reader knows; "
            "list the symmetry operators in a _space_group_symop_operation_xyz loop or fix the symbol"
        )
    if sg is None:
        raw = blk.find_value("_space_group_IT_number") or blk.find_value("_symmetry_Int_Tables_number")
        if raw is None or gemmi.cif.is_null(raw):
            return None, False
        number = gemmi.cif.as_number(raw)
        if not (math.isfinite(number) and number == int(number) and 1 <= number <= 230):
            raise FormatError(f"space-group number {raw} is not one of the 230 space groups (1 to 230)")
        sg = gemmi.find_spacegroup_by_number(int(number))
        if sg.hm.startswith("R"):
            _, _, _, alpha, _, gamma = cell_parameters(lattice)
            sg = gemmi.find_spacegroup_by_name(sg.hm, alpha=alpha, gamma=gamma)
        hm = ""
    if sg.ext in ("1", "2") and not hall and ":" not in hm and not small.symops:
        if sg.ext != "2":
            sg = gemmi.find_spacegroup_by_name(f"{sg.hm}:2")
        _warn(f"space group {sg.hm.replace(' ', '')} has two origin choices and the file does not say which: "
              "origin choice 2 (inversion centre at the origin) was used", "origin_choice", origin_choice=2,
              space_group=sg.hm.replace(" ", ""))
        return sg, True
    return sg, False


_HM_TAGS = ("_space_group_name_H-M_alt", "_symmetry_space_group_name_H-M", "_space_group.name_H-M_alt")


def _check_group(ops, triplets) -> None:
    """Every rotation has determinant ±1 and the operators are closed under composition (modulo translations)."""
    rot = np.array([r for r, _ in ops])
    tran = np.array([t for _, t in ops])
    det = np.linalg.det(rot)
    bad = np.flatnonzero(np.abs(np.abs(det) - 1) > 1e-6)
    if len(bad):
        k = int(bad[0])
        raise StructureError(f"symmetry operator {triplets[k]!r} is not a symmetry operation (its determinant is "
                             f"{det[k]:g}, not ±1): the operator list is corrupted")
    # (R1, t1)(R2, t2) = (R1 R2, R1 t2 + t1): every product must be in the list, translations taken modulo 1
    prod_r = np.einsum("aij,bjk->abik", rot, rot).reshape(-1, 9)
    prod_t = (np.einsum("aij,bj->abi", rot, tran) + tran[:, None, :]).reshape(-1, 3)
    key_r = rot.reshape(-1, 9)
    t_mod = np.mod(tran, 1.0)
    same_r = np.all(np.abs(prod_r[:, None, :] - key_r[None, :, :]) < 1e-6, axis=2)
    dt = np.mod(prod_t[:, None, :] - t_mod[None, :, :] + 0.5, 1.0) - 0.5
    found = np.any(same_r & np.all(np.abs(dt) < 1e-4, axis=2), axis=1)
    if not found.all():
        a, b = divmod(int(np.flatnonzero(~found)[0]), len(ops))
        raise StructureError(f"the {len(ops)} symmetry operators do not form a group: {triplets[a]!r} followed by "
                             f"{triplets[b]!r} gives an operation that is not in the list; the operator list is "
                             "incomplete or corrupted")


def _compare_with_symbol(ops, stated) -> None:
    """Warn when the listed operators describe another group than the stated symbol."""
    import gemmi

    try:
        found = gemmi.find_spacegroup_by_ops(gemmi.GroupOps(ops))
    except (RuntimeError, ValueError):
        found = None
    name = stated.hm.replace(" ", "")
    n_stated = len(list(stated.operations()))
    if found is not None and found.number != stated.number:
        _warn(f"the symmetry operators describe {found.hm.replace(' ', '')} (No. {found.number}) but the file states "
              f"{name} (No. {stated.number}); the operators were used", "symmetry_mismatch")
    elif found is None and len(ops) != n_stated:
        _warn(f"the file lists {len(ops)} symmetry operators but states {name} (No. {stated.number}), which has "
              f"{n_stated} in its conventional cell; the operators were used", "symmetry_mismatch")


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
    for tag, col in (("_atom_site_fract_y", ys), ("_atom_site_fract_z", zs), ("_atom_site_label", labels),
                     ("_atom_site_type_symbol", types), ("_atom_site_occupancy", occs)):
        if col is not None and len(col) != n:
            raise FormatError(f"data block {blk.name!r}: {tag} has {len(col)} value(s) but _atom_site_fract_x has "
                              f"{n}; every atom-site tag belongs in the same loop, one value per site")
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

    from screener.errors import StructureWarning

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
    cart = images @ lattice
    if len(images) * len(copies) <= _DIRECT_PAIRS:
        # a few hundred images (every ordinary CIF): all distances at once, no tree or sparse graph to import
        d2 = np.sum((cart[:, None, :] - copies[None, :, :]) ** 2, axis=2)
        rows, hit = np.nonzero(d2 <= MERGE_TOL_A**2)
        cols = idx[hit]
        group = union_components(len(images), rows, cols)
    else:
        from scipy.sparse import coo_matrix
        from scipy.sparse.csgraph import connected_components
        from scipy.spatial import cKDTree

        tree = cKDTree(copies)
        pairs = tree.query_ball_point(cart, r=MERGE_TOL_A, return_sorted=False)
        rows = np.repeat(np.arange(len(images)), [len(p) for p in pairs])
        cols = idx[np.concatenate([np.asarray(p, dtype=int) for p in pairs])] if len(rows) else rows
        graph = coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(images), len(images)))
        _, group = connected_components(graph, directed=False)
    # images joined by close pairs form one atom; it keeps the first image in file order
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
        closest: dict[tuple[int, int], float] = {}
        for m, dist in zip(far, d[d > 0.01], strict=True):
            key = (int(site_rep[m]), int(site_of[m]))
            closest[key] = min(closest.get(key, np.inf), float(dist))
        for (a, b), dist in sorted(closest.items())[:5]:
            warnings.warn(StructureWarning(
                f"sites {labels[a]} and {labels[b]} ({species[b]}) are {dist:.3f} Å apart after symmetry expansion, "
                f"closer than {MERGE_TOL_A} Å, and were merged into one atom", "merged_sites",
                labels=[labels[a], labels[b]], distance_A=dist), stacklevel=2)
    out_f = images[keep]
    kept_site = site_of[keep]
    counts = np.bincount(kept_site, minlength=n_sites)
    out_s = [species[s] for s in kept_site]
    out_l, seen = [], np.zeros(n_sites, int)
    for s in kept_site:
        seen[s] += 1
        out_l.append(labels[s] if counts[s] == 1 else f"{labels[s]}_{seen[s]}")
    return out_f, out_s, out_l


#: Up to this many (image, copy) distances the duplicate merge computes them all at once; beyond it a k-d tree.
_DIRECT_PAIRS = 400_000


_NEIGHBOUR_CELLS = np.array([[a, b, c] for a in (-1, 0, 1) for b in (-1, 0, 1) for c in (-1, 0, 1)], dtype=float)


def frac_distance_A(f1, f2, lattice) -> np.ndarray:
    """Shortest periodic distance (Å) between matching rows of two fractional arrays (27 nearest translations)."""
    d = f1 - f2
    d -= np.round(d)
    cart = (d[:, None, :] + _NEIGHBOUR_CELLS[None, :, :]) @ lattice
    return np.linalg.norm(cart, axis=-1).min(axis=-1)
