"""Error types. Each subclass also inherits the matching built-in so callers may catch either."""


class ScreenerError(Exception):
    """Base class of every error screener raises on purpose (bad input, bad parameters, no convergence)."""


class StructureError(ScreenerError, ValueError):
    """A structure is malformed or physically impossible (cell, positions, elements, occupancy)."""


class FormatError(StructureError):
    """A structure file cannot be parsed, or its format is not recognised."""


class ParameterError(ScreenerError, ValueError):
    """A tight-binding parameter, option or parameter file is invalid."""


class SymmetryError(ScreenerError, RuntimeError):
    """The symmetry search could not determine the symmetry of a structure (space group, primitive cell, k-mesh)."""


class ConvergenceError(ScreenerError, RuntimeError):
    """A numerical procedure (Fermi level, k-mesh refinement, minimisation) did not converge."""


class ScreenerWarning(UserWarning):
    """Something in the input was accepted but is probably not what the user meant (unused section, fallback)."""


class StructureWarning(ScreenerWarning):
    """A structure file was read, but perhaps not as its author meant (listed sites merged, an origin choice
    assumed, contacts far shorter than bonds, symmetry missing or inconsistent). ``kind`` names the case and
    ``details`` carries its numbers; the CLI's ``--strict`` turns these into errors."""

    def __init__(self, message: str, kind: str = "structure", **details):
        super().__init__(message)
        self.kind = kind
        self.details = details
