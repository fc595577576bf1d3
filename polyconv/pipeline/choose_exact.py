"""Planning for integer operands: which exact engine, and the certificate that makes it exact.

Inputs are the operands' lengths and magnitudes (:class:`IntegerFacts`); the chooser predicts each
capable engine's seconds from the cost table's ``exact`` section and returns a
:class:`polyconv.pipeline.plan.Plan` whose ``certificate`` says why the result is exact:

* ``"construction"``: exact integer arithmetic (direct summation, Kronecker substitution on GMP
  integers, number-theoretic transforms with CRT);
* ``"bound"``: a float FFT whose rigorous error bound (Percival 2003, see
:mod:`polyconv.numerics.bounds`)
  is below 1/2, so rounding recovers every coefficient (whole, or split into limbs);
* ``"check"``: a float FFT whose bound is above 1/2 but small enough that the true error is very
  likely below it (the bound is >= 36x pessimistic on adversarial inputs, bench/RESULTS.md); the
  rounded result is accepted only after a random-evaluation check (Schwartz-Zippel) passes, and
  otherwise recomputed by the plan's ``fallback`` engine.

With a modulus, operands are reduced to ``[0, m)`` first, so every engine sees magnitudes below
``m``; outputs are reduced last.  An NTT prime modulus adds the number-theoretic transform.
"""

from __future__ import annotations

import math
from functools import lru_cache

from ..engines import jit_state
from ..engines.exact_direct import one_split_fits
from ..engines.exact_fft import is_power_of_two
from ..engines.kronecker import uses_two_point
from ..engines.ntt import PRIMES
from ..numerics import bounds
from ..numerics.limits import FLOAT_EXACT_LIMIT, INT64_LIMIT
from ..tuning import costs as _costs
from ..tuning.costs import fft_rate, gmp_rate, load_costs
from ..tuning.threads import THREADS
from . import choose_compiled
from .facts import IntegerFacts
from .plan import EXACT_ENGINES, Plan, output_length

#: Above this float-FFT error bound a "check" certificate is not even attempted (the limit decides
#: speed only: a failed check recomputes with the fallback, so correctness never rests on it).
#: Argument: the check passes iff the true error is below 1/2; the true error is at most
#: bound / r, with r the bound/observed ratio.  The smallest r measured over every length
#: 2^1..2^14 and magnitude 2^10..2^26 whose bound lies in 0.3..200, on all +max, alternating and
#: mixed inputs, is 36.6 (n = 2^9, 18 bits; ``bench/exact_error_ratio.py --check-limit``,
#: bench/RESULTS.md), so the check is expected to pass below 36.6 / 2 = 18.3; 12 keeps a further
#: factor 1.5 for inputs worse than those measured.  Random inputs sit 10^3-10^4 below the bound.
CHECK_BOUND_LIMIT = 12.0


def power_of_two_at_least(n: int) -> int:
    """Smallest power of two ``>= n``."""
    return 1 << max(0, (n - 1).bit_length())


def choose_exact(facts: IntegerFacts, kind: str, batch: tuple, mode: str, method: str,
                 keep: int | None) -> Plan:
    """The plan for an exact integer (or modular) product.

    Raises
    ------
    ValueError
        If ``method`` names an engine that cannot give an exact result here.
    """
    if _costs.generation == 0:
        load_costs()
    return _choose_exact_cached(_costs.generation, facts, kind, batch, mode, method, keep,
                                jit_state.state())


@lru_cache(maxsize=1024)
def _choose_exact_cached(generation: int, facts: IntegerFacts, kind: str, batch: tuple, mode: str,
                         method: str, keep: int | None, jit_state: str = "") -> Plan:
    table = load_costs()
    c = table["exact"]
    n1, n2 = facts.n1, facts.n2
    rows = math.prod(batch) if batch else 1
    full = n1 + n2 - 1
    out_len = output_length(mode, n1, n2) if keep is None else keep
    bound = facts.bound
    fits_int64 = bound < INT64_LIMIT
    top = (max(bound, facts.max_a, facts.max_b) + 1).bit_length() + 1  # value bits + sign
    slot_bits = 8 * max(1, -(-top // 8))
    words = -(-slot_bits // 64)
    n_pow2 = power_of_two_at_least(full)

    options: dict[str, float] = {}
    details: dict[str, dict] = {}
    certificates: dict[str, str] = {}
    notes: dict[str, str] = {}

    # direct summation (float64 sums while they stay below 2^53, int64 below 2^63, two or three
    # half-word products for a modulus below 2^31, Python ints otherwise)
    direct_float = c.get("direct_float", c["direct_int64"])
    if facts.modulus is not None and facts.modulus < 2**31 and not fits_int64:
        halves = 2 if one_split_fits(min(n1, n2), facts.modulus) else 3
        k = direct_float if min(n1, n2) << 34 < FLOAT_EXACT_LIMIT else c["direct_int64"]
        options["direct-exact"] = halves * (k["overhead"] + k["per_mac"] * n1 * n2 * rows)
    elif fits_int64:
        k = direct_float if bound < FLOAT_EXACT_LIMIT else c["direct_int64"]
        options["direct-exact"] = k["overhead"] + k["per_mac"] * n1 * n2 * rows
    else:
        options["direct-exact"] = c["direct_object"]["overhead"] + c["direct_object"][
            "per_mac"] * n1 * n2 * rows * (1 + words / 4)
    certificates["direct-exact"] = "construction"
    notes["direct-exact"] = "exact schoolbook sums"

    # float FFT with rounding, certified by the bound or by a check.  Mode "valid" keeps only
    # entries that a circular product of length >= max(n1, n2) gets right (the middle product):
    # bound-certified transform engines use that shorter length.
    circular = mode == "valid"
    if circular:
        n_pow2 = power_of_two_at_least(max(n1, n2))
    float_cost = fft_rate(table, n_pow2) * n_pow2 * math.log2(max(n_pow2, 2))
    # both operands must be exact in float64 too (a zero operand makes the bound 0 whatever the
    # other holds, and 0 * inf is NaN)
    if bound < FLOAT_EXACT_LIMIT and max(facts.max_a, facts.max_b) < FLOAT_EXACT_LIMIT:
        err = bounds.fft_error_bound(facts.norm_a, facts.norm_b, n_pow2) \
            if math.isfinite(facts.norm_a) else math.inf
        if err < 0.5 and bounds.TWIDDLE_CERTIFIED:
            certificates["fft-exact"] = "bound"
            notes["fft-exact"] = f"float FFT error bound {err:.3g} < 1/2 (Percival 2003)"
        elif err < CHECK_BOUND_LIMIT and not circular:  # the check needs the full product
            certificates["fft-exact"] = "check"
            notes["fft-exact"] = (f"float FFT error bound {err:.3g} >= 1/2: rounded result "
                                  "accepted only if a random-evaluation check passes")
        if "fft-exact" in certificates:
            check = c["check_per_point"] * (n1 + n2 + full) if certificates[
                "fft-exact"] == "check" else 0.0
            options["fft-exact"] = (c["rounded"]["overhead"] + rows * (
                float_cost * c["rounded"]["scale"] + c["rounded"]["per_point"] * n_pow2 + check))
            details["fft-exact"] = {"transform_length": n_pow2, "error_bound": err,
                                    "circular": circular}

    # limb split of float FFTs, certified by the bound; with a modulus the residues are centred
    # and the limb products recombined modulo m in int64 (moduli below 2^31, odd below 2^62, or
    # powers of two up to 2^62)
    m = facts.modulus
    modular_limbs = m is not None and (m < 2**31 or (m % 2 == 1 and m < 2**62)
                                       or (is_power_of_two(m) and m <= 2**62))
    if modular_limbs:
        half = m // 2 + 1
        limbs = bounds.choose_limbs(min(facts.max_a, half), min(facts.max_b, half), n1, n2,
                                    n_pow2, norm_a=facts.centred_norm_a,
                                    norm_b=facts.centred_norm_b)
    elif m is None:
        limbs = bounds.choose_limbs(facts.max_a, facts.max_b, n1, n2, n_pow2)
        if limbs is not None and limbs[1] == 1 and limbs[2] == 1:
            limbs = None  # that is fft-exact
    else:
        limbs = None
    if limbs is not None and bounds.TWIDDLE_CERTIFIED:  # choose_limbs caps the count at 12
        bits, ka, kb = limbs
        transforms = (ka + kb) + (ka + kb - 1)
        if modular_limbs:
            wide = m >= 2**31 and not is_power_of_two(m)  # Montgomery recombination
            k = c.get("limbs_mod_wide", c["limbs_mod"]) if wide else c["limbs_mod"]
        else:
            k = c["limbs"]
        options["limbs"] = k["overhead"] + rows * (
            float_cost * transforms / 3 * k["scale"] + k["per_point"] * n_pow2 * (ka + kb))
        certificates["limbs"] = "bound"
        notes["limbs"] = f"{ka}+{kb} limbs of {bits} bits, each limb product certified < 1/2"
        details["limbs"] = {"transform_length": n_pow2, "limb_bits": bits, "limbs_a": ka,
                            "limbs_b": kb, "circular": circular}

    # Kronecker substitution through GMP
    kronecker_threads = kronecker_thread_count(n1, n2, slot_bits)
    options["kronecker"] = c["kronecker"]["overhead"] + rows * kronecker_seconds(
        c["kronecker"], n1, n2, slot_bits, fits_int64 or facts.modulus is not None,
        kronecker_threads)
    details["kronecker"] = {"threads": kronecker_threads}
    certificates["kronecker"] = "construction"
    notes["kronecker"] = (f"one GMP product with {slot_bits}-bit slots" if kronecker_threads == 1
                          else f"two half-size GMP products on two threads, {slot_bits}-bit slots")

    # number-theoretic transform modulo an NTT prime (always the full length)
    n_full = power_of_two_at_least(full)
    if m is not None and m in PRIMES and n_full <= (1 << PRIMES[m][1]):
        options["ntt"] = c["ntt"]["overhead"] + rows * c["ntt"]["per_nlogn"] * n_full * max(
            1, math.log2(n_full))
        certificates["ntt"] = "construction"
        notes["ntt"] = f"NTT modulo the prime {m}"
        details["ntt"] = {"transform_length": n_full}

    compiled = choose_compiled.compiled_option(facts, c, rows, n_full, out_len)
    if compiled is not None:  # compiled NTT kernels (numba), JIT state charged
        name = choose_compiled.ENGINE
        options[name], notes[name], details[name] = compiled
        certificates[name] = "construction"

    ranked = tuple(sorted(options.items(), key=lambda kv: kv[1]))
    if method == "auto":
        engine = ranked[0][0]
        why = f"{engine} is predicted fastest among exact engines"
    elif method in options:
        engine = method
        why = f"{engine} was requested with method={method!r}"
    else:
        raise ValueError(_cannot(method, facts))
    fallback = None
    if certificates[engine] == "check":
        fallback = min(("direct-exact", "kronecker"), key=options.get)
    reason = f"{why} ({notes[engine]})" + choose_compiled.remark(engine, compiled is not None)
    if fallback:
        reason += f"; if the check fails: {fallback}"
    if not bounds.TWIDDLE_CERTIFIED:
        reason += f"; {bounds.TWIDDLE_NOTE}"
    d = dict(details.get(engine, {}))
    d["product_int64"] = fits_int64
    threads = d.pop("threads", 1)
    settings = tuple(sorted((k, v) for k, v in d.items() if k not in ("transform_length",
                                                                      "error_bound")))
    return Plan(engine, True, certificates[engine], 0.0, options[engine], reason, kind=kind,
                threads=threads,
                mode=mode, lengths=(n1, n2), batch_shape=batch, output_length=out_len,
                transform_length=d.get("transform_length"), alternatives=ranked,
                settings=settings, fallback=fallback, modulus=m,
                output_int64=bool(fits_int64 if m is None else m <= INT64_LIMIT))


#: GMP time of the two-point scheme's two products run concurrently, over the same products in
#: sequence (measured on the development machine: 0.46-0.51 for the products alone, 0.68-0.73 for
#: whole 62-bit modular products at n = 2^16..2^20, where packing and reduction stay serial).
CONCURRENT_PRODUCTS_FACTOR = 0.55
#: Seconds to hand one product to the helper thread and collect it (measured: 52-57 us).
CONCURRENT_HANDOFF = 6e-5


def kronecker_thread_count(n1: int, n2: int, slot_bits: int) -> int:
    """2 when two threads are allowed and the two-point scheme applies with them
    (:func:`polyconv.engines.kronecker.uses_two_point`), else 1."""
    return 2 if THREADS >= 2 and uses_two_point(slot_bits // 8, n1, n2, 2) else 1


def kronecker_seconds(c: dict, n1: int, n2: int, slot_bits: int, int64_out: bool,
                      threads: int = 1) -> float:
    """GMP product of the packed operands plus packing and unpacking.

    An ``n_min x n_max`` product of packed integers is modelled as ``n_max / n_min`` balanced
    products of ``n_min * slot_bits``-bit integers, each costing ``r(lg b) b lg b`` with ``r``
    measured per size (GMP switches algorithms as sizes grow); with two threads the two-point
    scheme's products overlap (:data:`CONCURRENT_PRODUCTS_FACTOR`, plus
    :data:`CONCURRENT_HANDOFF`).
    """
    small, large = min(n1, n2), max(n1, n2)
    bits = max(64, small * slot_bits)
    mul = gmp_rate(c, bits) * bits * math.log2(bits) * (large / small)
    if threads >= 2:
        mul = mul * CONCURRENT_PRODUCTS_FACTOR + CONCURRENT_HANDOFF
    moved = (n1 + n2 + n1 + n2 - 1) * slot_bits / 8
    out = 0.0 if int64_out else c["per_object_out"] * (n1 + n2 - 1)
    return mul + c["per_byte"] * moved + out


def _cannot(method: str, facts: IntegerFacts) -> str:
    if method == "fft-exact":
        return ("method='fft-exact' cannot be certified here: the product's coefficients reach "
                f"{facts.bound.bit_length()} bits, an operand reaches "
                f"{max(facts.max_a, facts.max_b).bit_length()} bits (float64 holds 53) or the "
                "float error bound is too large; use "
                "method='auto', 'limbs' or 'kronecker'")
    if method == "limbs":
        return "method='limbs' has no certified limb size for these magnitudes; use 'kronecker'"
    if method == "ntt":
        return ("method='ntt' needs a modulus that is one of the NTT primes "
                f"{sorted(PRIMES)} and a product short enough for its transform length")
    return (f"method={method!r} is a floating-point engine; integer operands are computed "
            f"exactly with one of {', '.join(EXACT_ENGINES)} (or 'auto')")


