"""screener: screen candidate crystal phases for Peierls-type bond-alternation instabilities."""

from .errors import ConvergenceError, FormatError, ParameterError, ScreenerError, StructureError, SymmetryError
from .io import read_structure, write_structure
from .model import build_model
from .params import default_parameters, load_parameters
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
    "build_model",
    "default_parameters",
    "load_parameters",
    "read_structure",
    "write_structure",
]
