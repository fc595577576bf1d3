"""Transform lengths: the smallest fast FFT length that avoids wrap-around.

A circular convolution of length ``N`` equals the linear one when ``N >= n1 + n2 - 1`` (zero
padding; common practice, no source).  Among such ``N`` we take the next 5-smooth length, for
which pocketfft (the FFT behind numpy and scipy) has dedicated radix-2/3/4/5 kernels.
"""

from __future__ import annotations

from scipy import fft as _sfft


def linear_length(n1: int, n2: int) -> int:
    """Length of the full linear convolution of sequences of lengths ``n1`` and ``n2``."""
    return n1 + n2 - 1


def fast_length(minimum: int, real: bool = True) -> int:
    """Smallest length ``>= minimum`` that pocketfft transforms fast (5-smooth)."""
    return _sfft.next_fast_len(minimum, real=real)
