"""What the Dask back ends share: loading dask on first use, recognising dask arrays, checking a
dask operand and the eager ``max |x_i|`` pass (one reduction over the blocks).

Dask is imported only inside these functions, so polyconv works without it.
"""

from __future__ import annotations

import math
import sys

import numpy as np

from ..pipeline.inputs import check_vector_shape
from .overlap import max_abs

_INSTALL_HINT = "polyconv's Dask back end needs the optional extra: pip install 'polyconv[dask]'"


def dask_array_module():
    """``dask.array``, or ImportError with the install hint."""
    try:
        import dask.array as da
    except ImportError:  # pragma: no cover - depends on the environment
        raise ImportError(_INSTALL_HINT) from None
    return da


def is_dask_array(x) -> bool:
    """True when ``x`` is a dask array; never imports dask (no dask loaded: no dask array)."""
    da = sys.modules.get("dask.array")
    return da is not None and isinstance(x, da.Array)


# ----------------------------------------------------------------------------- operands

def check_dask_vector(x, name: str) -> None:
    """Refuse, naming ``name``, a dask array that is not 1-D, is empty or has unknown chunk
    sizes (the block offsets must be known before the graph is built)."""
    check_vector_shape(x, name, what="a dask array of numbers")
    if math.isnan(x.shape[0]):
        raise ValueError(f"{name} has unknown chunk sizes; call {name}.compute_chunk_sizes() "
                         "first")


def _block_max_abs(x: np.ndarray) -> np.ndarray:
    return np.array([max_abs(x)], dtype=object)


def dask_max_abs(x, da) -> int:
    """``max |x_i|`` of a dask array as a Python int (one reduction pass)."""
    per_block = x.map_blocks(_block_max_abs, chunks=((1,) * x.numblocks[0],), dtype=object)
    return max(int(v) for v in per_block.compute())
