"""The :class:`Plan` record, the ``method=`` names and the mode arithmetic (the one place).

A Plan says how one convolution will be computed and why; every stage after the chooser reads it.
Mode arithmetic: numpy.convolve's definitions of "full", "same" and "valid" (``output_length``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

from ..engines.registry import REGISTRY

#: ``method=`` values: "auto" and every engine of the registry.
METHODS = ("auto",) + tuple(REGISTRY)

_CERTIFICATES = ("bound", "check", "construction", "none")


# ----------------------------------------------------------------------------- engine settings
# One typed, immutable record per engine family: the engine parameters a Plan carries beyond its
# own fields (transform_length, block_length, threads).  A record iterates as (name, value) pairs,
# so ``dict(plan.settings)`` and the "settings:" line of ``str(plan)`` read every family alike.


class _Settings:
    """Iteration, length and lookup shared by the settings records."""

    __slots__ = ()

    def __iter__(self):
        return iter([(f.name, getattr(self, f.name)) for f in fields(self)])

    def __len__(self) -> int:
        return len(fields(self))


@dataclass(frozen=True, slots=True)
class FloatSettings(_Settings):
    """Float engines ("direct", "fft", "overlap-add"): every parameter is a Plan field."""


@dataclass(frozen=True, slots=True, kw_only=True)
class ExactSettings(_Settings):
    """Every exact engine ("direct-exact", "kronecker" as they are).

    Attributes
    ----------
    product_int64 : bool
        The bound ``min(n1, n2) max|a| max|b| < 2^63`` holds: the engine may return int64.
    """

    product_int64: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundedFftSettings(ExactSettings):
    """"fft-exact": one rounded float FFT product.

    Attributes
    ----------
    circular : bool
        Mode "valid": a circular product of length ``max(n1, n2)`` is computed (its tail is read).
    """

    circular: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class LimbSettings(RoundedFftSettings):
    """"limbs": operands split into ``limbs_a`` and ``limbs_b`` limbs of ``limb_bits`` bits."""

    limb_bits: int
    limbs_a: int
    limbs_b: int


@dataclass(frozen=True, slots=True, kw_only=True)
class NttSettings(ExactSettings):
    """"ntt": the NTT primes (one prime modulus, or primes recombined by Garner's CRT)."""

    ntt_primes: tuple


@dataclass(frozen=True, slots=True, kw_only=True)
class CompiledNttSettings(ExactSettings):
    """"ntt-compiled": the coefficient bound its primes are chosen from (0 for a modulus)."""

    ntt_bound: int


#: Every settings record; :func:`engine_settings` picks the one whose fields an offer names.
SETTINGS_RECORDS = (FloatSettings, ExactSettings, RoundedFftSettings, LimbSettings, NttSettings,
                    CompiledNttSettings)


def engine_settings(engine: str, values: dict) -> _Settings:
    """The typed record holding an engine's offered parameters ``values`` (all of them).

    Raises
    ------
    TypeError
        No record has exactly these fields: a new engine parameter needs its record here.
    """
    names = set(values)
    for record in SETTINGS_RECORDS:
        if names == {f.name for f in fields(record)}:
            return record(**values)
    raise TypeError(f"engine {engine!r} offered settings {sorted(names)} that no settings record "
                    "of polyconv.pipeline.plan holds; add one (SETTINGS_RECORDS)")


@dataclass(frozen=True, slots=True)
class PlanHead:
    """The verdict every plan states first: the engine chosen, how far its result can be
    trusted, its predicted time and why (fields as in :class:`Plan`; shared with
    :class:`polyconv.pipeline.nd_plan.NdPlan`)."""

    engine: str
    exact: bool
    certificate: str
    error_bound: float
    predicted_seconds: float
    reason: str

    def _verdict_lines(self, bound_text: str) -> list[str]:
        """The why / predicted / exact / error-bound lines of ``str(plan)``."""
        return [f"  why:         {self.reason}",
                f"  predicted:   {format_seconds(self.predicted_seconds)}",
                f"  exact:       {'yes' if self.exact else 'no'} (certificate: "
                f"{self.certificate})",
                f"  error bound: {bound_text}"]


@dataclass(frozen=True, slots=True)
class Plan(PlanHead):
    """How one convolution will be computed, and why.

    Attributes
    ----------
    engine : str
        The engine that will run: ``"direct"``, ``"fft"``, ``"overlap-add"`` (floats);
        ``"direct-exact"``, ``"fft-exact"``, ``"limbs"``, ``"kronecker"``, ``"ntt"`` (integers).
    exact : bool
        True when every output coefficient is exactly the mathematical result.
    certificate : str
        Why the result can be trusted: ``"bound"`` (a rigorous a-priori error bound proves it),
        ``"check"`` (an a-posteriori check proves it), ``"construction"`` (exact arithmetic), or
        ``"none"`` (ordinary floating point; no claim beyond the usual rounding).
    error_bound : float
        Maximum absolute error of any output coefficient: ``0.0`` when exact, ``inf`` when no
        rigorous bound has been computed for this plan.
    predicted_seconds : float
        The cost model's prediction for the chosen engine.
    reason : str
        One sentence explaining the choice.
    kind : str
        Arithmetic kind of the operands (``"real"``, ``"complex"``, ``"integer"``, ``"bigint"``).
    mode : str
        ``"full"``, ``"same"`` or ``"valid"``.
    lengths : tuple of int
        ``(n1, n2)``, the operand lengths along the convolution axis.
    batch_shape : tuple of int
        Broadcast shape of the other axes.
    output_length : int
        Length of the result along the convolution axis.
    transform_length : int or None
        FFT length (per block for overlap-add).
    block_length : int or None
        Overlap-add block length.
    threads : int
        Threads the engine may use.
    alternatives : tuple of (str, float)
        Every engine considered with its predicted seconds, fastest first.
    settings : FloatSettings, ExactSettings, RoundedFftSettings, LimbSettings, NttSettings or
        CompiledNttSettings
        Further engine parameters, one typed record per engine family (limb sizes and counts
        for "limbs"...); it iterates as ``(name, value)`` pairs.
    fallback : str or None
        For certificate "check": the engine that recomputes the product if the check fails.
    modulus : int or None
        The modulus outputs are reduced by.
    output_int64 : bool
        For exact plans: whether the result is returned as int64 (else Python ints).
    """

    kind: str = "real"
    mode: str = "full"
    lengths: tuple = (0, 0)
    batch_shape: tuple = ()
    output_length: int = 0
    transform_length: int | None = None
    block_length: int | None = None
    threads: int = 1
    alternatives: tuple = field(default=())
    settings: _Settings = FloatSettings()
    fallback: str | None = None
    modulus: int | None = None
    output_int64: bool = False

    def setting(self, name: str, default=None):
        """The engine parameter ``name`` from :attr:`settings` (``default`` if absent)."""
        return getattr(self.settings, name, default)

    def __str__(self) -> str:
        n1, n2 = self.lengths
        batch = f" x batch {self.batch_shape}" if self.batch_shape else ""
        lines = [
            f"polyconv plan: {self.engine} for {self.kind} operands of lengths {n1} and {n2}"
            f"{batch}, mode {self.mode!r} -> {self.output_length} outputs",
            *self._verdict_lines(_fmt_bound(self.error_bound)),
        ]
        if self.transform_length:
            detail = f"  transform:   length {self.transform_length}"
            if self.block_length:
                detail += f", blocks of {self.block_length}"
            detail += f", {self.threads} thread{'s' if self.threads != 1 else ''}"
            lines.append(detail)
        elif self.threads > 1:
            lines.append(f"  threads:     {self.threads}")
        if self.settings:
            shown = (f"{k}={_fmt_setting(v)}" for k, v in self.settings)
            lines.append("  settings:    " + ", ".join(shown))
        if self.modulus is not None:
            lines.append(f"  modulus:     {self.modulus} (outputs in [0, modulus))")
        if self.exact:
            lines.append(f"  output:      {'int64' if self.output_int64 else 'Python ints'}")
        if self.fallback:
            lines.append(f"  fallback:    {self.fallback} (if the check fails)")
        if len(self.alternatives) > 1:
            others = ", ".join(f"{name} {format_seconds(t)}" for name, t in self.alternatives)
            lines.append(f"  considered:  {others}")
        return "\n".join(lines)


def format_seconds(t: float) -> str:
    if t < 1e-3:
        return f"{t * 1e6:.1f} us"
    if t < 1.0:
        return f"{t * 1e3:.2f} ms"
    return f"{t:.2f} s"


def _fmt_setting(value) -> str:
    """A setting as text; an integer wider than 64 bits as ``< 2^k`` (its bit length)."""
    if isinstance(value, int) and not isinstance(value, bool) and value > 2**64:
        return f"< 2^{value.bit_length()}"
    return str(value)


def _fmt_bound(bound: float) -> str:
    if bound == 0.0:
        return "0 (exact)"
    if math.isinf(bound):
        return "not computed (floating point, no rigorous bound claimed)"
    return f"{bound:.3g} (absolute, any coefficient)"


def output_length(mode: str, n1: int, n2: int) -> int:
    """Length along the axis of a ``mode`` convolution (numpy.convolve's definitions)."""
    start, stop = mode_window(mode, n1, n2)
    return stop - start


def mode_window(mode: str, n1: int, n2: int) -> tuple[int, int]:
    """``(start, stop)`` of the full product's entries a mode returns (numpy.convolve's
    definitions: "same" is centred on the longer operand, "valid" needs no zero padding)."""
    if mode == "full":
        return 0, n1 + n2 - 1
    if mode == "same":
        start = (min(n1, n2) - 1) // 2
        return start, start + max(n1, n2)
    return min(n1, n2) - 1, max(n1, n2)


def needed_entries(mode: str, n1: int, n2: int, output_length: int) -> int:
    """How many leading entries of the full product a mode reads."""
    if mode == "full":
        return output_length
    return mode_window(mode, n1, n2)[1]


def check_method(method) -> str:
    """Return ``method`` if it names "auto" or an engine, else raise ValueError."""
    if not isinstance(method, str) or method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(map(repr, METHODS))}; got {method!r}")
    return method
