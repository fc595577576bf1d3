"""polyconv: fast, exact convolution of sequences, polynomials and distributions.

Public names only; see README.md for a tour and DEVELOPERS.md for the module map.  Names are
imported on first use (PEP 562 ``__getattr__``), so ``import polyconv`` and the command line start
without loading numpy and scipy until they are needed (the CLI handles Ctrl-C from then on).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

_WHERE = {
    "convolve": "api", "plan": "api", "error_bound": "api", "Plan": "planning",
    "convolve_file": "scale.streaming", "convolve_chunks": "scale.streaming",
    "convolve_dask": "scale.dask", "exact_product_dask": "scale.dask",
    "power": "algebra", "product": "algebra", "inverse_series": "algebra",
    "poly_divmod": "algebra", "ZeroDivisorError": "algebra",
}

__all__ = ["convolve", "plan", "error_bound", "Plan", "dist", "convolve_file", "convolve_chunks",
           "convolve_dask", "exact_product_dask", "power", "product", "inverse_series",
           "poly_divmod", "ZeroDivisorError"]
__version__ = "0.1.0"

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors
    from . import dist
    from .algebra import ZeroDivisorError, inverse_series, poly_divmod, power, product
    from .api import convolve, error_bound, plan
    from .planning import Plan
    from .scale.dask import convolve_dask, exact_product_dask
    from .scale.streaming import convolve_chunks, convolve_file


def __getattr__(name: str):
    """A public name (or a sub-module such as ``polyconv.dist``), imported on first use."""
    if name in _WHERE:
        value = getattr(importlib.import_module(f"{__name__}.{_WHERE[name]}"), name)
    elif not name.startswith("__"):
        try:
            value = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"{__name__}.{name}":
                raise
            raise AttributeError(f"module {__name__!r} has no attribute {name!r}") from None
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
