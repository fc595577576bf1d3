"""Integer limits, one definition each, and the one comparison convention.

Convention: a *magnitude* bound ``B`` (``|c| <= B``) fits a signed 64-bit integer when
``B < INT64_LIMIT``; residues modulo ``m`` (``0 <= r <= m - 1``) fit when ``m <= INT64_LIMIT``.
Float64 holds every integer of magnitude below ``FLOAT_EXACT_LIMIT`` (IEEE 754: 53-bit
significand; common practice, no source).
"""

from __future__ import annotations

import numpy as np

#: ``2^63``: int64 holds ``[-2^63, 2^63)``.
INT64_LIMIT = 2**63
#: ``2^53``: float64 holds every integer of smaller magnitude exactly.
FLOAT_EXACT_LIMIT = 2**53

_FIXED = "iub"


def magnitude_fits_int64(bound: int) -> bool:
    """True when every integer of magnitude at most ``bound`` is an int64 (``bound < 2^63``)."""
    return bound < INT64_LIMIT


def residues_fit_int64(modulus: int) -> bool:
    """True when every residue in ``[0, modulus)`` is an int64 (``modulus <= 2^63``)."""
    return modulus <= INT64_LIMIT


def max_abs(x: np.ndarray) -> int:
    """Largest ``|x[i]|`` as a Python int (0 for an empty array; no int64 overflow)."""
    if x.size == 0:
        return 0
    if x.dtype.kind in _FIXED:
        return max(abs(int(x.max())), abs(int(x.min())))
    return int(max(abs(int(x.max())), abs(int(x.min()))))
