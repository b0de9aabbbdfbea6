"""screener: screen candidate crystal phases for Peierls-type bond-alternation instabilities."""

from .errors import ConvergenceError, FormatError, ParameterError, ScreenerError, StructureError, SymmetryError
from .io import read_structure, write_structure
from .structure import Crystal

__version__ = "0.1.0"

__all__ = [
    "Crystal",
    "ConvergenceError",
    "FormatError",
    "ParameterError",
    "ScreenerError",
    "StructureError",
    "SymmetryError",
    "read_structure",
    "write_structure",
]
