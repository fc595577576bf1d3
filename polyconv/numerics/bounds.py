"""Error bounds, bit sizes and certificates for exact integer products.

A-priori bound (Percival, "Rapid multiplication modulo the sum and difference of highly composite
numbers", Math. Comp. 72 (2003) 387-395, Theorem 5.1; restated in Brent & Zimmermann, *Modern
Computer Arithmetic*, 2010, section 3.3.2): for a radix-2 complex FFT of length ``N = 2^n``,
unit roundoff ``eps = 2^-53`` and precomputed twiddles with error at most ``beta``, the computed
cyclic convolution ``z'`` of ``x`` and ``y`` satisfies

    max_k |z'_k - z_k| <= ||x||_2 ||y||_2 [ (1+eps)^(3n) (1+sqrt(5) eps)^(3n+1) (1+beta)^(3n) - 1 ].

(the ``sqrt(5) eps`` is the error of a complex multiplication, Brent, Percival & Zimmermann, Math.
Comp. 76 (2007)).  :func:`fft_error_bound` evaluates it in exact rational arithmetic and rounds up.

Assumptions for the FFT library (:mod:`polyconv.numerics.transforms`: ducc0, else scipy's
pocketfft), which
is mixed-radix, not a plain radix-2 transform:

* the certified path uses power-of-two lengths only, so the library runs radix-4 (ducc0 also
  radix-8) passes and at most one radix-2 pass.  A radix-``2^r`` butterfly is ``r`` radix-2
  levels whose inner twiddles are ``+-1, +-i`` (exact) or ``(+-1 +-i)/sqrt 2`` (rounded to
  within ``eps/2 < beta``), so we take the level count ``n = log2 N`` of the radix-2 theorem as
  covering it;
* the real transforms (``rfft``/``irfft``) are a half-length complex transform plus one twiddled
  post-processing pass: at most ``n`` levels again, so the bound at length ``N`` is used;
* the fused circular product (:func:`polyconv.numerics.transforms.circular_product`, ducc0's
  ``convolve_axis``, which the fft and overlap-add engines call when one operand is 1-D) runs
  the same real (or complex) FFT plan forward on both operands and backward on their product,
  one complex multiplication per bin (``sqrt 5 eps`` covers it, with or without a fused
  multiply-add), and scales the kernel's spectrum instead of the output by ``1/N`` (exact for
  the power-of-two lengths of the certified path); so the same theorem and constants apply.
  Its results differ from separate calls' in the last bits (rounding order of the product);
  tests/pipeline/test_float_fused.py holds both within the bound against exact products;
* the negacyclic real product (:mod:`polyconv.numerics.negacyclic`, which the fft engine runs
  for two real 1-D operands at ``N = 2^13 .. 2^21``: three complex transforms of length
  ``N/2`` with twist and twiddle tables of error at most 1.25 eps) has along each transform at
  most the roundings of ``log2 N`` of the theorem's levels whenever ``(1+sqrt5 eps)(1+1.25
  eps)^2 <= (1+eps)(1+beta)``, checked exactly at import (else it is not used); so the same
  bound at the same length ``N`` applies;
* twiddle error ``beta`` = :data:`TWIDDLE_ERROR`, measured per library and version range
  (:data:`MEASURED_TWIDDLE_ERROR`) from unit-impulse responses, which return the roots of unity
  as the transform produces them, against roots at exact reference angles (long double from a
  40-digit pi, checked against mpmath to 0.003 eps; ``python bench/exact_error_ratio.py
  --twiddles``, bench/RESULTS.md compiled section).  A real transform of length ``N`` is a
  complex one of length ``N/2`` plus a post-processing pass with its own twiddles.  The rfft of
  an impulse at index 1 passes the complex part trivially and exposes the post-processing
  twiddles alone: worst 1.75 eps (ducc0 0.42.0) and 2.15 eps (pocketfft in scipy 1.17.1) over
  ``N = 2^4 .. 2^22``.  Complex transforms of an impulse at index 1 multiply each output by a
  product of one twiddle per level, so their error bounds the tables' from above: worst 4.69 eps
  (ducc0) and 5.02 eps (pocketfft) over ``N/2 = 2^4 .. 2^21``.  ``beta`` is the larger of the
  two rounded up: 5 eps (ducc0), 6 eps (pocketfft).  (The irfft of an impulse, 8.37 and 5.56 eps
  at worst, sums two such complex paths and so measures no single twiddle.)  The earlier 4 eps
  for pocketfft came from a reference built on float64 ``np.pi``.  Measured, not proven.
* with any other library or version the "bound" certificate is not issued
  (:data:`TWIDDLE_CERTIFIED` is False; :data:`TWIDDLE_NOTE` says why): the "check" certificate or
  the exact engines take over.

These are assumptions, not theorems about pocketfft; the measured worst errors on adversarial
inputs stay 36-110x below the bound (bench/RESULTS.md, exact engines section), and the
a-posteriori checks of :mod:`polyconv.numerics.checks` (modular rescue, random evaluation) can
back any result.
"""

from __future__ import annotations

import math
from fractions import Fraction
from functools import lru_cache

import numpy as np

from .limits import max_abs

EPS = Fraction(1, 2**53)
#: Per library: (first version measured, first version not measured, twiddle error), see the
#: module notes (versions as tuples of ints).
MEASURED_TWIDDLE_ERROR = {
    "ducc0": ((0, 42), (0, 43), 5 * EPS),
    "pocketfft-scipy": ((1, 17), (1, 18), 6 * EPS),
}


def _twiddle_error_here() -> tuple[bool, Fraction, str]:
    """``(certified, beta, note)`` for the library :mod:`polyconv.numerics.transforms` runs."""
    from . import transforms

    entry = MEASURED_TWIDDLE_ERROR.get(transforms.LIBRARY)
    try:
        version = tuple(int(v) for v in transforms.LIBRARY_VERSION.split(".")[:2])
    except ValueError:
        version = ()
    if entry is None or not entry[0] <= version < entry[1]:
        return False, 9 * EPS, (f"{transforms.BACKEND}: twiddle error not measured for this "
                                "library or version, so no float FFT bound certificate")
    low, high, beta = entry
    return True, beta, (f"{transforms.LIBRARY} {'.'.join(map(str, low))}.x twiddle error "
                        f"{int(beta / EPS)} eps (measured)")


#: Whether float FFT products may carry a "bound" certificate with the running library.
TWIDDLE_CERTIFIED: bool
#: Twiddle error (relative to 1) of the running library, see the module notes.
TWIDDLE_ERROR: Fraction
#: What :data:`TWIDDLE_CERTIFIED` rests on, in words.
TWIDDLE_NOTE: str
TWIDDLE_CERTIFIED, TWIDDLE_ERROR, TWIDDLE_NOTE = _twiddle_error_here()
#: A rational upper bound of sqrt(5).
_SQRT5_UP = Fraction(2236067977500, 10**12) + Fraction(1, 10**11)


def _round_up(q: Fraction) -> float:
    """The smallest float ``>= q``."""
    f = float(q)
    return f if Fraction(f) >= q else math.nextafter(f, math.inf)


@lru_cache(maxsize=256)
def fft_error_factor(n_fft: int, beta: Fraction = TWIDDLE_ERROR, terms: int = 1) -> float:
    """``(1+eps)^(3n) (1+sqrt5 eps)^(3n+1) (1+beta)^(3n) (1+eps)^(terms-1) - 1`` for ``n =
    ceil(log2 n_fft)``, evaluated exactly and rounded up.

    ``terms > 1`` covers a frequency-domain sum ``sum_j X_j Y_j`` of that many pointwise products
    before one inverse transform: recursive summation gives each product a further relative error
    of at most ``(1+eps)^(terms-1) - 1`` (Higham, *Accuracy and Stability of Numerical
    Algorithms*, 2nd ed., section 4.2; a complex addition rounds each part, so its error is at
    most ``eps`` times the modulus of the sum), which joins the ``(1+sqrt5 eps)`` of the pointwise
    product in Percival's argument; the bound then scales with ``sum_j ||x_j|| ||y_j||``.
    """
    n = max(1, (n_fft - 1).bit_length())
    factor = ((1 + EPS) ** (3 * n + terms - 1) * (1 + _SQRT5_UP * EPS) ** (3 * n + 1)
              * (1 + beta) ** (3 * n))
    return _round_up(factor - 1)


def fft_error_bound(norm2_a: float, norm2_b: float, n_fft: int,
                    beta: Fraction = TWIDDLE_ERROR) -> float:
    """Rigorous bound on ``max_k |c'_k - c_k|`` for a float FFT product at length ``n_fft``.

    Parameters
    ----------
    norm2_a, norm2_b : float
        Upper bounds of the operands' Euclidean norms (see :func:`norm2_upper`).
    n_fft : int
        Transform length (a power of two on the certified path; others are rounded up).
    beta : Fraction
        Twiddle error bound; default :data:`TWIDDLE_ERROR`.

    Returns
    -------
    float
        Percival's bound (module notes), rounded upward.
    """
    # three floats multiplied with two roundings, each at most half an ulp: stepping up one ulp
    # after each multiplication keeps the result an upper bound of the exact product
    up = math.inf
    relative = math.nextafter(math.nextafter(float(norm2_a) * float(norm2_b), up)
                              * fft_error_factor(n_fft, beta), up)
    return math.nextafter(relative + fft_underflow_term(norm2_a, norm2_b, n_fft), up)


#: The smallest subnormal float64: no rounding in the subnormal range errs by more than half of it.
SUBNORMAL = 2.0**-1074


def fft_underflow_term(norm2_a: float, norm2_b: float, n_fft: int) -> float:
    """Absolute error that gradual underflow may add to a float FFT product of length ``N``.

    Percival's theorem assumes no underflow.  With it, every operation errs by at most a further
    ``eta = 2^-1075`` absolutely (the standard model ``fl(x op y) = (x op y)(1 + d) + e``,
    ``|e| <= eta``; Higham, *Accuracy and Stability*, 2nd ed., section 2.1).  A radix-2
    butterfly at most doubles the largest absolute error it receives and adds its own (a complex
    twiddle product and an addition: at most 4 eta per part), so a forward transform ends within
    ``4 N eta`` per bin; a bin of the exact spectrum is at most ``||x||_1 <= sqrt(N) ||x||_2``,
    so the pointwise product errs by at most ``4 N eta sqrt(N) (||a|| + ||b||) + 16 N^2 eta^2 +
    4 eta``; the inverse transform keeps that after its division by ``N`` and adds ``5 eta``.
    Twice that covers the cross terms with the relative errors: ``8 N^1.5 (||a|| + ||b||) eta +
    40 eta`` for ``N < 2^500``.  Below about 10^-290 unless the norms are near 10^300 or more:
    invisible next to any certified bound, but it keeps the bound rigorous for tiny operands.
    """
    n = 1 << max(1, (int(n_fft) - 1).bit_length())
    spread = 8.0 * n * math.sqrt(n) * (float(norm2_a) + float(norm2_b))
    return math.nextafter(math.ldexp(spread, -1075) + 40 * SUBNORMAL, math.inf)


def mixed_radix_levels_length(n_fft: int) -> int:
    """The power of two whose radix-2 level count we charge a pocketfft transform of ``n_fft``.

    ``2^ceil(log2 N)`` for a power of two; one level more otherwise (a radix-3 or -5 pass does a
    few more roundings per output than the radix-2 levels it replaces: a stated assumption).
    """
    power = 1 << max(0, (n_fft - 1).bit_length())
    return power if power == n_fft else 2 * power


def direct_error_bound(norm_a: float, norm_b: float, n_terms: int) -> float:
    """Max abs error of a directly summed convolution coefficient.

    ``|fl(sum a_i b_(k-i)) - c_k| <= gamma_m sum |a_i b_(k-i)| <= gamma_m ||a||_2 ||b||_2`` with
    ``m = n_terms`` and ``gamma_m = m u / (1 - m u)`` (Higham, *Accuracy and Stability of
    Numerical Algorithms*, 2nd ed., section 3.1; Cauchy-Schwarz for the last step).
    """
    m = max(int(n_terms), 1)
    gamma = m * 2.0**-53 / (1 - m * 2.0**-53)
    # gradual underflow: each of the m products and m - 1 sums errs by a further 2^-1075 at
    # most, carried through the later sums with a factor below 2 (standard model with underflow,
    # Higham section 2.1)
    relative = math.nextafter(math.nextafter(gamma * float(norm_a), math.inf) * float(norm_b),
                              math.inf)
    return math.nextafter(relative + 2 * m * SUBNORMAL, math.inf)


def convolution_error_bound(engine: str, norm_a: float, norm_b: float,
                            transform_length: int | None, n_terms: int) -> float:
    """Error bound of one float product by ``engine`` ("direct", "fft" or "overlap-add").

    fft: :func:`fft_error_bound` at :func:`mixed_radix_levels_length`; overlap-add: each output
    gathers at most two block products, so twice that at the block length; direct:
    :func:`direct_error_bound`.
    """
    if engine == "direct" or not transform_length:
        return direct_error_bound(norm_a, norm_b, n_terms)
    block = fft_error_bound(norm_a, norm_b, mixed_radix_levels_length(transform_length))
    return 2 * block if engine == "overlap-add" else block


def limb_norms(limb_bits: int, count: int, n: int, norm: float = math.inf) -> list[float]:
    """Upper bounds of ``||A_j||_2`` for the ``count`` balanced limbs of a length-``n`` sequence.

    Every digit has ``|d| <= 2^(b-1)``, so ``||A_j|| <= 2^(b-1) sqrt(n)``.  When ``||x||_2 <=
    norm`` is known, the top limb ``A_t = (x - L) / 2^(b t)`` (``t = count - 1``) with the lower
    part ``|L_i| <= 2^(b-1) (2^(b t) - 1) / (2^b - 1)`` also has ``||A_t|| <= (norm + sqrt(n)
    2^(b-1) (2^(b t) - 1) / (2^b - 1)) / 2^(b t)`` (triangle inequality), which is smaller for
    operands well inside their range.
    """
    root = math.sqrt(n) * (1 + 2**-50)
    crude = 2.0 ** (limb_bits - 1) * root
    out = [crude] * count
    if count > 1 and math.isfinite(norm):
        t = limb_bits * (count - 1)
        low = 2.0 ** (limb_bits - 1) * (2.0**t - 1) / (2.0**limb_bits - 1) * (1 + 2**-50)
        top = (norm + root * low) / 2.0**t * (1 + 2**-50)
        out[-1] = min(crude, top)
    return out


def limb_error_bound(limb_bits: int, limbs_a: int, limbs_b: int, n1: int, n2: int,
                     n_fft: int, norm_a: float = math.inf, norm_b: float = math.inf) -> float:
    """Bound on the error of each summed limb product of the limb-split engine.

    Part ``m`` is ``P_m = sum_j A_j * B_(m-j)``, formed as one frequency-domain sum of its ``k_m``
    pointwise products before one inverse transform: Percival's bound with the summation term of
    :func:`fft_error_factor` (``terms = k_m``), scaled by ``sum_j ||A_j|| ||B_(m-j)||`` with the
    limb norms of :func:`limb_norms` (``norm_a``, ``norm_b``: the operands' Euclidean norms when
    known).  Returns the largest over the parts.
    """
    norms_a = limb_norms(limb_bits, limbs_a, n1, norm_a)
    norms_b = limb_norms(limb_bits, limbs_b, n2, norm_b)
    worst = 0.0
    for m in range(limbs_a + limbs_b - 1):
        pairs = [(j, m - j) for j in range(limbs_a) if 0 <= m - j < limbs_b]
        scale = math.fsum(norms_a[j] * norms_b[i] for j, i in pairs) * (1 + 2**-50)
        bound = scale * fft_error_factor(n_fft, TWIDDLE_ERROR, len(pairs)) * (1 + 2**-50)
        worst = max(worst, bound)
    return math.nextafter(worst, math.inf)


def choose_limbs(max_a: int, max_b: int, n1: int, n2: int, n_fft: int,
                 max_limb_bits: int = 30, norm_a: float = math.inf,
                 norm_b: float = math.inf, max_limbs: int = 12) -> tuple[int, int, int] | None:
    """Largest limb size ``b`` (and the limb counts) whose limb products round exactly.

    Returns ``(limb_bits, limbs_a, limbs_b)`` with :func:`limb_error_bound` ``< 1/2`` (given the
    operands' norms when known), every summed part below ``2^53`` and at most ``max_limbs`` limbs
    in all, or None when no limb size qualifies.
    """
    for bits in range(max_limb_bits, 0, -1):
        ka = max(1, -(-(max_a.bit_length() + 1) // bits))
        kb = max(1, -(-(max_b.bit_length() + 1) // bits))
        if ka + kb > max_limbs:  # smaller limbs only need more of them
            return None
        part = min(ka, kb) * min(n1, n2) * 4 ** (bits - 1)
        if part < 2**52 and limb_error_bound(bits, ka, kb, n1, n2, n_fft, norm_a,
                                             norm_b) < 0.5:
            return bits, ka, kb
    return None


# ----------------------------------------------------------------------------- bit sizes


def bit_length_max(x: np.ndarray) -> int:
    """Bits of the largest magnitude: ``max_i |x_i|.bit_length()``."""
    return max_abs(x).bit_length()


def product_bound(a: np.ndarray, b: np.ndarray) -> int:
    """``min(n1, n2) max|a| max|b|``, a bound on every coefficient of ``a * b``."""
    return min(a.shape[-1], b.shape[-1]) * max_abs(a) * max_abs(b)


def product_bits(a: np.ndarray, b: np.ndarray) -> int:
    """DESIGN.md section 5's slot width: ``bits(max|a|) + bits(max|b|) + bits(min(n1,n2)) + 1``."""
    return bit_length_max(a) + bit_length_max(b) + min(a.shape[-1], b.shape[-1]).bit_length() + 1


def norm2_upper(x: np.ndarray) -> float:
    """An upper bound of ``||x||_2`` in float64, for any magnitudes (no underflow, no overflow).

    The entries are rounded to float64 and squared and summed in float64; the result is inflated
    by ``gamma_(n+2)``: a sum of ``n`` products has relative error at most ``n u / (1 - n u)``
    (Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 3.1), and the
    ``+2`` covers rounding the entries to float and the square root.  Plain numpy reductions
    (no BLAS call: a threaded BLAS right before FFTs slowed them here).

    Squares below ``2^-1022`` lose up to ``2^-1075`` each to underflow, and squares above
    ``2^1024`` overflow.  When the plain sum lies in ``[2^-900, inf)`` the underflow loss is at
    most ``n 2^-1075 <= n 2^-175`` of it, inside one more ``gamma_(n+2)``; otherwise the entries
    are first scaled by the power of two ``2^-e`` that brings the largest below 1 (exact, except
    entries pushed into the subnormal range, which lose at most ``2^-1075`` each: the sum of
    squares, at least 1/4, then loses at most ``3 n 2^-1075``, added back), and the root is
    scaled back by ``2^e``.
    """
    n = x.shape[0]
    xf = x.astype(np.float64)
    gamma = (n + 2) * 2.0**-53 / (1 - (n + 2) * 2.0**-53)
    with np.errstate(over="ignore", under="ignore"):
        total = float(np.add.reduce(xf * xf))
    if 2.0**-900 <= total < math.inf:
        return math.nextafter(math.sqrt(total * (1 + 3 * gamma)), math.inf)
    with np.errstate(invalid="ignore"):
        largest = float(np.max(np.abs(xf), initial=0.0))
    if largest == 0.0:
        return 0.0
    if not math.isfinite(largest):
        return math.inf
    exponent = math.frexp(largest)[1]
    scaled = np.ldexp(xf, -exponent)
    total = float(np.add.reduce(scaled * scaled)) + 3 * n * 2.0**-1074
    root = math.nextafter(math.sqrt(total * (1 + 2 * gamma)), math.inf)
    return math.nextafter(math.ldexp(root, exponent), math.inf)
