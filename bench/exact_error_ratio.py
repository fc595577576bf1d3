"""Bound / observed error of float FFT products on adversarial 16-bit x 16-bit inputs.

Run: python bench/exact_error_ratio.py [max_log2n] [--limbs | --twiddles]  (markdown tables; ~1
minute to 2^20).  Float products run through polyconv.numerics.transforms (the library polyconv
uses).
Also measures the twiddle error of every transform library present (transforms of a unit
impulse vs roots of unity from exact reference angles, checked against mpmath); ``--twiddles``
prints only that table.
With ``--limbs``: the limb engine's summed parts (sum_j A_j * B_(m-j) formed in the
frequency domain, one inverse transform) against
:func:`polyconv.numerics.bounds.limb_error_bound`, with every limb digit at its extreme.
With ``--check-limit``: the smallest bound/observed ratio over every length 2^1..2^14 and
magnitude 2^10..2^26 whose bound lies in the "check" range (0.3..200), through the engine's own
float product at the chooser's transform length (what ``engines.exact_fft.CHECK_BOUND_LIMIT``
rests on).
"""

from __future__ import annotations

import sys

import numpy as np

from polyconv.engines.kronecker import convolve_kronecker
from polyconv.numerics import bounds
from polyconv.numerics import transforms as tf

M = 2**16 - 1


def cases(n: int, rng: np.random.Generator) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    ones = np.full(n, M, dtype=np.int64)
    alt = ones * np.where(np.arange(n) % 2 == 0, 1, -1)
    signs = ones * rng.choice([-1, 1], n)
    uniform = rng.integers(-M, M, n, endpoint=True)
    return {"all +max": (ones, ones), "alternating": (alt, alt), "+max * alternating": (ones, alt),
            "random signs at max": (signs, ones * rng.choice([-1, 1], n)),
            "uniform": (uniform, rng.integers(-M, M, n, endpoint=True))}


def observed_error(a: np.ndarray, b: np.ndarray, n_fft: int) -> float:
    fa = tf.rfft(tf.zero_padded(a.astype(float), n_fft), -1, 1)
    fb = tf.rfft(tf.zero_padded(b.astype(float), n_fft), -1, 1)
    approx = tf.irfft(fa * fb, n_fft, -1, 1)[: a.shape[0] + b.shape[0] - 1]
    exact = convolve_kronecker(a, b, as_int64=True)
    return float(np.max(np.abs(approx - exact.astype(np.longdouble))))


#: pi to 40 digits (mpmath.mp.pi with mp.dps = 45): reference angles in long double
#: (64-bit mantissa) carry an error near 2^-64, a thousandth of the float64 eps measured here.
#: The earlier reference used float64 ``np.pi``, whose error (1.2e-16 relative) alone made the
#: reported twiddle error ~1.4 eps too large at angles near 2 pi.
PI_LONG = np.longdouble("3.141592653589793238462643383279502884197")


def reference_roots(n_fft: int) -> tuple[np.ndarray, np.ndarray]:
    """``cos, sin`` of ``-2 pi k / N`` in long double from the exact-to-2^-64 angle."""
    k = np.arange(n_fft, dtype=np.longdouble)
    angle = -2 * PI_LONG * k / np.longdouble(n_fft)
    return np.cos(angle), np.sin(angle)


def check_reference(n_fft: int, samples: int = 200) -> float:
    """Largest gap (in eps) between the long double roots and mpmath's at random indices."""
    import mpmath

    mpmath.mp.dps = 40
    cos_l, sin_l = reference_roots(n_fft)
    rng = np.random.default_rng(n_fft)
    worst = 0.0
    for k in rng.integers(0, n_fft, samples):
        angle = -2 * mpmath.pi * int(k) / n_fft
        gap = max(abs(_exact(cos_l[k]) - mpmath.cos(angle)),
                  abs(_exact(sin_l[k]) - mpmath.sin(angle)))
        worst = max(worst, float(gap) / 2.0**-53)
    return worst


def _exact(value: np.longdouble):
    """The long double's exact value as an mpmath number."""
    import mpmath

    num, den = value.as_integer_ratio()
    return mpmath.mpf(num) / den


def twiddle_errors(n_fft: int, kernels=None) -> dict[str, float]:
    """Worst deviation (in eps = 2^-53) of the roots of unity as the transforms produce them.

    Forward complex and real transforms of a unit impulse at index 1 return ``w^k``
    (``w = e^{-2 pi i / N}``); the inverse complex transform of it returns ``w^-k / N`` and the
    inverse real transform ``2 cos(2 pi k / N) / N`` (scaled back exactly: ``N`` is a power of
    two).  ``kernels``: ``(rfft, irfft, fft, ifft)`` with polyconv.numerics.transforms' signatures
    (default: the library polyconv runs).
    """
    rfft, irfft, fft, ifft = kernels or (tf.rfft, tf.irfft, tf.fft, tf.ifft)
    cos_r, sin_r = reference_roots(n_fft)
    impulse = np.zeros(n_fft)
    impulse[1] = 1.0
    eps = 2.0**-53

    def dev(re, im, m):
        return float(max(np.max(np.abs(re - cos_r[:m])), np.max(np.abs(im - sin_r[:m])))) / eps

    out = {}
    got = fft(impulse.astype(complex), -1, 1)
    out["fft"] = dev(got.real, got.imag, n_fft)
    got = ifft(impulse.astype(complex), -1, 1) * n_fft
    out["ifft"] = dev(got.real, -got.imag, n_fft)
    got = rfft(impulse, -1, 1)
    out["rfft"] = dev(got.real, got.imag, got.shape[-1])
    spec = np.zeros(n_fft // 2 + 1, dtype=complex)
    spec[1] = 1.0
    got = irfft(spec, n_fft, -1, 1) * (n_fft / 2)
    out["irfft"] = float(np.max(np.abs(got - cos_r))) / eps
    return out


def library_kernels() -> dict[str, tuple]:
    """The transform libraries present: polyconv's own choice, and the others it can run."""
    libs = {tf.LIBRARY: None}
    if tf.LIBRARY == "ducc0" and tf._pp is not None:
        libs["pocketfft-scipy"] = tf._DIRECT
    return libs


def limb_rows(top: int) -> None:
    """Summed limb parts of the limb engine at the limb sizes the chooser picks for 30-bit
    operands (centred residues mod 998244353), digits at +max, alternating, and random signs."""
    rng = np.random.default_rng(7)
    print("| log2 n | limbs | case | observed max error | bound | bound / observed |")
    print("|---|---|---|---|---|---|")
    for lg in range(10, top + 1):
        n = 1 << lg
        n_fft = 2 * n
        half = 998244353 // 2 + 1
        bits, ka, kb = bounds.choose_limbs(half, half, n, n, n_fft)
        digit = 2 ** (bits - 1)
        patterns = {"digits +max": np.full((ka, n), digit),
                    "alternating": np.tile(digit * np.where(np.arange(n) % 2 == 0, 1, -1),
                                           (ka, 1)),
                    "random signs": digit * rng.choice([-1, 1], (ka, n))}
        bound = bounds.limb_error_bound(bits, ka, kb, n, n, n_fft)
        for name, limbs in patterns.items():
            spectra = tf.rfft(tf.zero_padded(limbs.astype(float), n_fft), -1, 1)
            sums = np.zeros((2 * ka - 1, spectra.shape[1]), dtype=complex)
            for j in range(ka):
                sums[j:j + ka] += spectra[j] * spectra
            approx = tf.irfft(sums, n_fft, -1, 1)[:, : 2 * n - 1]
            err = 0.0
            for m in range(2 * ka - 1):
                exact = sum(convolve_kronecker(limbs[j], limbs[m - j], as_int64=True)
                            for j in range(max(0, m - ka + 1), min(m, ka - 1) + 1))
                err = max(err, float(np.max(np.abs(approx[m] - exact.astype(np.longdouble)))))
            print(f"| {lg} | {ka} x {bits} bits | {name} | {err:.3g} | {bound:.3g} | "
                  f"{bound / err:.1f} |", flush=True)


def check_limit_rows() -> None:
    """Worst bound/observed ratios where a "check" certificate may be planned (bound >= 1/2)."""
    from polyconv.engines._common import power_of_two_at_least
    from polyconv.engines.fft import convolve_fft

    rows = []
    for lg in range(1, 15):
        n = 1 << lg
        n_fft = power_of_two_at_least(2 * n - 1)
        for bits in range(10, 27):
            top = 2**bits - 1
            ones = np.full(n, top, dtype=np.int64)
            alt = ones * np.where(np.arange(n) % 2 == 0, 1, -1)
            bound = bounds.fft_error_bound(bounds.norm2_upper(ones), bounds.norm2_upper(ones),
                                           n_fft)
            if not 0.3 <= bound <= 200:
                continue
            for name, (a, b) in {"all +max": (ones, ones), "alternating": (alt, alt),
                                 "+max * alternating": (ones, alt)}.items():
                approx = convolve_fft(a.astype(float), b.astype(float), n_fft, 2 * n - 1, 1)
                exact = convolve_kronecker(a, b, as_int64=True).astype(np.longdouble)
                err = float(np.max(np.abs(approx.astype(np.longdouble) - exact)))
                rows.append((bound / err if err else float("inf"), lg, bits, name, err, bound))
    rows.sort()
    print("| log2 n | bits | case | observed max error | bound | bound / observed |")
    print("|---|---|---|---|---|---|")
    for ratio, lg, bits, name, err, bound in rows[:8]:
        print(f"| {lg} | {bits} | {name} | {err:.3g} | {bound:.3g} | {ratio:.1f} |")
    print(f"\n{len(rows)} cases, smallest ratio {rows[0][0]:.1f}")


def main() -> None:
    if "--check-limit" in sys.argv:
        check_limit_rows()
    elif "--twiddles" in sys.argv:
        sys.argv.remove("--twiddles")
        twiddle_table(int(sys.argv[1]) if len(sys.argv) > 1 else 22)
        return
    if "--limbs" in sys.argv:
        sys.argv.remove("--limbs")
        limb_rows(int(sys.argv[1]) if len(sys.argv) > 1 else 18)
        return
    top = int(sys.argv[1]) if len(sys.argv) > 1 else 20
    rng = np.random.default_rng(20260501)
    print("| log2 n | N | case | observed max error | bound | bound / observed |")
    print("|---|---|---|---|---|---|")
    for lg in range(10, top + 1):
        n = 1 << lg
        n_fft = 2 * n
        for name, (a, b) in cases(n, rng).items():
            bound = bounds.fft_error_bound(bounds.norm2_upper(a), bounds.norm2_upper(b), n_fft)
            err = observed_error(a, b, n_fft)
            ratio = bound / err if err > 0 else float("inf")
            print(f"| {lg} | 2^{lg + 1} | {name} | {err:.3g} | {bound:.3g} | {ratio:.1f} |",
                  flush=True)
    print()
    twiddle_table(top + 1)


def twiddle_table(top: int) -> None:
    """Markdown table of the twiddle errors of every library present, N = 2^4 .. 2^top."""
    libs = library_kernels()
    print(f"reference check (long double vs mpmath, 200 indices at 2^{top}): "
          f"{check_reference(1 << top):.4f} eps")
    print("| library | N | fft | ifft | rfft | irfft |")
    print("|---|---|---|---|---|---|")
    for name, kernels in libs.items():
        version = tf.LIBRARY_VERSION if kernels is None else __import__("scipy").__version__
        for lg in range(4, top + 1):
            e = twiddle_errors(1 << lg, kernels)
            print(f"| {name} {version} | 2^{lg} | {e['fft']:.2f} | {e['ifft']:.2f} | "
                  f"{e['rfft']:.2f} | {e['irfft']:.2f} |", flush=True)


if __name__ == "__main__":
    main()
