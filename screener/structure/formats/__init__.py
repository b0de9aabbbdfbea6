"""Structure file formats: one module per format, registered in ``FORMATS`` and imported only when used."""

from __future__ import annotations

import importlib
import re
from pathlib import Path

from screener.errors import FormatError, ScreenerError, StructureError
from screener.structure.crystal import Crystal

#: format name -> (module under screener.structure.formats, file name endings that select it)
FORMATS: dict[str, tuple[str, tuple[str, ...]]] = {
    "cif": ("cif", (".cif", ".mmcif")),
    "json": ("json_format", (".json",)),
}


def guess_format(path: str | Path, sniff: bool = True) -> str:
    """Format name from the file name ending, else from the content.

    Content rules, used only when the name says nothing and ``sniff`` is true and the file exists: a JSON object
    (first character ``{``) is json; a ``data_`` line or a ``_cell_length`` tag is cif. Other text, binary files
    and, without sniffing, unknown names raise FormatError.
    """
    name = Path(path).name.lower()
    for fmt, (_, endings) in FORMATS.items():
        if name.endswith(endings):
            return fmt
    hint = (f"use one of the endings {', '.join(e for _, es in FORMATS.values() for e in es)} "
            f"or pass --format {{{','.join(FORMATS)}}}")
    if not sniff or not Path(path).is_file():
        raise FormatError(f"{path}: cannot tell the file format from the name; {hint}")
    with open(path, "rb") as fh:
        head = fh.read(4096)
    if b"\x00" in head or not head.strip():
        what = "is empty" if not head.strip() else "holds binary data"
        raise FormatError(f"{path}: unrecognised format: the file {what}; expected CIF or screener JSON text")
    text = head.decode("utf-8", errors="replace")
    if text.lstrip().startswith("{"):
        return "json"
    if re.search(r"^\s*data_", text, flags=re.MULTILINE) or "_cell_length" in text:
        return "cif"
    raise FormatError(
        f"{path}: unrecognised format: neither CIF (no data_ line or _cell_length tag in the first 4096 bytes) "
        f"nor screener JSON (does not start with '{{'); {hint}"
    )


def _module(fmt: str):
    if fmt not in FORMATS:
        raise FormatError(f"unknown format {fmt!r}; choose one of {', '.join(FORMATS)}")
    return importlib.import_module(f".{FORMATS[fmt][0]}", __name__)


def read_structure(path: str | Path, format: str | None = None, max_atoms: int | None = None,
                   **options) -> Crystal:
    """Read one structure file into a Crystal. Errors name the file.

    ``max_atoms`` (default ``cif.MAX_ATOMS``) bounds the atoms of the cell, after symmetry expansion for CIF.
    """
    from screener.structure.formats.cif import MAX_ATOMS

    path = Path(path)
    if not path.is_file():
        raise FormatError(f"{path}: no such file" + (" (it is a folder)" if path.is_dir() else ""))
    fmt = format or guess_format(path)
    limit = MAX_ATOMS if max_atoms is None else int(max_atoms)
    try:
        if fmt == "cif":
            options["max_atoms"] = limit
        crystal = _module(fmt).read(path, **options)
        if crystal.n_atoms > limit:
            raise StructureError(f"the cell holds {crystal.n_atoms} atoms, more than the limit of {limit}; raise it "
                                 "with --max-atoms if this is intended")
        return crystal
    except ScreenerError as exc:
        msg = str(exc)
        if msg.startswith(str(path)):
            msg = msg[len(str(path)):].lstrip(": ")
        raise type(exc)(f"{path}: {msg}") from exc
    except (UnicodeDecodeError, OSError) as exc:
        # readers decode and open files themselves; this is the net for what they did not foresee
        raise FormatError(f"{path}: cannot read the file as {fmt}: {exc}") from exc
    except RecursionError as exc:
        raise FormatError(f"{path}: the {fmt} content is nested too deeply to be a structure") from exc
    except (ValueError, OverflowError, ArithmeticError, IndexError, KeyError, TypeError, AttributeError) as exc:
        # a malformed file that slipped past the reader's own checks: still one clear line naming the file
        reason = str(exc).splitlines()[0][:200] if str(exc) else type(exc).__name__
        raise FormatError(f"{path}: could not be read as {fmt}: {reason}") from exc


def write_structure(crystal: Crystal, path: str | Path, format: str | None = None, **options) -> None:
    """Write a Crystal to ``path`` in the given (or guessed) format."""
    fmt = format or guess_format(path, sniff=False)
    _module(fmt).write(crystal, Path(path), **options)
