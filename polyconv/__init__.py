"""polyconv: fast, exact convolution of sequences, polynomials and distributions.

Public names only; see README.md for a tour and DEVELOPERS.md for the module map.
"""

from . import dist
from .api import convolve, error_bound, plan
from .planning import Plan

__all__ = ["convolve", "plan", "error_bound", "Plan", "dist"]
__version__ = "0.1.0"
