"""polyconv: fast, exact convolution of sequences, polynomials and distributions.

Public names only; see README.md for a tour and DEVELOPERS.md for the module map.
"""

from .api import convolve, plan
from .planning import Plan

__all__ = ["convolve", "plan", "Plan"]
__version__ = "0.1.0"
