"""Convolution at scale: signals longer than memory, and products spread over processes.

Modules: :mod:`.blocks` (block products: checked once, one plan per block shape),
:mod:`.overlap` (overlap-add state and the exact-sum policy of block products),
:mod:`.streaming` (:func:`convolve_chunks`, :func:`convolve_file`), :mod:`.npyio` (the ``.npy``
block reader and the atomic ``.npy`` writer), :mod:`.dask` (:func:`convolve_dask`, lazy
overlap-add), :mod:`.dask_exact` (:func:`exact_product_dask`, block products as tasks) and
:mod:`.dask_common` (what both share); dask is imported only when one of them is called.
"""

from __future__ import annotations

from .dask import convolve_dask, exact_product_dask
from .npyio import SourceChangedError
from .streaming import convolve_chunks, convolve_file

__all__ = ["convolve_chunks", "convolve_file", "convolve_dask", "exact_product_dask",
           "SourceChangedError"]
