"""Exact schoolbook convolution of integers.

``c[k] = sum_i a[i] b[k - i]`` in exact integer arithmetic: numpy int64 when the a-priori bound
``|c[k]| <= min(n1, n2) max|a| max|b|`` is below ``2**63`` (so no partial sum can overflow), Python
integers otherwise.  With a modulus the operands are reduced first and every output last.
"""

from __future__ import annotations

import numpy as np

from .direct import convolve_direct

INT64_LIMIT = 2**63


def max_abs(x: np.ndarray) -> int:
    """Largest ``|x[i]|`` as a Python int (no overflow at the int64 minimum)."""
    if x.size == 0:
        return 0
    if x.dtype.kind in "iub":
        return max(abs(int(x.max())), abs(int(x.min())))
    return max(abs(int(v)) for v in x.ravel())


def as_python_ints(x: np.ndarray) -> np.ndarray:
    """An object array of Python ints with ``x``'s values (bool, numpy ints, mpz...)."""
    if x.dtype.kind == "b":
        x = x.astype(np.int64)
    if x.dtype.kind in "iu":
        return x.astype(object)
    out = np.empty(x.shape, dtype=object)
    out.ravel()[:] = [int(v) for v in x.ravel()]
    return out


def convolve_exact_direct(a: np.ndarray, b: np.ndarray, modulus: int | None = None,
                          keep: int | None = None) -> np.ndarray:
    """Exact full convolution along the last axis (first ``keep`` entries if given).

    Returns int64 when the product (or the modulus) provably fits, else an object array.
    """
    if modulus is not None:
        a = np.mod(as_python_ints(a), modulus)
        b = np.mod(as_python_ints(b), modulus)
    n1, n2 = a.shape[-1], b.shape[-1]
    bound = min(n1, n2) * max_abs(a) * max_abs(b)
    if bound < INT64_LIMIT:
        out = convolve_direct(a.astype(np.int64), b.astype(np.int64))
    else:
        out = convolve_direct(as_python_ints(a), as_python_ints(b))
    if keep is not None:
        out = out[..., :keep]
    if modulus is not None:
        out = np.mod(out, modulus)
        out = out.astype(np.int64) if modulus <= INT64_LIMIT else out
    return out
