"""Numerical settings of a screen (one frozen object, validated at construction)."""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from screener.errors import ParameterError
from screener.structure.symmetry import SYMPREC_A

#: Elastic closures offered (see screener.screen.closure).
CLOSURES = ("bulk-modulus", "equilibrium")


@dataclass(frozen=True)
class ScreenSettings:
    """Numerical settings of a screen; every field has a sensible default."""

    k_step_per_A: float = 0.2
    """Starting step between k-points along each reciprocal vector, Å⁻¹ (2π included)."""
    convergence_meV_per_atom: float = 0.5
    """ΔE at the optimum is converged when a finer mesh changes it by less than this, meV/atom."""
    max_refinements: int = 6
    """Mesh refinements tried before a candidate is flagged unconverged."""
    max_kpoints: int = 150_000
    """Largest full k-mesh (points) a refinement may use; beyond it the candidate is flagged unconverged."""
    max_supercell_atoms: int = 64
    """Largest supercell (atoms) a requested extra wave-vector (--q) may need; a larger one is refused before any
    work. Diagonalisation costs grow as atoms³ per k-point (`screener bands` on a 500-atom cell ran over 5 minutes
    and 2 GB on a 2-core machine); the default 64 is common practice, no source."""
    refine_factor: float = 0.7
    """Each refinement multiplies the k-step by this factor."""
    max_amplitude_fraction: float = 0.12
    """Largest amplitude of the first scan, as a fraction of the parent's shortest bond."""
    amplitude_limit_fraction: float = 0.25
    """Hard limit of the scan when the energy keeps falling, as a fraction of the shortest bond."""
    n_scan: int = 7
    """Amplitudes in the coarse scan (λ = 0 excluded)."""
    method: str = "tetrahedron"
    """Brillouin-zone integration method (see screener.bz.integrate)."""
    width_eV: float = 0.05
    """Smearing width for smearing methods, eV."""
    pair_exponent: float = 4.0
    """Exponent m of the pair repulsion A (d0/d)^m."""
    bulk_modulus_GPa: float | None = None
    """The parent's bulk modulus, GPa (default: the bundled table of measured values, else a published estimate)."""
    closure: str = "bulk-modulus"
    """'bulk-modulus': repulsion fitted to equilibrium and the bulk modulus (exponent m from B); 'equilibrium':
    the older fit to equilibrium alone with the fixed exponent ``pair_exponent``."""
    threshold_meV_per_atom: float = 1.0
    """A converged gain beyond this is 'unstable'; smaller gains are 'marginal'."""
    stable_tolerance_meV_per_atom: float = 0.01
    """Gains smaller than this count as no gain ('stable')."""
    symprec_A: float = SYMPREC_A
    """Symmetry tolerance, Å."""

    def __post_init__(self):
        from dataclasses import fields

        for f in fields(self):
            v = getattr(self, f.name)
            if f.name == "max_supercell_atoms":
                continue  # its own check below (a whole number)
            if isinstance(v, bool) or not isinstance(v, numbers.Real):
                if f.name in ("method", "closure") or (f.name == "bulk_modulus_GPa" and v is None):
                    continue
                raise ParameterError(f"{f.name} must be a number, got {v!r}")
            if not math.isfinite(v):
                raise ParameterError(f"{f.name} must be a finite number, got {v!r}")
        for name in ("k_step_per_A", "convergence_meV_per_atom", "max_amplitude_fraction", "threshold_meV_per_atom",
                     "width_eV", "pair_exponent", "symprec_A", "max_kpoints"):
            v = getattr(self, name)
            if not v > 0:
                raise ParameterError(f"{name} must be a positive number, got {v!r}")
        if self.bulk_modulus_GPa is not None and not self.bulk_modulus_GPa > 0:
            raise ParameterError(f"bulk_modulus_GPa must be a positive number of GPa, got {self.bulk_modulus_GPa!r}")
        if self.stable_tolerance_meV_per_atom < 0 or self.max_refinements < 0:
            raise ParameterError("stable_tolerance_meV_per_atom and max_refinements must not be negative")
        if self.amplitude_limit_fraction < self.max_amplitude_fraction:
            raise ParameterError(f"amplitude_limit_fraction ({self.amplitude_limit_fraction!r}) must not be below "
                                 f"max_amplitude_fraction ({self.max_amplitude_fraction!r})")
        if self.closure not in CLOSURES:
            raise ParameterError(f"closure must be one of {', '.join(CLOSURES)}, got {self.closure!r}")
        if not 0 < self.refine_factor < 1:
            raise ParameterError(f"refine_factor must lie between 0 and 1, got {self.refine_factor!r}")
        v = self.max_supercell_atoms
        if isinstance(v, bool) or not isinstance(v, numbers.Real) or not (math.isfinite(v) and v >= 1 and v == int(v)):
            raise ParameterError(f"max_supercell_atoms must be a positive whole number, got {v!r}")
        if int(self.n_scan) < 3:
            raise ParameterError(f"n_scan must be at least 3, got {self.n_scan!r}")
