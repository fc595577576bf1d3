"""What every engine record shares: the job description, an option, the record type.

The chooser (:mod:`polyconv.pipeline.choose`) describes a product once as a :class:`Job` and asks
every engine of the registry (:mod:`polyconv.engines.registry`) for an :class:`Option` (predicted
seconds, certificate, parameters) or a refusal (a sentence naming the reason).  The cost
formulas live beside each kernel; their constants come from the cost table in the job.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from ..numerics.limits import INT64_LIMIT
from ..numerics.tables import value_at_size

#: Arrays from this many entries on (2 MiB of float64) no longer fit in the CPU cache: the direct
#: and overlap-add engines then pay memory traffic per sample, fitted separately.
LARGE_ARRAY = 2**18

FLOAT_KINDS = frozenset({"real", "complex"})
INTEGER_KINDS = frozenset({"integer", "bigint"})


def power_of_two_at_least(n: int) -> int:
    """Smallest power of two ``>= n``."""
    return 1 << max(0, (n - 1).bit_length())


def fft_rate(costs: dict, n_fft: int, fused: bool = False) -> float:
    """Seconds per ``N log2 N`` of one real 1-D FFT product at length ``N``, interpolated:
    separate transform calls, or with ``fused`` the library's fused circular product
    (``fft.fused_rate_by_log2n``; tables without it give the separate calls' rate)."""
    c = costs["fft"]
    table = c.get("fused_rate_by_log2n") if fused else None
    return value_at_size(table or c["rate_by_log2n"], max(n_fft, 2))


def gmp_rate(c: dict, bits: int) -> float:
    """Seconds per ``b lg b`` of a balanced GMP product of ``b``-bit integers (interpolated)."""
    return value_at_size(c["mul_rate_by_log2bits"], bits)


def powers_mod(step: int, count: int, p: int) -> np.ndarray:
    """``step^j mod p`` for ``j < count``, by doubling (vectorised)."""
    out = np.ones(count, dtype=np.uint64)
    filled, factor = 1, step
    while filled < count:
        take = min(filled, count - filled)
        out[filled:filled + take] = out[:take] * np.uint64(factor) % np.uint64(p)
        filled += take
        factor = factor * factor % p
    return out


def spectral_product(fa, fb):
    """``fa * fb`` with broadcasting, in place in ``fa`` when its shape allows (the pointwise
    product of two spectra: the circular convolution theorem)."""
    if fa.shape == np.broadcast_shapes(fa.shape, fb.shape):
        fa *= fb
        return fa
    return fa * fb


@dataclass(frozen=True)
class Job:
    """One product as the engines' option functions see it.

    Attributes
    ----------
    kind : str
        ``"real"``, ``"complex"``, ``"integer"`` or ``"bigint"``.
    n1, n2 : int
        Operand lengths along the convolution axis.
    batch_a, batch_b, batch : tuple of int
        Leading shapes of ``a``, ``b`` and their broadcast.
    mode : str
        ``"full"``, ``"same"`` or ``"valid"``.
    out_len : int
        Output coefficients kept along the axis.
    costs : dict
        The cost table in force (:mod:`polyconv.tuning.costs`).
    threads : int
        Threads polyconv may use.
    facts : IntegerFacts or None
        For integer kinds: lengths, magnitudes, norms, modulus
        (:class:`polyconv.pipeline.facts.IntegerFacts`).
    """

    kind: str
    n1: int
    n2: int
    batch_a: tuple
    batch_b: tuple
    batch: tuple
    mode: str
    out_len: int
    costs: dict = field(compare=False)
    threads: int = 1
    facts: object = None

    @cached_property
    def rows(self) -> int:
        """Rows of the broadcast batch (1 for 1-D operands)."""
        return math.prod(self.batch) if self.batch else 1

    @property
    def full(self) -> int:
        """Length of the full product."""
        return self.n1 + self.n2 - 1

    @property
    def modulus(self) -> int | None:
        return self.facts.modulus if self.facts is not None else None

    # --- integer jobs

    @cached_property
    def bound(self) -> int:
        """``min(n1, n2) max|a| max|b|``: no output coefficient is larger in magnitude."""
        return self.facts.bound

    @property
    def fits_int64(self) -> bool:
        """Whether every coefficient of the exact product is an int64."""
        return self.bound < INT64_LIMIT

    @cached_property
    def slot_bits(self) -> int:
        """Bits of one Kronecker slot: value bits and a sign, rounded up to whole bytes."""
        top = (max(self.bound, self.facts.max_a, self.facts.max_b) + 1).bit_length() + 1
        return 8 * max(1, -(-top // 8))

    @property
    def circular(self) -> bool:
        """Mode "valid" keeps only entries a circular product of length ``max(n1, n2)`` gets
        right (the middle product): bound-certified transform engines use that shorter length."""
        return self.mode == "valid"

    @cached_property
    def n_pow2(self) -> int:
        """Power-of-two transform length of the float-FFT engines (circular for "valid")."""
        return power_of_two_at_least(max(self.n1, self.n2) if self.circular else self.full)

    @cached_property
    def n_full(self) -> int:
        """Power-of-two length of the full (never circular) product."""
        return power_of_two_at_least(self.full)

    @cached_property
    def float_cost(self) -> float:
        """Seconds of one real float FFT product at :attr:`n_pow2` (the float model)."""
        n = self.n_pow2
        return fft_rate(self.costs, n) * n * math.log2(max(n, 2))


@dataclass(frozen=True)
class Option:
    """An engine's offer for one job.

    ``settings`` holds the engine's parameters; ``transform_length``, ``block_length``,
    ``threads`` and ``error_bound`` become fields of the Plan, the rest its ``settings``.
    """

    seconds: float
    certificate: str = "none"
    note: str = ""
    settings: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Engine:
    """One engine of the registry.

    Attributes
    ----------
    name : str
        The ``method=`` name.
    kinds : frozenset of str
        Operand kinds it serves.
    option : callable
        ``option(job) -> Option | str``: the offer, or a refusal naming the reason.
    run : callable
        ``run(plan, a, b, keep) -> ndarray | None``: the product (full, or its first ``keep``
        coefficients) of prepared operands; None when the engine turned out unavailable.
    exact : bool
        Whether its results are exact (integer engines).
    reduces_modulus : bool
        Whether its output is already reduced modulo the plan's modulus.
    nonfinite_safe : bool
        Float engines: propagates NaN and inf as numpy.convolve does (no policy needed).
    smears_nonfinite : bool
        Float engines: one non-finite input makes every output of a row non-finite (a single
        transform per row), so the first output of each row tells.
    check_fallback : bool
        Exact by construction: may recompute a product whose "check" failed.
    when_unavailable : str or None
        The engine that runs instead when :attr:`run` returns None.
    batched : bool
        Exact engines: :attr:`run` takes the whole batch at once, ``(rows, n1)`` and ``(rows,
        n2)`` stacks, and returns ``(rows, count)`` (the runner otherwise calls it per row).
    remark : callable or None
        ``remark(chosen, offered) -> str``: what the plan's reason adds about this engine.
    """

    name: str
    kinds: frozenset
    option: Callable
    run: Callable
    exact: bool = False
    reduces_modulus: bool = False
    nonfinite_safe: bool = False
    smears_nonfinite: bool = False
    check_fallback: bool = False
    when_unavailable: str | None = None
    remark: Callable | None = None
    batched: bool = False
