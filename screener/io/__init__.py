"""Structure file formats: one module per format, registered in ``FORMATS`` and imported only when used."""

from __future__ import annotations

import importlib
from pathlib import Path

from ..errors import FormatError, ScreenerError
from ..structure import Crystal

#: format name -> (module under screener.io, file name endings that select it)
FORMATS: dict[str, tuple[str, tuple[str, ...]]] = {
    "cif": ("cif", (".cif", ".mmcif")),
    "poscar": ("poscar", (".vasp", ".poscar", "poscar", "contcar")),
    "json": ("json_format", (".json",)),
}


def guess_format(path: str | Path) -> str:
    """Format name from a file name (extension, or the names POSCAR/CONTCAR), else FormatError."""
    name = Path(path).name.lower()
    for fmt, (_, endings) in FORMATS.items():
        if any(name.endswith(e) or name.startswith(e.lstrip(".")) and not e.startswith(".") for e in endings):
            return fmt
    raise FormatError(
        f"{path}: cannot tell the file format from the name; use one of the endings "
        f"{', '.join(e for _, es in FORMATS.values() for e in es)} or pass --format {{{','.join(FORMATS)}}}"
    )


def _module(fmt: str):
    if fmt not in FORMATS:
        raise FormatError(f"unknown format {fmt!r}; choose one of {', '.join(FORMATS)}")
    return importlib.import_module(f".{FORMATS[fmt][0]}", __name__)


def read_structure(path: str | Path, format: str | None = None, **options) -> Crystal:
    """Read one structure file into a Crystal. Errors name the file."""
    path = Path(path)
    fmt = format or guess_format(path)
    if not path.is_file():
        raise FormatError(f"{path}: no such file")
    try:
        return _module(fmt).read(path, **options)
    except ScreenerError as exc:
        msg = str(exc)
        if not msg.startswith(str(path)):
            msg = f"{path}: {msg}"
        raise type(exc)(msg) from exc


def write_structure(crystal: Crystal, path: str | Path, format: str | None = None, **options) -> None:
    """Write a Crystal to ``path`` in the given (or guessed) format."""
    fmt = format or guess_format(path)
    _module(fmt).write(crystal, Path(path), **options)
