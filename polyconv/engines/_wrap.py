"""Products a little longer than a power of two: one cyclic transform of that power of two and a
short product of the top ends, instead of a transform twice as long.

For a product ``c = a b`` of length ``L = m + r`` (``n1, n2 <= m``, ``0 < r < m``), a cyclic
product of length ``m`` (an ``m``-point NTT product of the zero-padded operands) gives
``c[t] + c[m + t]`` for ``t < r`` and ``c[t]`` above.  The coefficients ``c[m + t]`` only
involve ``a[i]`` with ``i >= m - n2 + 1`` and ``b[j]`` with ``j >= m - n1 + 1``, the top ``r``
entries of each: with ``a' = a[m - n2 + 1:]``, ``b' = b[m - n1 + 1:]`` (both of length ``r``),
``c[m + t] = (a' b')[t + r - 1]``, and subtracting it unwraps the cyclic product (common
practice, no source; the "wrap-around" view of the cyclic convolution theorem).  With
``r <= m / 8`` the short product has at most ``m / 4`` points, so the cost is about
``t(m) + t(m / 4)`` against ``t(2m)``.  Measured with the compiled NTT modulo 998244353 (busy
machine, best of 7): time / the ``2m``-point product 0.85 at ``m = 2^12``, ``r <= 256``; 0.61
(``r = 1``) and 0.75 (``r = m / 16``) at ``2^14``; 0.33-0.39 at ``2^16``; 0.51-0.59 at
``2^18``; at ``r = m / 4`` only 0.7-1.2, hence ``m / 8``.
"""

from __future__ import annotations

import numpy as np

#: The cyclic route is taken for ``r <= m / WRAP_FRACTION``.
WRAP_FRACTION = 8
#: ... and for ``m`` at least this long (below, the extra Python calls cost more than they save).
WRAP_MIN = 2**12


def wrap_length(n1: int, n2: int, n: int) -> int:
    """``m = n / 2`` when the product of lengths ``n1``, ``n2`` (power-of-two transform length
    ``n``) takes the cyclic route, else 0."""
    m = n // 2
    r = n1 + n2 - 1 - m
    if m < WRAP_MIN or not 0 < r <= m // WRAP_FRACTION or n1 > m or n2 > m:
        return 0
    return m


def tops(a: np.ndarray, b: np.ndarray, m: int) -> tuple[np.ndarray, np.ndarray]:
    """The top ends ``a[m - n2 + 1:]``, ``b[m - n1 + 1:]`` along the last axis (views; the
    same view twice for a square)."""
    n1, n2 = a.shape[-1], b.shape[-1]
    top_a = a[..., m - n2 + 1:]
    return top_a, (top_a if b is a else b[..., m - n1 + 1:])


def unwrap(cyclic: np.ndarray, top: np.ndarray, moduli: np.ndarray, count: int,
           out: np.ndarray | None = None) -> np.ndarray:
    """Rows ``c[:count]`` from the cyclic rows (``(k, m)``, residues) and the top-end products
    (``(k, 2r - 1)``) modulo ``moduli`` (``(k,)`` int64)."""
    m = cyclic.shape[1]
    r = (top.shape[1] + 1) // 2
    high = top[:, r - 1:]
    res = np.empty((cyclic.shape[0], count), dtype=np.int64) if out is None else out
    low = min(count, m)
    res[:, :low] = cyclic[:, :low]
    w = min(r, count)
    wrapped = res[:, :w]
    np.subtract(wrapped, high[:, :w], out=wrapped)
    wrapped += np.where(wrapped < 0, moduli[:, None], 0)
    if count > m:
        res[:, m:count] = high[:, :count - m]
    return res
