"""Polynomial algebra (polyconv.algebra) against python-flint, end to end from numpy arrays.

Both sides start from int64 numpy arrays and end with a numpy array (int64 when the values fit,
else Python ints), so each time includes conversion in, the operation, and conversion out, which
is what a numpy user pays.  Cases, for ``n`` from 2^10 up (``n`` is the output length):

* ``power``          ``a^4`` with ``len(a) = n/4``           flint: ``fmpz_poly ** 4``
* ``product``        16 factors of length ``n/16``            flint: the same balanced tree of ``*``
* ``inverse_series`` ``1/a`` to ``n`` terms, ``a[0] = 1``     flint: ``1/fmpz_series``,
                                                                     ``nmod_poly.inverse_series_trunc``
* ``poly_divmod``    ``a`` of length ``2n`` by a monic ``b`` of length ``n``   flint: ``divmod``

Settings: ``int16`` (exact integers, 16-bit random coefficients) and ``mod p`` (p = 998244353).
Exact ``inverse_series`` of 16-bit data has outputs of about ``16 i`` bits at degree ``i``
(quadratic total size, for any library), so it is capped at small ``n``; exact ``poly_divmod``
divides ``a = q b + r`` built from 16-bit ``q``, ``b``, ``r`` (a random ``a`` would have a
quotient of exponentially growing size).  Cells whose previous size took longer than the budget
are skipped.

A second table gives the products used by inverse_series and poly_divmod (mod p): the number of
convolve calls, their transform work in units of one full ``n x n`` product (from the logged
operand lengths), and the measured time divided by the time of one ``n x n`` product.

Run ``python bench/algebra_bench.py [--max-log 20] [--step 1] [--budget 20]``.  Timings are best of
a few repeats on this machine; nothing is asserted.
"""

from __future__ import annotations

import argparse
import heapq
import itertools
import time
from collections.abc import Callable

import flint
import numpy as np

from polyconv import convolve
from polyconv.algebra import counting_products, inverse_series, poly_divmod, power, product

P = 998244353
RNG = np.random.default_rng(2024)
OPS = ("power", "product", "inverse_series", "poly_divmod")
#: exact inverse_series output grows ~16 bits per term: keep it small
EXACT_INVERSE_MAX_LOG = 13


# ----------------------------------------------------------------------------- conversions


def to_numpy(coeffs, n: int) -> np.ndarray:
    """flint coefficients -> numpy, zero padded to ``n``: int64 when they fit, else objects."""
    values = [int(c) for c in coeffs]
    values += [0] * (n - len(values))
    try:
        return np.array(values, dtype=np.int64)
    except OverflowError:
        return np.array(values, dtype=object)


def poly(a: np.ndarray, modulus: int | None):
    if modulus is None:
        return flint.fmpz_poly(a.tolist())
    return flint.nmod_poly(a.tolist(), modulus)


# ----------------------------------------------------------------------------- the cases


def random_ints(n: int, first: int | None = None) -> np.ndarray:
    x = RNG.integers(-(2**15), 2**15, n, dtype=np.int64)
    if first is not None:
        x[0] = first
    return x


def case_power(n: int, modulus: int | None) -> tuple[Callable, Callable]:
    a = random_ints(n // 4)
    out = 4 * (n // 4 - 1) + 1

    def ours():
        return power(a, 4, modulus=modulus)

    def theirs():
        return to_numpy((poly(a, modulus) ** 4).coeffs(), out)

    return ours, theirs


def flint_tree(polys: list):
    """The balanced product tree of polyconv.algebra.product, with flint's multiplication."""
    counter = itertools.count()
    heap = [(p.length(), next(counter), p) for p in polys]
    heapq.heapify(heap)
    while len(heap) > 1:
        _, _, x = heapq.heappop(heap)
        _, _, y = heapq.heappop(heap)
        z = x * y
        heapq.heappush(heap, (z.length(), next(counter), z))
    return heap[0][2]


def case_product(n: int, modulus: int | None) -> tuple[Callable, Callable]:
    seqs = [random_ints(n // 16) for _ in range(16)]
    out = 16 * (n // 16 - 1) + 1

    def ours():
        return product(seqs, modulus=modulus)

    def theirs():
        return to_numpy(flint_tree([poly(s, modulus) for s in seqs]).coeffs(), out)

    return ours, theirs


def flint_inverse(a: np.ndarray, n: int, modulus: int | None) -> np.ndarray:
    if modulus is not None:
        return to_numpy(poly(a, modulus).inverse_series_trunc(n).coeffs(), n)
    cap = flint.ctx.cap
    flint.ctx.cap = max(cap, n)
    try:
        return to_numpy((1 / flint.fmpz_series(a.tolist(), prec=n)).coeffs(), n)
    finally:
        flint.ctx.cap = cap


def case_inverse(n: int, modulus: int | None) -> tuple[Callable, Callable]:
    a = random_ints(n, first=1)

    def ours():
        return inverse_series(a, n, modulus=modulus)

    def theirs():
        return flint_inverse(a, n, modulus)

    return ours, theirs


def division_operands(n: int, modulus: int | None) -> tuple[np.ndarray, np.ndarray]:
    b = random_ints(n)
    b[-1] = 1
    if modulus is not None:
        return random_ints(2 * n), b
    q, r = random_ints(n + 1), random_ints(n - 1)
    a = to_numpy((flint.fmpz_poly(q.tolist()) * flint.fmpz_poly(b.tolist())).coeffs(), 2 * n)
    a[: n - 1] += r
    return a, b


def case_divmod(n: int, modulus: int | None) -> tuple[Callable, Callable]:
    a, b = division_operands(n, modulus)

    def ours():
        return poly_divmod(a, b, modulus=modulus)

    def theirs():
        q, r = divmod(poly(a, modulus), poly(b, modulus))
        return to_numpy(q.coeffs(), n + 1), to_numpy(r.coeffs(), n - 1)

    return ours, theirs


CASES = {"power": case_power, "product": case_product, "inverse_series": case_inverse,
         "poly_divmod": case_divmod}


# ----------------------------------------------------------------------------- timing


def best_time(fn: Callable, budget: float) -> tuple[float, object]:
    """Best of up to 5 runs, fewer when one run is slow."""
    best, result, spent = float("inf"), None, 0.0
    for _ in range(5):
        t0 = time.perf_counter()
        result = fn()
        dt = time.perf_counter() - t0
        best, spent = min(best, dt), spent + dt
        if spent > budget / 4:
            break
    return best, result


def same(x, y) -> bool:
    if isinstance(x, tuple):
        return all(same(u, v) for u, v in zip(x, y, strict=True))
    return [int(v) for v in x] == [int(v) for v in y]


def comparison_table(logs: range, budget: float) -> None:
    print(f"{'operation':<15} {'setting':<8} {'n':>8} {'ours (s)':>10} {'flint (s)':>10} "
          f"{'ours/flint':>10}  agree")
    for op in OPS:
        for setting, modulus in (("int16", None), ("mod p", P)):
            slow = False
            for lg in logs:
                n = 2**lg
                label = f"{op:<15} {setting:<8} {'2^' + str(lg):>8}"
                too_big = op == "inverse_series" and modulus is None and lg > EXACT_INVERSE_MAX_LOG
                if slow or too_big:
                    print(f"{label} {'skipped':>10}")
                    continue
                ours, theirs = CASES[op](n, modulus)
                t_ours, r_ours = best_time(ours, budget)
                t_flint, r_flint = best_time(theirs, budget)
                ok = "yes" if same(r_ours, r_flint) else "NO"
                print(f"{label} {t_ours:10.4f} {t_flint:10.4f} {t_ours / t_flint:10.2f}  {ok}",
                      flush=True)
                slow = max(t_ours, t_flint) > budget / 4


# ----------------------------------------------------------------------------- product counts


def work_units(log: list, n: int) -> float:
    """Transform points of the logged products over those of one full n x n product."""
    points = 0
    for n1, n2, mode, length in log:
        if mode == "valid":
            points += max(n1, n2)
        else:
            full = n1 + n2 - 1
            points += full if length is None else min(full, 2 * length)
    return points / (2 * n)


def counts_table(logs: range, budget: float) -> None:
    print()
    print("products used (mod p); 'time / product' = time over one n x n convolve (mod p)")
    print(f"{'operation':<15} {'n':>8} {'calls':>6} {'work units':>11} {'time / product':>15}")
    for lg in logs:
        n = 2**lg
        x, y = random_ints(n), random_ints(n)
        t_mul, _ = best_time(lambda x=x, y=y: convolve(x, y, modulus=P), budget)
        a = random_ints(n, first=1)
        da, db = division_operands(n, P)
        for op, fn in (("inverse_series", lambda a=a, n=n: inverse_series(a, n, modulus=P)),
                       ("poly_divmod", lambda da=da, db=db: poly_divmod(da, db, modulus=P))):
            with counting_products() as log:
                fn()
            t_op, _ = best_time(fn, budget)
            print(f"{op:<15} {'2^' + str(lg):>8} {len(log):>6} {work_units(log, n):>11.2f} "
                  f"{t_op / t_mul:>15.2f}", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--min-log", type=int, default=10)
    parser.add_argument("--max-log", type=int, default=16)
    parser.add_argument("--budget", type=float, default=20.0,
                        help="seconds; larger sizes of a case are skipped after a slow one")
    parser.add_argument("--step", type=int, default=1, help="step of log2(n)")
    args = parser.parse_args()
    logs = range(args.min_log, args.max_log + 1, args.step)
    comparison_table(logs, args.budget)
    counts_table(logs, args.budget)


if __name__ == "__main__":
    main()
