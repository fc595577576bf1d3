"""Exact enclosures of small maxima, minima and mixtures of exactly known lattices.

Every float64 number is a dyadic rational ``m 2^e``, so a pmf given as floats has exact
cumulative sums, and the law of a maximum (``F = prod F_i``), of a minimum (``S = prod S_i``,
``S_i = 1 - F_i``) or of a mixture (``sum w_i p_i``) of such inputs is an exact dyadic rational
at every point, computed here in Python integers (each pmf scaled by a power of two to integers;
products of integers are exact).  When every input is exact (error ledger zero) and whole
(nothing truncated; for a minimum a truncated input is allowed: below its truncation point, where
the grid of ``first_of`` stops, its survival function is ``1 - F`` exactly) this *is* the exact
model of the result, and rounding it to longdouble gives
an :class:`~polyconv.dist.enclosure.Enclosure` with radius ``u_L |q_k|`` (round to nearest:
relative error at most ``u_L``, IEEE 754; subnormal longdouble results do not occur for the
sizes allowed here, and a tiny absolute ``1e-4940`` is added anyway).  The returned pmf is the
float64 rounding of the exact values.

Only for small inputs (:data:`EXACT_MAX_POINTS` points times inputs): integer cdf products grow
by the inputs' bit lengths.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np

from .enclosure import Enclosure
from .ledger import untruncated

EXACT_MAX_POINTS = 4096
"""Most ``grid length * inputs`` computed exactly."""

L = np.longdouble
_UL = float(np.finfo(L).eps) / 2


def _scaled(pmf: np.ndarray) -> tuple[list[int], int]:
    """Integers ``a_k`` and one exponent ``e`` with ``pmf_k = a_k 2^e`` exactly."""
    exps = [math.frexp(float(v))[1] - 53 for v in pmf if v != 0]
    e = min(exps) if exps else 0
    return [int(Fraction(float(v)) / Fraction(2) ** e) for v in pmf], e


def _padded_cdf(d, off: int, length: int) -> tuple[list[int], int, int]:
    """Integer cumulative sums of ``d`` on the common grid (``0`` before its first point, its
    total after its last), their exponent and the integer total."""
    a, e = _scaled(np.asarray(d.pmf))
    out, acc = [0] * length, 0
    for k in range(length):
        j = k - off
        if 0 <= j < len(a):
            acc += a[j]
        out[k] = acc
    return out, e, sum(a)


def _frac_long(v: Fraction) -> np.longdouble:
    """``v`` to longdouble within ``2 u_L`` relative: ``floor(|v| 2^s)`` with the ``s`` giving
    65 to 67 bits (the truncation errs by less than ``2^-64`` relative), then one rounding to
    the 64-bit significand (``u_L``); the radius charges ``4 u_L``."""
    if v == 0:
        return L(0)
    sign = -1 if v < 0 else 1
    num, den = abs(v.numerator), v.denominator
    shift = 65 - (num.bit_length() - den.bit_length())
    q = (num << shift) // den if shift >= 0 else num // (den << -shift)
    # q < 2^67: two parts below 2^53 convert exactly; their sum rounds once (u_L)
    value = L(float(q >> 33)) * L(float(1 << 33)) + L(float(q & ((1 << 33) - 1)))
    return sign * np.ldexp(value, -shift)


def enclosure(kind: str, ds: list, offs: list[int], length: int,
              weights: np.ndarray | None = None) -> Enclosure | None:
    """Exact enclosure of ``all_of`` (``kind="max"``), ``first_of`` (``"min"``, on ``length``
    points) or ``mixture`` (``"mix"``, with ``weights``) of the lattices ``ds`` placed at index
    offsets ``offs``; None unless every input is exact and whole and the grid is small."""
    if length * len(ds) > EXACT_MAX_POINTS:
        return None
    if any(d.errors.l1 > 0 or d.errors.point > 0 for d in ds):
        return None
    truncated = [not untruncated(d.errors) or d.truncated_mass > 0 for d in ds]
    if kind != "min" and any(truncated):
        return None
    if kind == "mix":
        exact = [Fraction(0)] * length
        for w, o, d in zip(weights, offs, ds, strict=True):
            fw = Fraction(float(w))
            for j, v in enumerate(np.asarray(d.pmf)):
                if v:
                    exact[o + j] += fw * Fraction(float(v))
    else:
        cdfs = [_padded_cdf(d, o, length) for d, o in zip(ds, offs, strict=True)]
        # a truncated input (its represented part exact) survives with 1 - F: its truncated
        # mass lies at or beyond first_of's grid (which stops at its truncated_from)
        cdfs = [(c, e, 1 << -e if cut else t) if e <= 0 else (c, e, t)
                for (c, e, t), cut in zip(cdfs, truncated, strict=True)]
        if any(cut and e > 0 for (_, e, _), cut in zip(cdfs, truncated, strict=True)):
            return None
        scale = Fraction(2) ** sum(e for _, e, _ in cdfs)
        prev = Fraction(1) if kind == "min" else Fraction(0)
        exact = []
        for k in range(length):
            if kind == "max":
                cur = Fraction(math.prod(c[k] for c, _, _ in cdfs)) * scale
                exact.append(cur - prev)
            else:
                cur = Fraction(math.prod(t - c[k] for c, _, t in cdfs)) * scale
                exact.append(prev - cur)
            prev = cur
    center = np.array([_frac_long(v) for v in exact], dtype=L)
    radius = np.abs(center).astype(float) * (4 * _UL) + 1e-320
    return Enclosure(center, radius)
