"""screener: screen candidate crystal phases for Peierls-type bond-alternation instabilities."""

from screener.errors import (
    ConvergenceError,
    FormatError,
    ParameterError,
    ScreenerError,
    StructureError,
    SymmetryError,
)
from screener.structure.crystal import Crystal
from screener.structure.formats import read_structure, write_structure
from screener.tb.model import build_model
from screener.tb.param_file import load_parameters
from screener.tb.params import default_parameters

__version__ = "0.1.0"

__all__ = [
    "Crystal",
    "ConvergenceError",
    "FormatError",
    "ParameterError",
    "ScreenerError",
    "StructureError",
    "SymmetryError",
    "build_model",
    "default_parameters",
    "load_parameters",
    "read_structure",
    "write_structure",
]
