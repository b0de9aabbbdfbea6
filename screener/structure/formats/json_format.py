"""screener's own JSON structure format.

One JSON object::

    {
      "format": "screener-structure",        # optional marker, written by `write`
      "version": 1,                          # optional
      "title": "simple-cubic As",            # optional
      "lattice_A": [[ax, ay, az], [bx, by, bz], [cx, cy, cz]],   # lattice vectors as rows, Å
      "sites": [
        {"element": "As", "frac": [0.0, 0.0, 0.0], "label": "As1"},   # label optional
        {"element": "As", "cart_A": [1.2, 0.0, 0.0]}                   # or Cartesian position, Å
      ]
    }

Other keys are ignored, so the object printed by ``screener info --json`` (which has ``lattice_A`` and
``sites`` with ``element``, ``frac`` and ``label``) reads back as the same structure.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from screener.errors import FormatError, StructureError
from screener.structure.crystal import MIN_DISTANCE_A, Crystal

FORMAT_MARKER = "screener-structure"
VERSION = 1


def read(path: Path, *, min_distance_A: float = MIN_DISTANCE_A) -> Crystal:
    """Read a structure from screener JSON (see module docstring for the layout)."""
    data = Path(path).read_bytes()
    if not data.strip():
        raise FormatError("file is empty; expected a JSON object with lattice_A and sites")
    try:
        obj = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        raise FormatError(f"file is not UTF-8 text (byte {exc.start}); expected JSON") from None
    except json.JSONDecodeError as exc:
        raise FormatError(f"not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}") from None
    from screener.structure.neighbours import warn_short_contacts

    crystal = from_dict(obj, min_distance_A=min_distance_A)
    warn_short_contacts(crystal)
    return crystal


def from_dict(obj, *, min_distance_A: float = MIN_DISTANCE_A) -> Crystal:
    """Crystal from an already parsed JSON object."""
    if not isinstance(obj, dict):
        raise FormatError(f"expected a JSON object with lattice_A and sites, got a JSON {type(obj).__name__}")
    marker = obj.get("format", FORMAT_MARKER)
    if marker != FORMAT_MARKER:
        raise FormatError(f"field 'format' is {marker!r}, expected {FORMAT_MARKER!r}")
    if "lattice_A" not in obj:
        raise FormatError("missing field 'lattice_A' (three lattice vectors as rows, Å)")
    lattice = _array(obj["lattice_A"], "lattice_A", (3, 3))
    sites = obj.get("sites")
    if not isinstance(sites, list) or not sites:
        raise FormatError("field 'sites' must be a non-empty list of {element, frac | cart_A, label?} objects")
    inv = None
    frac = np.empty((len(sites), 3))
    species, labels = [], []
    for k, site in enumerate(sites):
        where = f"sites[{k}]"
        if not isinstance(site, dict):
            raise FormatError(f"{where} must be an object with element and frac (or cart_A), got {site!r}")
        if "element" not in site:
            raise FormatError(f"{where}: missing field 'element'")
        species.append(str(site["element"]))
        if "frac" in site:
            frac[k] = _array(site["frac"], f"{where}.frac", (3,))
        elif "cart_A" in site:
            if inv is None:
                if abs(np.linalg.det(lattice)) < 1e-12:
                    raise StructureError("lattice_A has zero volume; cannot convert cart_A positions")
                inv = np.linalg.inv(lattice)
            frac[k] = _array(site["cart_A"], f"{where}.cart_A", (3,)) @ inv
        else:
            raise FormatError(f"{where}: needs 'frac' (fractions of the lattice rows) or 'cart_A' (Å)")
        if np.all(np.isfinite(frac[k])) and np.abs(frac[k]).max() > 10:
            # far outside the cell: almost surely a corrupted number, and wrapping it would hide that
            raise StructureError(f"{where}: fractional position {np.round(frac[k], 6).tolist()} is outside -10..10")
        labels.append(site.get("label"))
    use_labels = None if any(lab is None for lab in labels) else [str(x) for x in labels]
    return Crystal(lattice, frac, species, use_labels, min_distance_A=min_distance_A)


def to_dict(crystal: Crystal, title: str | None = None) -> dict:
    """The JSON object `write` stores."""
    obj = {"format": FORMAT_MARKER, "version": VERSION}
    if title:
        obj["title"] = title
    obj["lattice_A"] = crystal.lattice_A.tolist()
    obj["sites"] = [
        {"label": lab, "element": el, "frac": f.tolist()}
        for lab, el, f in zip(crystal.labels, crystal.species, crystal.frac, strict=True)
    ]
    return obj


def write(crystal: Crystal, path: Path, *, title: str | None = None) -> None:
    """Write ``crystal`` as screener JSON (full double precision)."""
    Path(path).write_text(json.dumps(to_dict(crystal, title), indent=2) + "\n", encoding="utf-8")


def _array(value, field: str, shape: tuple[int, ...]) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise FormatError(f"field {field!r} must hold numbers of shape {shape}, got {value!r}") from None
    if arr.shape != shape:
        raise FormatError(f"field {field!r} must have shape {shape}, got shape {arr.shape}: {value!r}")
    return arr
