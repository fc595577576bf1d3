"""Error bounds behind every Lattice's ``trust_floor``, kept in one place.

A ``trust_floor`` is an absolute bound on the error of each probability of a Lattice, coming from
how it was computed (floating-point transforms, aliasing, tilting).  Probabilities below it carry no
information.  The formulas here are the only place such bounds are made; the rest of
:mod:`polyconv.dist` calls them.

Sources
-------
* Percival, "Rapid multiplication modulo the sum and difference of highly composite numbers",
  Math. Comp. 72 (2003) 387-395, as restated in Brent & Zimmermann, *Modern Computer Arithmetic*
  (2010), section 3.3 (wording from memory): for radix-2 transforms of length ``N = 2**n`` with unit
  roundoff ``u`` and twiddle error ``beta``, a float FFT product of ``x`` and ``y`` errs by at most
  ``||x||_2 ||y||_2 [(1+u)^{3n} (1+sqrt(5) u)^{3n+1} (1+beta)^{3n} - 1]``.
* Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., Thm 24.2 (from memory): one
  radix-2 FFT has relative 2-norm error ``<= n eta / (1 - n eta)``,
  ``eta = mu + gamma_4 (sqrt 2 + mu)`` with ``mu`` the twiddle error and
  ``gamma_4 = 4u / (1 - 4u)``.
* Exponential tilting: Grubel & Hermesmeier, ASTIN Bulletin 29 (1999).

Caveat (DESIGN.md section 4): pocketfft, the transform behind scipy.fft, is mixed-radix with its own
twiddle code; the theorems are stated for radix 2.  We evaluate them with ``n = ceil(log2 N)`` and
``beta = mu = 4u`` (pocketfft's twiddles, measured: an assumption, not a proof), so the floors are
careful estimates rather than certificates.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from ..numerics import bounds

UNIT_ROUNDOFF = 2.0 ** -53
"""Unit roundoff ``u`` of IEEE binary64."""

TWIDDLE_ERROR = float(bounds.TWIDDLE_ERROR)
"""Assumed error ``beta`` (= ``mu``) of each twiddle factor: 4u, as measured for pocketfft."""


def _levels(n_fft: int) -> int:
    return max(1, math.ceil(math.log2(max(int(n_fft), 2))))


def fft_relative_error(n_fft: int, u: float = UNIT_ROUNDOFF, mu: float = TWIDDLE_ERROR
                       ) -> float:
    """Relative 2-norm error bound of one length-``n_fft`` FFT (Higham, Thm 24.2, from memory).

    ``n eta / (1 - n eta)`` with ``eta = mu + gamma_4 (sqrt 2 + mu)``, ``n = ceil(log2 n_fft)``;
    ``u`` the unit roundoff and ``mu`` the twiddle error of the arithmetic (float64 by default;
    :mod:`polyconv.dist.long_route` passes longdouble's).
    """
    gamma4 = 4 * u / (1 - 4 * u)
    eta = mu + gamma4 * (math.sqrt(2.0) + mu)
    t = _levels(n_fft) * eta
    return t / (1 - t)


def fft_product_bound(norm_a: float, norm_b: float, n_fft: int) -> float:
    """Max abs error of any coefficient of a float FFT product (Percival 2003).

    Delegates to :func:`polyconv.numerics.bounds.fft_error_bound` (exact rational evaluation,
    pocketfft's measured twiddle error) at the level count
    :func:`polyconv.numerics.bounds.mixed_radix_levels_length` charges for a length-``n_fft``
    transform.
    """
    return bounds.fft_error_bound(float(norm_a), float(norm_b),
                                  bounds.mixed_radix_levels_length(int(n_fft)))


def convolution_bound(engine: str, a: np.ndarray, b: np.ndarray,
                      transform_length: int | None) -> float:
    """Error bound for one ``polyconv.convolve`` of two real vectors by the named engine.

    See :func:`polyconv.numerics.bounds.convolution_error_bound`.
    """
    na = float(np.sqrt(np.sum(a * a)))
    nb = float(np.sqrt(np.sum(b * b)))
    return bounds.convolution_error_bound(engine, na, nb,
                                          transform_length or (a.size + b.size - 1),
                                          min(a.size, b.size))


def propagated_sum_floor(floor_a: float, mass_a: float, floor_b: float, mass_b: float) -> float:
    """Input errors carried through ``a * b`` (convolution): first order.

    ``|(a + da) * (b + db) - a * b|
    <= ||a||_1 ||db||_inf + ||b||_1 ||da||_inf + ||da||_1 ||db||_inf``;
    with entries of mass at most 1 this is ``mass_a floor_b + mass_b floor_a`` to first order
    (Young's inequality ``||x * y||_inf <= ||x||_1 ||y||_inf``).
    """
    return mass_a * floor_b + mass_b * floor_a + floor_a * floor_b


def transform_compound_floor(n_fft: int, l1_tilted: float, lipschitz: float, pgf_rel: float,
                             pgf_abs: float, l2_out_tilted: float,
                             eta: float | None = None) -> float:
    """Rounding bound, in the tilted domain, of ``g = IFFT(P(FFT(f)))`` (first order).

    Let ``eta`` be :func:`fft_relative_error`.  Each forward output errs by at most
    ``eta ||f||_1`` (componentwise FFT bound: every entry of the DFT matrix has modulus 1);
    applying ``P`` multiplies that by ``|P'(phi_j)|`` and adds its own rounding, ``pgf_rel |P|``
    plus ``pgf_abs``; the scaled inverse transform maps a spectrum error ``dG`` to at most
    ``||dG||_2 / sqrt(M)`` per coefficient (Parseval) and adds ``eta ||g||_2``.  Hence

        ``max_k |dg_k| <= eta ||f||_1 L + pgf_abs + (pgf_rel + eta) ||g||_2``,

    ``L = ||P'(phi)||_2 / sqrt(M)``, at most ``E[N]`` (a PGF has ``|P'(z)| <= P'(1) = E[N]`` on the
    unit disc).  Derived here from the two cited FFT bounds; first order only.

    Parameters
    ----------
    n_fft : int
        Transform length ``M``.
    l1_tilted : float
        ``||f||_1`` of the (tilted) severity vector.
    lipschitz : float
        ``L`` above.
    pgf_rel, pgf_abs : float
        Relative and absolute rounding of evaluating ``P`` on the spectrum.
    l2_out_tilted : float
        ``||g||_2`` of the (tilted) output.
    eta : float, optional
        The transforms' relative error (default :func:`fft_relative_error` in float64; a
        longdouble route passes its own, plus the relative rounding of its tilted input).
    """
    if eta is None:
        eta = fft_relative_error(n_fft)
    return eta * l1_tilted * lipschitz + pgf_abs + (pgf_rel + eta) * l2_out_tilted


def untilted_floor(tilted_floor: float, theta: float, last_index: int) -> float:
    """Tilted-domain error ``e`` becomes ``e * exp(theta * k)`` at index ``k`` after untilting
    (Grubel & Hermesmeier 1999); the scalar floor takes the largest ``k`` kept."""
    return tilted_floor * math.exp(theta * max(last_index, 0))


def untilted_l1(tilted_l2: float, theta: float, size: int) -> float:
    """L1 bound of the untilted error over ``k < size`` from a bound ``R`` of the tilted-domain
    error's Euclidean norm: ``sum_k |dg_k| e^{theta k} <= R sqrt(sum_k e^{2 theta k})``
    (Cauchy-Schwarz).  :func:`transform_compound_floor` is such a bound: each of its terms
    bounds a Euclidean norm (Parseval for the scaled inverse transform, Higham's normwise FFT
    bound), which it then uses as a per-coefficient bound."""
    if size <= 0 or tilted_l2 == 0:
        return 0.0
    if theta <= 0:
        return tilted_l2 * math.sqrt(size)
    top = theta * (size - 1)
    ratio = -math.expm1(-2 * theta * size) / -math.expm1(-2 * theta)
    return tilted_l2 * math.exp(top) * math.sqrt(ratio)


def aliasing_bound(log_tail_at_m: float, theta: float, n_fft: int) -> float:
    """Mass wrapped onto any index ``k < M`` by a length-``M`` circular transform, after untilting.

    The circular result at ``k`` holds the tilted aliases ``g_{k+jM} e^{-theta (k+jM)}``,
    ``j >= 1``;
    untilting multiplies by ``e^{theta k}``, leaving ``sum_j g_{k+jM} e^{-theta j M}
    <= exp(-theta M) P(S >= M)`` uniformly in ``k`` (Grubel & Hermesmeier 1999).
    ``log_tail_at_m`` is the log of an upper bound of ``P(S >= M)`` (e.g. a Chernoff bound).
    Summed over ``k < M`` the same argument gives the same bound for the L1 norm of the aliased
    mass (each ``g_{k+jM}`` is counted once).
    """
    return math.exp(min(0.0, log_tail_at_m) - theta * n_fft)


def choose_tilt(n_fft: int, size: int, log_alias_mass: float, rounding: float) -> float:
    """Tilt ``theta`` (per lattice step) minimising ``A e^{-theta M} + R e^{theta s}``.

    ``A = P(S >= M)`` (aliasing mass, :func:`aliasing_bound`), ``R`` the tilted-domain rounding
    amplified by untilting at the last index kept ``s`` (:func:`untilted_floor`).  The derivative
    vanishes at ``theta = ln(M A / (s R)) / (M + s)``, clipped at 0.  With ``M = 2 s``, ``A ~ 1``
    and ``R ~ 1e-14`` this gives ``theta M ~ 22``, inside the range found to work in DESIGN.md
    section 6 (measured there: ``theta M ~ 20-30`` with ``M >= 2 s``); a small ``A`` gives a small
    tilt and so little amplification of round-off.
    """
    s = max(size - 1, 1)
    if rounding <= 0:
        return 0.0
    val = (math.log(n_fft) + min(log_alias_mass, 0.0) - math.log(s) - math.log(rounding))
    return max(0.0, val / (n_fft + s))


@functools.lru_cache(maxsize=8)
def float_range(n: int) -> np.ndarray:
    """``0.0, 1.0, ..., n - 1`` as a read-only float array, cached (dot products with a pmf
    run as BLAS calls without converting an integer range each time)."""
    out = np.arange(n, dtype=float)
    out.flags.writeable = False
    return out


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """``sum_k a_k b_k`` of two 1-D float arrays, without BLAS.

    ``numpy.dot`` on long vectors calls the threaded BLAS ``ddot``; on a shared, loaded machine
    its threads cost 20-40 times the arithmetic (measured: 5.6 ms against 0.13 ms of CPU for
    186k points).  ``einsum`` runs the same sum in one thread.  Any summation order is within
    the recursive-summation bound ``gamma_n sum |a_k b_k|`` (Higham, section 3.1) that the
    ledgers charge.
    """
    return float(np.einsum("i,i->", a, b))
