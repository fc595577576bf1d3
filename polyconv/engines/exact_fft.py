"""Exact integer convolution by float FFT and rounding, whole or split into limbs.

If a float computation ``c'`` of an integer product ``c`` satisfies ``|c' - c| < 1/2`` everywhere,
rounding ``c'`` recovers ``c`` exactly.  Whether that holds is the caller's business: it comes from
a certificate (:func:`polyconv.numerics.bounds.fft_error_bound`, Percival 2003) or an a-posteriori
check.

Limb split (the "splitting" of D. E. Knuth, TAOCP vol. 2, 4.3.3, applied coefficientwise; see also
Brent & Zimmermann, *Modern Computer Arithmetic*, section 3.3.2): write every coefficient in
balanced base ``2^b``, ``x_i = sum_j x_ij 2^(b j)`` with ``|x_ij| <= 2^(b-1)``, so that
``c_k = sum_m 2^(b m) sum_(j+l=m) (A_j * B_l)_k`` where ``A_j = (x_ij)_i``.  Each inner sum is a
convolution of small integers, computed exactly by FFTs when the bound allows; the transforms of
all limb sequences are taken once and the sums formed in the frequency domain, so the cost is
``ka + kb`` forward and ``ka + kb - 1`` inverse real transforms.  The digits and the exact
recombination (a carry propagation in int64, then one byte conversion per coefficient) are
:mod:`polyconv.engines._limbs`'s.
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics import bounds
from ..numerics import transforms as tf
from ..numerics.limits import FLOAT_EXACT_LIMIT
from . import _intpack
from ._common import INTEGER_KINDS, Engine, Job, Option
from ._limbs import recombine_int64, recombine_objects, split_limbs
from .fft import convolve_fft


def convolve_rounded(a: np.ndarray, b: np.ndarray, n_fft: int,
                     keep: int | None = None, threads: int = 1) -> np.ndarray:
    """Float FFT product of integer sequences rounded to the nearest integers (int64).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, integer or float arrays holding integers exactly representable in float64.
    n_fft : int
        Transform length, ``>= n1 + n2 - 1`` (a power of two on the certified path).
    keep : int, optional
        Return only the first ``keep`` coefficients.
    threads : int
        Threads the float product may use (the arithmetic, hence the bound, is the same).

    Returns
    -------
    numpy.ndarray
        int64, length ``min(keep, n1 + n2 - 1)``.  Exact only if the caller has certified that
        the float error is below 1/2 and every ``|c_k| < 2^53``.  The float product is
        :func:`polyconv.engines.fft.convolve_fft`'s.
    """
    count = a.shape[0] + b.shape[0] - 1
    if keep is not None:
        count = min(count, keep)
    product = convolve_fft(a.astype(np.float64), b.astype(np.float64), n_fft, count, threads)
    return np.rint(product).astype(np.int64)


def convolve_limbs(a: np.ndarray, b: np.ndarray, limb_bits: int, limbs_a: int, limbs_b: int,
                   n_fft: int, keep: int | None = None, as_int64: bool = False) -> np.ndarray:
    """Exact integer product by limb-split float FFTs (first ``keep`` coefficients if given).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, int64, uint64 or object arrays of integers.
    limb_bits : int
        ``b``, at most 30.  The caller guarantees, from an error bound on the sums of
        ``min(limbs_a, limbs_b)`` limb products at length ``n_fft``, that every rounded limb
        product is exact (:func:`polyconv.numerics.bounds.limb_error_bound`).
    limbs_a, limbs_b : int
        Limb counts, at least :func:`polyconv.engines._limbs.limb_count` of each operand's
        largest magnitude.
    n_fft : int
        Transform length ``>= n1 + n2 - 1``.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    as_int64 : bool
        The caller proved ``|c_k| < 2^63``: recombine in int64 and return int64.

    Returns
    -------
    numpy.ndarray
        The exact ``c_k``: int64 if ``as_int64``, else an object array of Python ints.
    """
    parts = limb_parts(a, b, limb_bits, limbs_a, limbs_b, n_fft, keep)
    if as_int64:
        return recombine_int64(parts, limb_bits)
    return recombine_objects(parts, limb_bits)


def limb_parts(a: np.ndarray, b: np.ndarray, limb_bits: int, limbs_a: int, limbs_b: int,
               n_fft: int, keep: int | None = None) -> np.ndarray:
    """The exact limb products ``P_m = sum_(j+l=m) A_j * B_l`` as int64 rows.

    ``c = sum_m P_m 2^(b m)``.  All limb spectra are taken in two batched transforms and the sums
    formed in the frequency domain (``limbs_a + limbs_b`` forward, ``limbs_a + limbs_b - 1``
    inverse real transforms).  Same preconditions as :func:`convolve_limbs`.
    """
    count = a.shape[0] + b.shape[0] - 1
    if keep is not None:
        count = min(count, keep)
    spectra_a = tf.rfft(tf.zero_padded(split_limbs(a, limb_bits, limbs_a), n_fft), -1, 1)
    spectra_b = tf.rfft(tf.zero_padded(split_limbs(b, limb_bits, limbs_b), n_fft), -1, 1)
    sums = np.zeros((limbs_a + limbs_b - 1, spectra_a.shape[1]), dtype=np.complex128)
    for j in range(limbs_a):
        sums[j:j + limbs_b] += spectra_a[j] * spectra_b
    return np.rint(tf.irfft(sums, n_fft, -1, 1)[:, :count]).astype(np.int64)


def is_power_of_two(m: int) -> bool:
    """True for ``m = 2^e`` with ``e >= 1``."""
    return m >= 2 and m & (m - 1) == 0


def centered_residues(x: np.ndarray, modulus: int) -> np.ndarray:
    """Residues in ``[0, m)`` moved to ``(-m/2, m/2]`` (int64): half the magnitude to split."""
    x = x.astype(np.int64)
    return np.where(x > modulus // 2, x - np.int64(modulus), x)


def convolve_limbs_mod(a: np.ndarray, b: np.ndarray, modulus: int, limb_bits: int,
                       limbs_a: int, limbs_b: int, n_fft: int,
                       keep: int | None = None) -> np.ndarray:
    """Product modulo ``m`` by limb-split float FFTs, recombined in modular int64 arithmetic.

    Operands are residues in ``[0, m)`` for ``m < 2^31``, an odd ``m < 2^62`` or ``m = 2^e <=
    2^62``; they are centred (:func:`centered_residues`), split and multiplied exactly limb by
    limb (:func:`limb_parts`, certified by the caller's bound), and ``c mod m = sum_m (P_m mod m)
    (2^(b m) mod m) mod m`` is formed without big integers: plain int64 products below
    ``2^62`` for ``m < 2^31``, Montgomery reduction (:class:`polyconv.engines._intpack.Montgomery`)
    for odd ``m`` above, and wrapping int64 arithmetic (exact modulo ``2^64``) for ``m = 2^e``.

    Returns
    -------
    numpy.ndarray
        int64 in ``[0, m)``, length ``min(keep, n1 + n2 - 1)``.
    """
    parts = limb_parts(centered_residues(a, modulus), centered_residues(b, modulus), limb_bits,
                       limbs_a, limbs_b, n_fft, keep)
    if is_power_of_two(modulus):
        # 2^e divides 2^64: the sum in wrapping int64 is right modulo 2^64, so its low e bits are
        return recombine_int64(parts, limb_bits) & np.int64(modulus - 1)
    if modulus < 2**31:
        # every (P_j mod m) (2^(bj) mod m) is below 2^62 - 2^59: up to 8 of them add up in int64
        # before the single final reduction
        weights = np.array([pow(2, limb_bits * j, modulus) for j in range(parts.shape[0])],
                           dtype=np.int64)
        reduced = _float_mod(parts, modulus)
        acc = np.zeros(parts.shape[1], dtype=np.int64)
        for start in range(0, parts.shape[0], 8):
            block = np.einsum("j,jk->k", weights[start:start + 8], reduced[start:start + 8])
            acc = _float_mod(acc + block, modulus) if start else block
        return _float_mod(acc, modulus)
    # Montgomery needs residues in [0, m).  A part may be as low as -2^53 while m can be as small
    # as 2^31, so P + m is not always enough: reduce by integer division (floor mod, exact in
    # int64) unless every part is known to lie above -m (m > 2^53 > |P|)
    mont = _intpack.Montgomery(modulus)
    acc = np.zeros(parts.shape[1], dtype=np.uint64)
    m64 = np.int64(modulus)
    for j in range(parts.shape[0]):
        if modulus > FLOAT_EXACT_LIMIT:
            residue = np.where(parts[j] < 0, parts[j] + m64, parts[j])
        else:
            residue = np.remainder(parts[j], m64)
        acc += mont.times(residue.view(np.uint64), mont.constant(pow(2, limb_bits * j, modulus)))
        acc -= np.where(acc >= mont.m, mont.m, np.uint64(0))
    return acc.view(np.int64)


def _float_mod(x: np.ndarray, modulus: int) -> np.ndarray:
    """``x mod m`` for int64 ``|x| < 2^63`` and ``m < 2^31`` without integer division.

    The quotient ``floor(x / m)`` is estimated in float64 (``x`` rounded to 53 bits: the estimate
    is off by at most one since ``|x| 2^-52 < m``), the remainder ``x - q m`` is exact in int64,
    and one correction step each way lands in ``[0, m)``.
    """
    m = np.int64(modulus)
    q = np.floor(x.astype(np.float64) * (1.0 / modulus)).astype(np.int64)
    r = x - q * m
    r += np.where(r < 0, m, np.int64(0))
    r -= np.where(r >= m, m, np.int64(0))
    return r


# ----------------------------------------------------------------------------- registry records
#
# Costs per row, ``F`` the float model at the power-of-two length ``N``: rounded
# ``t = c0 + s F + c_pt N (+ check)``; limbs ``t = c0 + s F T / 3 + c_pt N (ka + kb)`` for
# ``T = 2 (ka + kb) - 1`` transforms.

#: Above this float-FFT error bound a "check" certificate is not even attempted (the limit decides
#: speed only: a failed check recomputes with the fallback, so correctness never rests on it).
#: Argument: the check passes iff the true error is below 1/2; the true error is at most
#: bound / r, with r the bound/observed ratio.  The smallest r measured over every length
#: 2^1..2^14 and magnitude 2^10..2^26 whose bound lies in 0.3..200, on all +max, alternating and
#: mixed inputs, is 36.6 (n = 2^9, 18 bits; ``bench/exact_error_ratio.py --check-limit``,
#: bench/RESULTS.md), so the check is expected to pass below 36.6 / 2 = 18.3; 12 keeps a further
#: factor 1.5 for inputs worse than those measured.  Random inputs sit 10^3-10^4 below the bound.
CHECK_BOUND_LIMIT = 12.0


def rounded_option(job: Job) -> Option | str:
    """The rounded float FFT: certified by the error bound (< 1/2) or, for the full product, by
    a random-evaluation check (bound below :data:`CHECK_BOUND_LIMIT`)."""
    f = job.facts
    if not (job.bound < FLOAT_EXACT_LIMIT and max(f.max_a, f.max_b) < FLOAT_EXACT_LIMIT):
        # (a zero operand makes the bound 0 whatever the other holds: both must be exact)
        return (f"the product's coefficients reach {job.bound.bit_length()} bits or an operand "
                f"{max(f.max_a, f.max_b).bit_length()} bits, and float64 holds 53; use "
                "method='auto', 'limbs' or 'kronecker'")
    n = job.n_pow2
    err = bounds.fft_error_bound(f.norm_a, f.norm_b, n) if math.isfinite(f.norm_a) else math.inf
    if err < 0.5 and bounds.TWIDDLE_CERTIFIED:
        certificate, note = "bound", f"float FFT error bound {err:.3g} < 1/2 (Percival 2003)"
    elif err < CHECK_BOUND_LIMIT and not job.circular:  # the check needs the full product
        certificate = "check"
        note = (f"float FFT error bound {err:.3g} >= 1/2: rounded result accepted only if a "
                "random-evaluation check passes")
    elif math.isinf(err):
        return ("the operands' norms were not computed for a product this small (direct "
                "summation is faster), so no float error bound certifies it; use method='auto'")
    else:
        return (f"the float error bound {err:.3g} is too large to certify the rounded product; "
                "use method='auto', 'limbs' or 'kronecker'")
    c = job.costs["exact"]
    check = c["check_per_point"] * (job.n1 + job.n2 + job.full) if certificate == "check" else 0.0
    k = c["rounded"]
    seconds = k["overhead"] + job.rows * (job.float_cost * k["scale"] + k["per_point"] * n + check)
    return Option(seconds, certificate, note,
                  {"transform_length": n, "error_bound": err, "circular": job.circular})


def run_rounded(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    return convolve_rounded(a, b, plan.transform_length, keep)


def limbs_supported(m: int | None) -> bool:
    """Moduli the modular limb recombination handles: below 2^31, odd below 2^62, or powers of
    two up to 2^62 (None: exact products)."""
    return m is None or m < 2**31 or (m % 2 == 1 and m < 2**62) or (
        is_power_of_two(m) and m <= 2**62)


def limbs_option(job: Job) -> Option | str:
    """Limb split of float FFTs, each limb product certified by the bound; with a modulus the
    residues are centred and the limb products recombined modulo m in int64."""
    f, m, n = job.facts, job.modulus, job.n_pow2
    if not limbs_supported(m):
        return "limbs takes moduli below 2^31, odd moduli below 2^62 or powers of two to 2^62"
    if not bounds.TWIDDLE_CERTIFIED:
        return f"limbs rests on the error bound, not issued here ({bounds.TWIDDLE_NOTE})"
    if m is not None:
        half = m // 2 + 1
        limbs = bounds.choose_limbs(min(f.max_a, half), min(f.max_b, half), job.n1, job.n2, n,
                                    norm_a=f.centred_norm_a, norm_b=f.centred_norm_b)
    else:
        limbs = bounds.choose_limbs(f.max_a, f.max_b, job.n1, job.n2, n)
        if limbs is not None and limbs[1] == 1 and limbs[2] == 1:
            return "one limb per operand suffices: that is method='fft-exact'"
    if limbs is None:  # choose_limbs caps the count at 12
        return "no certified limb size for these magnitudes; use 'kronecker'"
    bits, ka, kb = limbs
    c = job.costs["exact"]
    if m is not None:
        wide = m >= 2**31 and not is_power_of_two(m)  # Montgomery recombination
        k = c.get("limbs_mod_wide", c["limbs_mod"]) if wide else c["limbs_mod"]
    else:
        k = c["limbs"]
    transforms = (ka + kb) + (ka + kb - 1)
    seconds = k["overhead"] + job.rows * (job.float_cost * transforms / 3 * k["scale"]
                                          + k["per_point"] * n * (ka + kb))
    return Option(seconds, "bound", f"{ka}+{kb} limbs of {bits} bits, each limb product "
                  "certified < 1/2", {"transform_length": n, "limb_bits": bits, "limbs_a": ka,
                                      "limbs_b": kb, "circular": job.circular})


def run_limbs(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    bits, ka, kb = plan.setting("limb_bits"), plan.setting("limbs_a"), plan.setting("limbs_b")
    if plan.modulus is not None:
        return convolve_limbs_mod(a, b, plan.modulus, bits, ka, kb, plan.transform_length, keep)
    return convolve_limbs(a, b, bits, ka, kb, plan.transform_length, keep,
                          as_int64=plan.setting("product_int64", False))


ROUNDED = Engine("fft-exact", INTEGER_KINDS, rounded_option, run_rounded, exact=True)
LIMBS = Engine("limbs", INTEGER_KINDS, limbs_option, run_limbs, exact=True, reduces_modulus=True)
