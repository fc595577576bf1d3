"""polyconv: fast, exact convolution of sequences, polynomials and distributions.

Public names only; see README.md for a tour and DEVELOPERS.md for the module map.
"""

from . import dist
from .algebra import ZeroDivisorError, inverse_series, poly_divmod, power, product
from .api import convolve, error_bound, plan
from .dask_backend import convolve_dask, exact_product_dask
from .planning import Plan
from .streaming import convolve_chunks, convolve_file

__all__ = ["convolve", "plan", "error_bound", "Plan", "dist", "convolve_file", "convolve_chunks",
           "convolve_dask", "exact_product_dask", "power", "product", "inverse_series",
           "poly_divmod", "ZeroDivisorError"]
__version__ = "0.1.0"
