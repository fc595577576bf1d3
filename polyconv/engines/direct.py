"""Direct (schoolbook) convolution.

``c[k] = sum_i a[i] b[k - i]``: O(n1 n2) operations, no rounding beyond that of the sums, and the
fastest choice for short operands (numpy.convolve is a tight C loop).
"""

from __future__ import annotations

import numpy as np


def convolve_direct(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Full convolution along the last axis by direct summation.

    Parameters
    ----------
    a, b : numpy.ndarray
        Arrays of a common numeric dtype (or object dtype), convolution axis last; leading axes
        broadcast.

    Returns
    -------
    numpy.ndarray
        Shape ``batch + (n1 + n2 - 1,)``.

    Notes
    -----
    1-D pairs go straight to :func:`numpy.convolve`.  Batches are summed by shifting: the shorter
    operand's ``m`` coefficients each scale-and-add the longer operand once, so the Python loop has
    ``m`` iterations whatever the batch size.
    """
    if a.ndim == 1 and b.ndim == 1:
        return np.convolve(a, b)
    n1, n2 = a.shape[-1], b.shape[-1]
    if n2 > n1:
        a, b, n1, n2 = b, a, n2, n1
    batch = np.broadcast_shapes(a.shape[:-1], b.shape[:-1])
    dtype = np.result_type(a, b)
    out = np.zeros(batch + (n1 + n2 - 1,), dtype=dtype)
    for j in range(n2):
        out[..., j:j + n1] += a * b[..., j:j + 1]
    return out
