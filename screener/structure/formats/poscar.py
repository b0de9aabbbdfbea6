"""POSCAR/CONTCAR reader and writer.

Layout read (one item per line): title; scale (one number: factor, negative: target cell volume in Å^3; or
three numbers: factors for the x, y, z Cartesian components, from memory of the format); three lattice vectors (rows, Å before scaling); element symbols
(optional: files without this line need ``species=[...]``); atom counts per element; an optional line starting
with S (selective dynamics); D (Direct, fractional) or C/K (Cartesian, Å before scaling); one position per
atom. Anything after the three coordinates (selective-dynamics flags, comments) is ignored, except that a
trailing word written by `write` is taken as the site label.

Writing groups atoms by element (the format demands contiguous blocks), in order of first appearance, with
Direct coordinates and a scale of 1.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from screener.errors import FormatError, ScreenerError, StructureError
from screener.structure.crystal import MIN_DISTANCE_A, Crystal
from screener.structure.elements import normalise_symbol


def read(path: Path, *, species=None, min_distance_A: float = MIN_DISTANCE_A) -> Crystal:
    """Read a POSCAR-style file.

    Parameters
    ----------
    path : Path
        POSCAR, CONTCAR or .vasp file.
    species : sequence of str, optional
        Element symbols, one per count, for files without an element line; when the file has one, they must
        agree with it.
    min_distance_A : float
        Smallest interatomic distance accepted, Å.
    """
    lines = _lines(path)
    reader = _Lines(lines)
    reader.next("title")
    scale = reader.numbers("scale factor", (1, 3))
    lattice = np.array([reader.numbers(f"lattice vector {k + 1}", (3,)) for k in range(3)])

    line_no, tokens = reader.next("element symbols or atom counts")
    if all(_is_int(t) for t in tokens):
        symbols = None
        counts = [int(t) for t in tokens]
    else:
        symbols = tokens
        line_no, tokens = reader.next("atom counts")
        if not tokens or not all(_is_int(t) for t in tokens):
            raise FormatError(f"line {line_no}: expected atom counts (integers), got {_show(tokens)}")
        counts = [int(t) for t in tokens]
    if any(c < 0 for c in counts) or sum(counts) == 0:
        raise FormatError(f"line {line_no}: atom counts must be non-negative with at least one atom, got {counts}")

    if symbols is not None:
        # symbols may carry suffixes such as 'Te_pv' or 'As/abc123' (pseudopotential names)
        try:
            symbols = [normalise_symbol(s.split("_")[0].split("/")[0]) for s in symbols]
        except ScreenerError as exc:
            raise StructureError(f"line {line_no - 1}: {exc}") from None
        if len(symbols) != len(counts):
            raise FormatError(
                f"line {line_no - 1}: {len(symbols)} element symbols but {len(counts)} atom counts on line {line_no}"
            )
    if species is not None:
        given = [normalise_symbol(s) for s in species]
        if len(given) != len(counts):
            raise StructureError(
                f"species option lists {len(given)} elements ({', '.join(given)}) but the file has "
                f"{len(counts)} atom counts {counts}; give one element per count"
            )
        if symbols is not None and given != symbols:
            raise StructureError(
                f"species option {given} disagrees with the element line {symbols} in the file; drop the option"
            )
        symbols = given
    if symbols is None:
        raise FormatError(
            f"old-style POSCAR without an element line (counts {counts} on line {line_no}); give the elements "
            "in order, e.g. --species As,Te (species=['As', 'Te'] in Python)"
        )

    line_no, tokens = reader.next("coordinate mode (Direct or Cartesian)")
    if tokens[0][0] in "sS":
        line_no, tokens = reader.next("coordinate mode (Direct or Cartesian)")
    mode = tokens[0][0].lower()
    if mode not in "dck":
        raise FormatError(f"line {line_no}: expected 'Direct' or 'Cartesian', got {_show(tokens)}")

    n = sum(counts)
    pos = np.empty((n, 3))
    labels = []
    for k in range(n):
        line_no, tokens = reader.next(f"position of atom {k + 1} of {n}")
        pos[k] = _floats(tokens[:3], line_no, f"position of atom {k + 1}")
        extra = [t for t in tokens[3:] if t not in ("T", "F")]
        labels.append(extra[0] if extra and not extra[0].startswith(("!", "#")) else None)

    if len(scale) == 3:
        lattice = lattice * np.asarray(scale)[None, :]
        factor = 1.0
    elif scale[0] < 0:
        vol = float(np.linalg.det(lattice))
        if abs(vol) < 1e-12:
            raise StructureError("lattice vectors are linearly dependent (zero volume); check lines 3-5")
        factor = (-scale[0] / abs(vol)) ** (1 / 3)
        lattice = lattice * factor
    else:
        if scale[0] == 0:
            raise StructureError("line 2: scale factor is 0; use 1.0 (or minus the cell volume in Å^3)")
        factor = scale[0]
        lattice = lattice * factor

    if mode == "d":
        frac = pos
    else:
        if abs(np.linalg.det(lattice)) < 1e-12:
            raise StructureError("lattice vectors are linearly dependent (zero volume); check lines 3-5")
        cart = pos * factor if len(scale) == 1 else pos * np.asarray(scale)[None, :]
        frac = cart @ np.linalg.inv(lattice)
    species_all = [s for s, c in zip(symbols, counts, strict=True) for _ in range(c)]
    if any(lab is None for lab in labels) or len(set(labels)) != n:
        labels = None
    return Crystal(lattice, frac, species_all, labels, min_distance_A=min_distance_A)


def write(crystal: Crystal, path: Path, *, title: str | None = None) -> None:
    """Write ``crystal`` as a POSCAR with an element line and Direct coordinates (labels as trailing words)."""
    order = sorted(range(crystal.n_atoms), key=lambda k: (list(dict.fromkeys(crystal.species)).index(
        crystal.species[k]), k))
    symbols = list(dict.fromkeys(crystal.species))
    counts = [crystal.species.count(s) for s in symbols]
    head = (title or f"{crystal.formula} written by screener").replace("\n", " ")
    lines = [head, "1.0"]
    lines += ["  " + " ".join(f"{x:20.14f}" for x in row) for row in crystal.lattice_A]
    lines += ["  " + " ".join(f"{s:>4}" for s in symbols), "  " + " ".join(f"{c:>4}" for c in counts), "Direct"]
    for k in order:
        label = "".join(crystal.labels[k].split()) or crystal.species[k]
        lines.append("  " + " ".join(f"{x:18.14f}" for x in crystal.frac[k]) + f"  {label}")
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


# ------------------------------------------------------------------------------------------------ helpers
def _lines(path: Path) -> list[str]:
    data = Path(path).read_bytes()
    if not data.strip():
        raise FormatError("file is empty; expected a POSCAR (title, scale, 3 lattice vectors, elements, counts, "
                          "positions)")
    if b"\x00" in data:
        raise FormatError("file contains binary data (NUL bytes), not POSCAR text")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise FormatError(f"file is not UTF-8 text (byte {exc.start}); expected a plain-text POSCAR") from None
    return text.splitlines()


class _Lines:
    """Walks the lines of the file, remembering the line number for messages."""

    def __init__(self, lines: list[str]):
        self.lines = lines
        self.k = 0

    def next(self, what: str) -> tuple[int, list[str]]:
        if self.k >= len(self.lines):
            raise FormatError(f"file ends after line {len(self.lines)} where the {what} was expected (truncated?)")
        self.k += 1
        tokens = self.lines[self.k - 1].split()
        if not tokens and what != "title":
            raise FormatError(f"line {self.k}: empty line where the {what} was expected")
        return self.k, tokens

    def numbers(self, what: str, sizes: tuple[int, ...]) -> list[float]:
        line_no, tokens = self.next(what)
        # take the longest allowed count of leading numbers (comments may follow)
        for size in sorted(sizes, reverse=True):
            if len(tokens) >= size and all(_is_float(t) for t in tokens[:size]):
                return _floats(tokens[:size], line_no, what)
        expected = " or ".join(str(s) for s in sizes)
        raise FormatError(f"line {line_no}: expected {expected} number(s) for the {what}, got {_show(tokens)}")


def _floats(tokens: list[str], line_no: int, what: str) -> list[float]:
    if len(tokens) < 3 and what.startswith("position"):
        raise FormatError(f"line {line_no}: expected three coordinates for the {what}, got {_show(tokens)}")
    try:
        values = [float(t) for t in tokens]
    except ValueError:
        raise FormatError(f"line {line_no}: expected numbers for the {what}, got {_show(tokens)}") from None
    if not all(np.isfinite(values)):
        raise StructureError(f"line {line_no}: the {what} contains a non-finite number: {_show(tokens)}")
    return values


def _is_int(t: str) -> bool:
    try:
        int(t)
    except ValueError:
        return False
    return True


def _is_float(t: str) -> bool:
    try:
        float(t)
    except ValueError:
        return False
    return True


def _show(tokens: list[str], limit: int = 60) -> str:
    """The offending line for a message, quoted and cut short."""
    text = " ".join(tokens)
    return repr(text if len(text) <= limit else text[: limit - 3] + "...")
