"""Transform lengths: the smallest fast FFT length that avoids wrap-around.

A circular convolution of length ``N`` equals the linear one when ``N >= n1 + n2 - 1`` (zero
padding; common practice, no source).  Among such ``N`` we take the next length the running FFT
library (:mod:`polyconv.transforms`) is fast at: 5-smooth for real transforms.
"""

from __future__ import annotations

from . import transforms


def linear_length(n1: int, n2: int) -> int:
    """Length of the full linear convolution of sequences of lengths ``n1`` and ``n2``."""
    return n1 + n2 - 1


def fast_length(minimum: int, real: bool = True) -> int:
    """Smallest length ``>= minimum`` that the FFT library transforms fast (5-smooth)."""
    return transforms.fast_length(minimum, real=real)
