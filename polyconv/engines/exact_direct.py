"""Exact schoolbook convolution of integers.

``c[k] = sum_i a[i] b[k - i]`` in exact integer arithmetic: numpy int64 when the a-priori bound
``|c[k]| <= min(n1, n2) max|a| max|b|`` is below ``2**63`` (so no partial sum can overflow), Python
integers otherwise.  O(n1 n2): the right choice only for short operands.
"""

from __future__ import annotations

import numpy as np

from . import _intpack
from .direct import convolve_direct

INT64_LIMIT = 2**63


def convolve_exact_direct(a: np.ndarray, b: np.ndarray, keep: int | None = None) -> np.ndarray:
    """Exact full product of two 1-D integer rows (first ``keep`` entries if given).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D int64, uint64 or object (Python ints, gmpy2.mpz) arrays.
    keep : int, optional
        Return only the first ``keep`` coefficients.

    Returns
    -------
    numpy.ndarray
        int64 when the bound proves the product fits, else an object array of Python ints.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    max_a, max_b = _intpack.max_abs(a), _intpack.max_abs(b)
    bound = min(a.shape[0], b.shape[0]) * max_a * max_b
    if bound < INT64_LIMIT and max(max_a, max_b) < INT64_LIMIT:
        out = convolve_direct(a.astype(np.int64), b.astype(np.int64))
    else:
        out = convolve_direct(_intpack.to_objects(a), _intpack.to_objects(b))
    return out if keep is None else out[:keep]
