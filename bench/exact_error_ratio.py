"""Bound / observed error of float FFT products on adversarial 16-bit x 16-bit inputs.

Run: python bench/exact_error_ratio.py [max_log2n] [--limbs]   (markdown tables; ~1 minute to 2^20)
Also measures pocketfft's twiddle error (FFT of a unit impulse vs roots of unity in long double).
With ``--limbs``: the limb engine's summed parts (sum_j A_j * B_(m-j) formed in the frequency
domain, one inverse transform) against :func:`polyconv.bounds.limb_error_bound`, with every limb
digit at its extreme.
With ``--check-limit``: the smallest bound/observed ratio over every length 2^1..2^14 and
magnitude 2^10..2^26 whose bound lies in the "check" range (0.3..200), through the engine's own
float product at the chooser's transform length (what ``planning_exact.CHECK_BOUND_LIMIT``
rests on).
"""

from __future__ import annotations

import sys

import numpy as np
from scipy import fft as sfft

from polyconv import bounds
from polyconv.engines.kronecker import convolve_kronecker

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
    approx = sfft.irfft(sfft.rfft(a.astype(float), n_fft) * sfft.rfft(b.astype(float), n_fft),
                        n_fft)[: a.shape[0] + b.shape[0] - 1]
    exact = convolve_kronecker(a, b, as_int64=True)
    return float(np.max(np.abs(approx - exact.astype(np.longdouble))))


def twiddle_error(n_fft: int) -> float:
    impulse = np.zeros(n_fft)
    impulse[1] = 1.0
    k = np.arange(n_fft, dtype=np.longdouble)
    angle = -2 * np.pi * k / np.longdouble(n_fft)
    exact_re, exact_im = np.cos(angle), np.sin(angle)
    got = sfft.fft(impulse)
    err = np.maximum(np.abs(got.real - exact_re), np.abs(got.imag - exact_im))
    return float(np.max(err) / 2.0**-53)


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
            spectra = sfft.rfft(limbs.astype(float), n_fft, axis=-1)
            sums = np.zeros((2 * ka - 1, spectra.shape[1]), dtype=complex)
            for j in range(ka):
                sums[j:j + ka] += spectra[j] * spectra
            approx = sfft.irfft(sums, n_fft, axis=-1)[:, : 2 * n - 1]
            err = 0.0
            for m in range(2 * ka - 1):
                exact = sum(convolve_kronecker(limbs[j], limbs[m - j], as_int64=True)
                            for j in range(max(0, m - ka + 1), min(m, ka - 1) + 1))
                err = max(err, float(np.max(np.abs(approx[m] - exact.astype(np.longdouble)))))
            print(f"| {lg} | {ka} x {bits} bits | {name} | {err:.3g} | {bound:.3g} | "
                  f"{bound / err:.1f} |", flush=True)


def check_limit_rows() -> None:
    """Worst bound/observed ratios where a "check" certificate may be planned (bound >= 1/2)."""
    from polyconv.engines.fft import convolve_fft
    from polyconv.planning_exact import power_of_two_at_least

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
    print("| N | worst twiddle error (units of eps = 2^-53) |")
    print("|---|---|")
    for lg in range(10, top + 2):
        print(f"| 2^{lg} | {twiddle_error(1 << lg):.2f} |", flush=True)


if __name__ == "__main__":
    main()
