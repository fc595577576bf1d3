"""What the Dask back ends share: loading dask on first use, recognising dask arrays, checking a
dask operand and the eager pass that classifies it and finds ``max |x_i|`` (one reduction over
the blocks).

Dask is imported only inside these functions, so polyconv works without it.
"""

from __future__ import annotations

import math
import sys

import numpy as np

from ..pipeline.inputs import check_vector_shape, combine_kinds, kind_of
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


def _block_summary(x: np.ndarray, name: str) -> np.ndarray:
    """``[kind, max |x_i|]`` of one block: kind from the dtype or, for object blocks, from the
    entries (None for an empty block); the maximum over integer blocks only (0 otherwise)."""
    kind = kind_of(x, name) if x.size else None
    top = max_abs(x) if kind in ("integer", "bigint") else 0
    return np.array([kind, top], dtype=object)


def dask_summary(x, name: str) -> tuple[str, int]:
    """``(kind, max |x_i|)`` of a dask array in one eager reduction pass over its blocks.

    The kind is that of :func:`polyconv.pipeline.inputs.kind_of`, combined over the blocks: an
    object dask array of Python floats is ``"real"`` (its entries decide, never its dtype
    alone).  ``max |x_i|`` is a Python int over integer data (0 when the data are not all
    integers).  A non-number entry raises TypeError naming ``name``.
    """
    per_block = x.map_blocks(_block_summary, name, chunks=((2,) * x.numblocks[0],),
                             dtype=object, meta=np.empty((0,), dtype=object)).compute()
    kinds = [k for k in per_block[0::2] if k is not None]
    kind = kinds[0] if kinds else "integer"
    for other in kinds[1:]:
        kind = combine_kinds(kind, other)
    top = max((int(v) for v in per_block[1::2]), default=0)
    return kind, top if kind in ("integer", "bigint") else 0
