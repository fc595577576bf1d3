"""polyconv: fast, exact convolution of sequences, polynomials and distributions.

Public names only; see README.md for a tour and DEVELOPERS.md for the module map.
"""

from .algebra import ZeroDivisorError, inverse_series, poly_divmod, power, product
from .api import convolve, error_bound, plan
from .dask_backend import convolve_dask, exact_product_dask
from .planning import Plan
from .streaming import convolve_chunks, convolve_file

__all__ = ["convolve", "plan", "error_bound", "Plan", "dist", "convolve_file", "convolve_chunks",
           "convolve_dask", "exact_product_dask", "power", "product", "inverse_series",
           "poly_divmod", "ZeroDivisorError"]
__version__ = "0.1.0"


def __getattr__(name: str):
    """Load :mod:`polyconv.dist` (and with it scipy.stats) on first use, not at import.

    A user who only multiplies sequences should not pay for scipy.stats (about a second cold).
    """
    if name == "dist":
        import importlib

        module = importlib.import_module(".dist", __name__)
        globals()["dist"] = module
        return module
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

