"""Timeouts with retries, and hedged requests, on lattices.

Retry (each attempt an independent draw ``A`` of the same law; an attempt slower than the
timeout ``tau`` is abandoned at ``tau``, the caller waits ``b_j`` and tries again, at most
``1 + retries`` attempts).  With ``q = P(A > tau)`` and the start of attempt ``j``
``c_j = j tau + b_1 + ... + b_j``, the time of the eventual success has the sub-probability law

    f(x) = sum_{j=0}^{R} q^j P(A = x - c_j, A <= tau),

of total mass ``1 - q^(R+1)`` (a geometric series), and every attempt times out with
probability ``q^(R+1)``, known at the give-up time ``c_R + tau``.  The expected number of
attempts is ``sum_{j=0}^{R} q^j = (1 - q^(R+1)) / (1 - q)`` (common practice, no source: the
closed forms of a truncated geometric series).

Hedged request: a second copy is sent at ``d`` if the first has not answered; the caller takes
the first answer, so the response is ``min(A_1, d + A_2)`` (when ``A_1 <= d`` the copy is never
sent and the minimum is ``A_1`` anyway), i.e. :func:`first_of` of ``A`` and ``A`` shifted by
``d``.  The extra load: copies sent ``P(A_1 > d)`` per request; with the loser cancelled at the
first answer, extra busy time ``E[(R - d)+]`` (the stop-loss of the response at ``d``).  Copies
at several delays ``d_1 < d_2 < ...`` generalise both.

Independence is an assumption: retries and hedges add load, and a slow attempt often means a
slow server that the retry also meets.  Model output, not advice: check against engineering
codes and qualified practice before setting timeouts or capacity.

Error ledger: ``q`` errs by at most the attempt's cumulative bound ``K`` (plus its truncated
mass if that may lie below ``tau``); the success law errs in L1 by at most
``sum_j [(q + dq)^j l1 + ((q + dq)^j - q^j) m]`` and in every cumulative sum by the same with
``K`` for ``l1`` (``m`` the mass below the timeout); the law given success is divided by the
success probability ``s``, which doubles the bound and divides it by ``s``.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from .delays import first_of
from .lattice import Lattice
from .ledger import Bounded, ErrorLedger, cum_bound, t_bounds, untruncated
from .risk import lattice_index, real_value


class RetryResult(NamedTuple):
    """What :func:`retry` returns.

    Attributes
    ----------
    success : Lattice
        Law of the time to the eventual success, *given* success.
    p_fail : Bounded
        Probability that every attempt times out, with its certified range.
    give_up : float
        The time at which the caller knows every attempt failed (``c_R + tau``).
    response : Lattice
        Time to an answer, success or give-up: the success law (unconditional) plus an atom of
        ``p_fail`` at ``give_up``.
    expected_attempts : float
        ``sum_j q^j``.
    """

    success: Lattice
    p_fail: Bounded
    give_up: float
    response: Lattice
    expected_attempts: float


class HedgeResult(NamedTuple):
    """What :func:`hedge` returns: the response law and the extra load (with ranges)."""

    response: Lattice
    extra_requests: Bounded
    extra_busy_time: Bounded


def _steps(value: float, h: float, name: str) -> int:
    k = value / h
    if abs(k - round(k)) > 1e-9 * max(1.0, abs(k)):
        raise ValueError(f"{name} must be a whole multiple of the step {h!r}; got {value!r}")
    return int(round(k))


def _backoffs(backoff, retries: int) -> list[float]:
    if isinstance(backoff, (int, float)) and not isinstance(backoff, bool):
        b = [real_value(backoff, "backoff")] * retries
    else:
        try:
            b = [real_value(v, "backoff") for v in backoff]
        except TypeError:
            raise TypeError("backoff must be a number or a sequence of one wait per retry"
                            ) from None
        if len(b) != retries:
            raise ValueError(f"backoff must give one wait per retry ({retries}); got {len(b)}")
    if any(v < 0 for v in b):
        raise ValueError(f"backoff waits must be >= 0; got {backoff!r}")
    return b


def retry(attempt: Lattice, *, timeout: float, retries: int, backoff=0.0) -> RetryResult:
    """Latency of eventual success with timeouts and retries (module docstring).

    Parameters
    ----------
    attempt : Lattice
        Law of one attempt's duration (non-negative origin).
    timeout : float
        ``tau > 0``, a whole multiple of the step: attempts slower than this are abandoned.
    retries : int
        Further attempts after the first (``0``: one attempt).
    backoff : float or sequence of float
        Wait before each retry (one number for all, or one per retry; exponential backoff is
        ``[b, 2 b, 4 b, ...]``); whole multiples of the step.

    Returns
    -------
    RetryResult
    """
    if not isinstance(attempt, Lattice):
        raise TypeError(f"attempt must be a Lattice; got {type(attempt).__name__}")
    if isinstance(retries, bool) or not isinstance(retries, int) or retries < 0:
        raise ValueError(f"retries must be a non-negative integer; got {retries!r}")
    tau = real_value(timeout, "timeout")
    if not tau > 0:
        raise ValueError(f"timeout must be positive; got {timeout!r}")
    if attempt.origin < 0:
        raise ValueError(f"attempt durations must be >= 0; the lattice starts at "
                         f"{attempt.origin!r}")
    h, o = attempt.step, attempt.origin
    waits = _backoffs(backoff, retries)
    tau_k = _steps(tau, h, "timeout")
    wait_k = [_steps(b, h, "backoff") for b in waits]
    starts = [0]
    for w in wait_k:
        starts.append(starts[-1] + tau_k + w)
    pmf = np.asarray(attempt.pmf)
    n = pmf.size
    t = int(lattice_index(tau, o, h, n))  # last index with x <= tau
    e = attempt.errors
    if t < 0:
        ok = np.zeros(1)
    else:
        ok = pmf[: min(t, n - 1) + 1]
    q = float(np.sum(pmf[ok.size:], dtype=np.longdouble)) + e.truncated
    q = min(max(q, 0.0), 1.0)
    dq = cum_bound(e) + 4 * 2.0 ** -53
    if not untruncated(e) and e.truncated_from <= t:
        dq += t_bounds(e, float(pmf.sum()), n)[1]
    m = float(ok.sum())
    powers = [q ** j for j in range(retries + 2)]
    qh = min(q + dq, 1.0)
    length = starts[-1] + ok.size
    f = np.zeros(length)
    for j, s in enumerate(starts):
        f[s : s + ok.size] += powers[j] * ok
    grow_l1 = sum(qh ** j * e.l1 + (qh ** j - powers[j]) * m for j in range(retries + 1))
    grow_cum = sum(qh ** j * cum_bound(e) + (qh ** j - powers[j]) * m
                   for j in range(retries + 1))
    rnd = (retries + 4) * 2.0 ** -53
    p_fail = powers[retries + 1]
    lo = max(q - dq, 0.0) ** (retries + 1)
    hi = qh ** (retries + 1)
    fail = Bounded(p_fail, lo, hi, False, "")
    expected = math.fsum(powers[: retries + 1])
    give_up = h * (starts[-1] + tau_k)
    # the law given success
    success_mass = float(f.sum())
    if success_mass <= 0:
        raise ValueError(f"no attempt can succeed: P(attempt <= timeout {tau!r}) is 0")
    g = f / success_mass
    k_s = min(2 * (grow_cum + rnd) / success_mass, 2.0)
    l_s = min(2 * (grow_l1 + rnd) / success_mass, 2.0)
    success = Lattice._make(g, h, o, ErrorLedger(min(l_s, 2 * e.point / success_mass + k_s),
                                                 l_s, 0.0, g.size, 0.0, k_s))
    # response: success or give-up atom (at c_R + tau, past every success time)
    gk = int(math.ceil((give_up - o) / h - 1e-9))  # at the give-up time (or just after it)
    r = np.zeros(max(gk + 1, length))
    r[:length] = f
    r[gk] += p_fail
    d_fail = hi - lo
    response = Lattice._make(r, h, o, ErrorLedger(min(grow_l1 + d_fail + rnd, 2.0),
                                                  min(grow_l1 + d_fail + rnd, 2.0), 0.0,
                                                  r.size, 0.0,
                                                  min(grow_cum + d_fail + rnd, 2.0)))
    return RetryResult(success, fail, float(give_up), response, expected)


def hedge(attempt: Lattice, *, after) -> HedgeResult:
    """Hedged request: copies of ``attempt`` sent at the delays ``after`` unless answered.

    Parameters
    ----------
    attempt : Lattice
        Law of one copy's duration (non-negative origin).
    after : float or sequence of float
        Delay(s) at which further copies are sent, increasing, whole multiples of the step.

    Returns
    -------
    HedgeResult
        ``response = first_of(A, A + d_1, ...)``; ``extra_requests = sum_i P(R_{i-1} > d_i)``
        copies per request (``R_{i-1}`` the response of the copies sent before ``d_i``);
        ``extra_busy_time = sum_i E[(R - d_i)+]`` with losers cancelled at the first answer.
    """
    if not isinstance(attempt, Lattice):
        raise TypeError(f"attempt must be a Lattice; got {type(attempt).__name__}")
    if attempt.origin < 0:
        raise ValueError(f"attempt durations must be >= 0; the lattice starts at "
                         f"{attempt.origin!r}")
    ds = [after] if isinstance(after, (int, float)) and not isinstance(after, bool) else \
        list(after)
    ds = [real_value(d, "after") for d in ds]
    if not ds or any(d < 0 for d in ds) or any(ds[i + 1] <= ds[i] for i in range(len(ds) - 1)):
        raise ValueError(f"after must be non-negative delays in increasing order; got "
                         f"{after!r}")
    for d in ds:
        _steps(d, attempt.step, "after")
    copies = [attempt]
    extra = [0.0, 0.0, 0.0]
    for d in ds:
        so_far = first_of(*copies) if len(copies) > 1 else attempt
        b = _quiet(so_far, "sf", d)
        extra = [extra[0] + b.value, extra[1] + b.low, extra[2] + b.high]
        copies.append(attempt + d)
    response = first_of(*copies)
    busy = [0.0, 0.0, 0.0]
    for d in ds:
        b = _quiet(response, "stop_loss", d)
        busy = [busy[0] + b.value, busy[1] + b.low, busy[2] + b.high]
    refused = math.isnan(busy[0])
    return HedgeResult(response, Bounded(extra[0], extra[1], extra[2], False, ""),
                       Bounded(busy[0], busy[1], busy[2], refused,
                               "the response's tail beyond the grid has no known first moment"
                               if refused else ""))


def _quiet(lat: Lattice, measure: str, arg: float) -> Bounded:
    import warnings
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return lat.bounded(measure, arg)
