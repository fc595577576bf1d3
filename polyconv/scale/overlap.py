"""Overlap-add state and the summation policy of block products.

A long 1-D signal ``x`` (length ``n``) is convolved with a kernel ``k`` (length ``m``) by
overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., section 8.7,
"block convolution"): ``x`` is cut into consecutive blocks, each block product ``x_j * k``
(``m - 1`` entries longer than its block) is computed in memory, and the overlapping ``m - 1``
entries are carried forward and added into the head of the next block's product.  An output entry
is final as soon as the block covering its index has been added.

Exact integers (:class:`Summation`): partial sums are exact, and they stay in int64 only while an
a-priori bound proves it (every output, and every partial sum of one, is a sum of at most
``min(n, m)`` products ``x_i k_j``, so ``|c| <= min(n, m) max|x| max|k|``); otherwise Python ints
(object arrays).  With a modulus every sum is reduced to ``[0, modulus)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..numerics.limits import INT64_LIMIT, max_abs
from .blocks import KernelProducts, Operand

__all__ = ["INT64_LIMIT", "Summation", "OverlapAdd", "exact_summation", "add_overlap",
           "add_into", "as_exact", "as_output_dtype", "dtype_max_abs", "is_integer_dtype",
           "max_abs"]


def dtype_max_abs(dtype: np.dtype) -> int | None:
    """Largest ``|value|`` a fixed-width integer or bool dtype can hold; None for other dtypes."""
    if dtype.kind == "b":
        return 1
    if dtype.kind in "iu":
        info = np.iinfo(dtype)
        return max(int(info.max), -int(info.min))
    return None


def is_integer_dtype(dtype: np.dtype) -> bool:
    """True for bool, fixed-width integer and object (Python int) dtypes."""
    return dtype.kind in "iubO"


@dataclass(frozen=True, slots=True)
class Summation:
    """How overlapping partial sums of block products are added.

    Attributes
    ----------
    exact : bool
        Integer operands: sums are exact (int64 when ``wide`` is False, Python ints otherwise).
    wide : bool
        Add in Python ints (object arrays) because int64 is not proven to hold the sums.
    modulus : int or None
        Reduce every sum to ``[0, modulus)``.
    """

    exact: bool
    wide: bool = False
    modulus: int | None = None

    @property
    def out_dtype(self) -> np.dtype | None:
        """The dtype finished exact outputs are given (None: as the block products come)."""
        if not self.exact:
            return None
        if self.modulus is not None:
            return np.dtype(np.int64) if self.modulus < INT64_LIMIT else np.dtype(object)
        return np.dtype(object) if self.wide else np.dtype(np.int64)


def exact_summation(bound: int, modulus: int | None) -> Summation:
    """The summation for exact products whose partial sums are bounded by ``bound``."""
    if modulus is not None:
        # two residues below modulus add without int64 overflow when modulus <= 2^62
        return Summation(exact=True, wide=modulus > 2**62, modulus=modulus)
    return Summation(exact=True, wide=bound >= INT64_LIMIT)


def add_overlap(y: np.ndarray, carry: np.ndarray, summation: Summation) -> np.ndarray:
    """Add ``carry`` into the head of ``y`` (``len(carry) <= len(y)``); may return a new array."""
    if not summation.exact:
        work = np.result_type(y.dtype, carry.dtype)
        y = y.astype(work, copy=not y.flags.writeable)
        y[: carry.shape[0]] += carry
        return y
    y = as_exact(y, summation)
    add_into(y, 0, carry, summation)
    return y


def add_into(out: np.ndarray, offset: int, part: np.ndarray, summation: Summation) -> None:
    """``out[offset: offset + len(part)] += part`` exactly, in place (reduced if there is a
    modulus); ``out`` is already in the summation's working type."""
    segment = out[offset: offset + part.shape[0]]
    segment += as_exact(part, summation)
    if summation.modulus is not None:
        if summation.wide:
            segment %= summation.modulus
        else:  # both terms were residues: one subtraction reduces the sum
            segment -= np.where(segment >= summation.modulus, summation.modulus, 0)


def as_exact(y: np.ndarray, summation: Summation) -> np.ndarray:
    """``y`` as a writable array in the summation's working type (int64 or Python ints)."""
    if summation.wide:
        if y.dtype == object:
            return y if y.flags.writeable else y.copy()
        return y.astype(object)
    return y.astype(np.int64, copy=not y.flags.writeable or y.dtype != np.int64)


def as_output_dtype(y: np.ndarray, summation: Summation) -> np.ndarray:
    """Finished outputs in the summation's output dtype (floats are returned unchanged)."""
    dtype = summation.out_dtype
    if dtype is None or y.dtype == dtype:
        return y
    return y.astype(dtype)


# ----------------------------------------------------------------------------- overlap-add core

class OverlapAdd:
    """Overlap-add state: feed consecutive blocks of ``x``, get finished outputs back.

    Parameters
    ----------
    products : KernelProducts
        The block products with the kernel (:mod:`polyconv.scale.blocks`: arguments checked
        once, one plan per block shape).
    summation : Summation
        How block products and carries are added.

    Notes
    -----
    After blocks totalling ``s`` samples, outputs ``0 .. s - 1`` have been returned and the carry
    holds the partial sums of outputs ``s .. s + m - 2``; :meth:`flush_carry` returns those.
    """

    def __init__(self, products: KernelProducts, summation: Summation):
        self.products = products
        self.summation = summation
        self.carry: np.ndarray | None = None
        self.consumed = 0

    def push(self, block: np.ndarray | Operand) -> np.ndarray:
        """Convolve one non-empty block; return its ``len(block)`` finished outputs."""
        y = self.products(block)
        if self.carry is not None and self.carry.shape[0]:
            y = add_overlap(y, self.carry, self.summation)
        elif self.summation.exact:
            y = as_exact(y, self.summation)
        size = block.shape[0]
        self.carry = y[size:].copy()
        self.consumed += size
        return as_output_dtype(y[:size], self.summation)

    def widen(self, summation: Summation) -> None:
        """Switch to another summation (exact int64 -> Python ints), converting the carry."""
        self.summation = summation
        if self.carry is not None and summation.exact:
            self.carry = as_exact(self.carry, summation)

    def flush_carry(self) -> np.ndarray:
        """The last ``m - 1`` outputs (empty for a one-tap kernel)."""
        if self.carry is None:
            raise ValueError("no samples were convolved: the signal is empty")
        return as_output_dtype(self.carry, self.summation)
