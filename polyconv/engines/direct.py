"""Direct (schoolbook) convolution.

``c[k] = sum_i a[i] b[k - i]``: O(n1 n2) operations, no rounding beyond that of the sums, and the
fastest choice for short operands (numpy.convolve is a tight C loop).
"""

from __future__ import annotations

import numpy as np

from ._common import FLOAT_KINDS, LARGE_ARRAY, Engine, Job, Option


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


# ----------------------------------------------------------------------------- registry record
#
# Cost (constants from the cost table): 1-D ``t = c0 + c_mac n1 n2 + c_out (n1 + n2)``;
# batched ``t = c0 + m (c_step + c_elem B n)`` (``m`` shift-and-add passes over ``B n``); arrays of
# ``LARGE_ARRAY`` entries and more use a per-output constant fitted on large arrays.


def predict_direct(costs: dict, n1: int, n2: int, batch: int, mac_factor: float = 1.0) -> float:
    """Seconds for the direct engine (``mac_factor``: cost of one multiply-add relative to real
    float64, about 3.3 for complex, measured here)."""
    if batch == 1:
        c = costs["direct"]
        per_output = c["per_output_large"] if n1 + n2 >= LARGE_ARRAY else c["per_output"]
        return c["overhead"] + mac_factor * (c["per_mac"] * n1 * n2 + per_output * (n1 + n2))
    c = costs["direct_batch"]
    return c["overhead"] + min(n1, n2) * (
        c["per_step"] + mac_factor * c["per_element"] * batch * max(n1, n2))


#: Cost of one complex multiply-add relative to a real float64 one (measured here).
COMPLEX_MAC_FACTOR = 3.3


def option(job: Job) -> Option:
    """The direct engine's offer: always possible."""
    factor = COMPLEX_MAC_FACTOR if job.kind == "complex" else 1.0
    return Option(predict_direct(job.costs, job.n1, job.n2, job.rows, factor))


def run_planned(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    """The full product (``keep`` is read by the shaping stage)."""
    return convolve_direct(a, b)


ENGINE = Engine("direct", FLOAT_KINDS, option, run_planned, nonfinite_safe=True)
