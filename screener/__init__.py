"""screener: screen candidate crystal phases for Peierls-type bond-alternation instabilities.

The public names are imported on first use, so ``screener --help`` does not load the numerical stack.
"""

from screener.errors import (
    ConvergenceError,
    FormatError,
    ParameterError,
    ScreenerError,
    StructureError,
    SymmetryError,
)

__version__ = "0.1.0"

#: public name -> module that defines it
_LAZY = {
    "Crystal": "screener.structure.crystal",
    "read_structure": "screener.structure.formats",
    "write_structure": "screener.structure.formats",
    "build_model": "screener.tb.model",
    "load_parameters": "screener.tb.param_file",
    "default_parameters": "screener.tb.params",
    "rank": "screener.screen.rank",
    "batch": "screener.run.batch",
    "load_store": "screener.run.store",
}

__all__ = [
    "Crystal",
    "ConvergenceError",
    "FormatError",
    "ParameterError",
    "ScreenerError",
    "StructureError",
    "SymmetryError",
    "batch",
    "build_model",
    "default_parameters",
    "load_parameters",
    "load_store",
    "rank",
    "read_structure",
    "write_structure",
]


def __getattr__(name):
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'screener' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
