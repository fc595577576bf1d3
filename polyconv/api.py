"""Public entry points: validate -> plan -> engine -> shape.

``convolve`` and ``plan`` share the first two stages; ``convolve`` then runs exactly one engine and
shapes its full (or truncated) product into the requested mode, dtype and axis.
"""

from __future__ import annotations

import dataclasses
import math
import sys

import numpy as np

from . import inputs, planning, planning_exact, run_exact, shaping
from .bounds import convolution_error_bound, norm2_upper
from .budget import check_allocation, coefficient_bytes
from .engines.direct import convolve_direct
from .engines.fft import convolve_fft
from .engines.overlap_add import convolve_overlap_add
from .planning import Plan


def _prepare(a, b, mode, method, modulus, length, axis):
    pair = inputs.prepare_pair(a, b, axis)
    inputs.check_mode(mode)
    trunc = inputs.check_length(length, mode)
    mod = inputs.check_modulus(modulus, pair.kind)
    x, y = pair.a, pair.b
    if trunc is not None:
        x, y = x[..., :trunc], y[..., :trunc]
    n1, n2 = x.shape[-1], y.shape[-1]
    keep = None if trunc is None else min(trunc, n1 + n2 - 1)
    planning.check_method(method)
    if pair.kind in ("integer", "bigint"):
        (x, max_x), (y, max_y) = (run_exact.normalise_integers(x, mod),
                                  run_exact.normalise_integers(y, mod))
        facts = run_exact.integer_facts(x, y, mod, max_x, max_y)
        the_plan = planning_exact.choose_exact(facts, pair.kind, pair.batch_shape, mode, method,
                                               keep)
        bits = (mod - 1).bit_length() if mod is not None else facts.bound.bit_length() + 1
    else:
        for arr, name in ((x, "a"), (y, "b")):
            if arr.dtype == object:  # Python ints among floats: each must fit a float64
                _float_operand(arr, np.dtype(np.float64), name)
        the_plan = planning.choose(pair.kind, n1, n2, x.shape[:-1], y.shape[:-1],
                                   pair.batch_shape, mode, method, keep)
        bits = 0
    check_budget(the_plan, pair.kind, bits, trunc)
    return pair, x, y, trunc, the_plan


#: Transform-sized arrays an FFT product holds at once (two spectra and the inverse transform,
#: complex128): the engines' working set beside the result (counted from engines/fft.py).
TRANSFORM_ARRAYS = 3


def check_budget(the_plan: Plan, kind: str, bits: int, length: int | None) -> None:
    """Refuse, before any allocation, a product whose result and work space exceed the memory
    budget (:mod:`polyconv.budget`): ``rows * length * bytes per coefficient`` for the result
    (``bits``: coefficient size of exact outputs) plus the transform arrays of the plan's
    engine (all rows at once for float engines, one row at a time for exact ones; limbs hold
    one spectrum per limb)."""
    rows = math.prod(the_plan.batch_shape) if the_plan.batch_shape else 1
    count = length if length is not None else the_plan.output_length
    result = rows * count * coefficient_bytes(kind if not the_plan.exact else "integer", bits)
    work = 0.0
    if the_plan.transform_length:
        arrays = TRANSFORM_ARRAYS
        if the_plan.engine == "limbs":
            ka, kb = the_plan.setting("limbs_a"), the_plan.setting("limbs_b")
            arrays = 2 * (ka + kb)
        work = arrays * 16.0 * the_plan.transform_length * (1 if the_plan.exact else rows)
    n1, n2 = the_plan.lengths
    if length is not None and length > n1 + n2 - 1:
        what = f"length={length}"
    else:
        what = (f"the product of a ({n1} coefficients) and b ({n2})"
                + (f" in a batch of {rows}" if rows > 1 else "")
                + (f" with length={length}" if length is not None else ""))
    check_allocation(result + work, what)


def plan(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
         length: int | None = None, axis: int = -1) -> Plan:
    """Say how :func:`convolve` would compute this product, without computing it.

    Parameters are those of :func:`convolve`.

    Returns
    -------
    Plan
        ``engine``, ``exact``, ``certificate``, ``error_bound``, ``predicted_seconds``, ``reason``
        and the engine's parameters; ``str(plan)`` explains it in a few lines.

    Examples
    --------
    >>> import numpy as np, polyconv
    >>> polyconv.plan(np.ones(10), np.ones(3)).engine
    'direct'
    """
    pair, *_, the_plan = _prepare(a, b, mode, method, modulus, length, axis)
    if not the_plan.exact:
        the_plan = dataclasses.replace(the_plan, error_bound=_float_bound(the_plan, pair))
    return the_plan


def convolve(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
             length: int | None = None, axis: int = -1) -> np.ndarray:
    """Linear convolution of ``a`` and ``b`` (the coefficients of the product polynomial).

    ``c[k] = sum_i a[i] b[k - i]``, coefficient ``i`` being that of ``x**i`` (numpy.convolve's
    order).

    Parameters
    ----------
    a, b : array_like
        Sequences of numbers, at least 1-D.  N-D inputs are convolved along ``axis``; the other
        axes broadcast (a batch of sequences goes through one transform call).
    mode : {"full", "same", "valid"}
        As numpy.convolve defines them: "full" gives all ``n1 + n2 - 1`` coefficients, "same"
        the central ``max(n1, n2)``, "valid" the ``max - min + 1`` that need no zero padding.
    method : str
        "auto" (the cost model picks), or an engine: "direct", "fft", "overlap-add" for floats;
        "direct-exact", "fft-exact", "limbs", "kronecker", "ntt" for integers (each refuses, with
        a ValueError saying why, where it cannot give an exact result).  :func:`plan` tells what
        "auto" would do.
    modulus : int, optional
        Integer operands only: return the product's coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Mode "full" only: return just the first ``length`` coefficients (a truncated product),
        zero padded if the product is shorter.
    axis : int
        The convolution axis of each operand.

    Returns
    -------
    numpy.ndarray or dask.array.Array
        A dask array in (for the long operand) gives a lazy dask array out (see
        :func:`polyconv.scale.dask.convolve_dask`).  Floats give float64 or complex128
        (float32/complex64 stay single precision).  Integers give the exact product: int64
        when a bound proves that every coefficient fits, otherwise an object array of Python
        ints; with ``modulus``, int64 when the modulus fits.

    Notes
    -----
    Non-finite inputs: the direct engine propagates NaN and inf exactly as numpy.convolve does.
    The transform engines would smear them over every output, so when an input holds NaN or inf
    they compute with those entries set to zero and then set to NaN every output that a
    non-finite input contributes to (inf included: its sign is not recoverable from a
    transform).  Outputs out of reach of any non-finite input are exact as usual.

    Raises
    ------
    ValueError, TypeError
        For bad input, naming the argument and what was expected.

    Examples
    --------
    >>> import polyconv
    >>> polyconv.convolve([1.0, 2.0, 3.0], [0.0, 1.0, 0.5])
    array([0. , 1. , 2.5, 4. , 1.5])
    """
    if _is_dask_array(a) or _is_dask_array(b):
        return _convolve_dask(a, b, mode, method, modulus, length, axis)
    pair, x, y, trunc, the_plan = _prepare(a, b, mode, method, modulus, length, axis)
    if 0 in pair.batch_shape:
        full = shaping.empty_result(the_plan, pair.kind, x, y)
    else:
        full = run(the_plan, x, y)
    return shaping.finish(full, the_plan, pair.axis, trunc)


def convolve_integer_rows(x: np.ndarray, y: np.ndarray, *, mode: str = "full",
                          modulus: int | None = None, length: int | None = None,
                          magnitudes: tuple[int, int] | None = None) -> np.ndarray:
    """:func:`convolve` for callers inside polyconv that hold already-checked operands.

    ``x`` and ``y`` are 1-D, non-empty int64 or object arrays of integers, and ``mode``,
    ``modulus`` and ``length`` have been validated (as :mod:`polyconv.algebra` does once per
    call of its public functions).  The product is planned, certified and shaped exactly as in
    :func:`convolve`; only the classification of array-likes is skipped, which is most of the
    cost of a short product.  ``magnitudes``, when given, are upper bounds of ``max|x|`` and
    ``max|y|`` for int64 operands that are already reduced when ``modulus`` is (the pass that
    would find them is skipped).
    """
    keep = None if length is None else min(length, x.shape[0] + y.shape[0] - 1)
    if length is not None:
        x, y = x[:length], y[:length]
    if magnitudes is not None and x.dtype == np.int64 and y.dtype == np.int64:
        max_x, max_y = magnitudes
    else:
        (x, max_x), (y, max_y) = (run_exact.normalise_integers(x, modulus),
                                  run_exact.normalise_integers(y, modulus))
    facts = run_exact.integer_facts(x, y, modulus, max_x, max_y)
    kind = "integer" if x.dtype != object and y.dtype != object else "bigint"
    the_plan = planning_exact.choose_exact(facts, kind, (), mode, "auto", keep)
    check_budget(the_plan, kind, (modulus - 1).bit_length() if modulus is not None
                 else facts.bound.bit_length() + 1, length)
    return shaping.finish(run_exact.run_exact(the_plan, x, y), the_plan, -1, length)


def _is_dask_array(x) -> bool:
    """True for a dask array; never imports dask (if it is not loaded, ``x`` cannot be one)."""
    dask_array = sys.modules.get("dask.array")
    return dask_array is not None and isinstance(x, dask_array.Array)


def _convolve_dask(a, b, mode, method, modulus, length, axis):
    """A lazy dask result: the dask operand is the long one, the other the kernel."""
    if method != "auto" or length is not None or axis not in (-1, 0):
        raise ValueError("with a dask array, convolve supports mode= and modulus= only "
                         "(1-D operands, method='auto', no length=)")
    from .scale.dask import convolve_dask  # the optional back end, loaded on first use

    long, kernel = (a, b) if _is_dask_array(a) else (b, a)  # every mode is symmetric
    return convolve_dask(long, kernel, mode=mode, modulus=modulus)


def _float_operand(x: np.ndarray, work: np.dtype, name: str) -> np.ndarray:
    """``x`` in the float work dtype; a Python int beyond float64's range (|v| >= 2^1024) among
    floats is refused by name (numpy would raise a bare OverflowError)."""
    try:
        return x.astype(work, copy=False)
    except OverflowError:
        raise ValueError(f"{name} holds an integer too large for floating point (|value| >= "
                         "2^1024) while the product is in floating point (an operand holds "
                         "floats); pass integers only for an exact product") from None


def run(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Run the plan's engine on prepared operands (axis last); full or truncated product."""
    engine = the_plan.engine
    if the_plan.exact:
        return run_exact.run_exact(the_plan, x, y)
    work = shaping.float_work_dtype(x.dtype, y.dtype, the_plan.kind)
    x = x.astype(work, copy=False)
    y = y.astype(work, copy=False)
    if engine == "direct":
        return convolve_direct(x, y)
    with np.errstate(invalid="ignore", over="ignore"):  # a NaN input is handled just below
        out = _run_transform(the_plan, x, y)
    if not shaping.looks_finite(out, first_entries_only=engine == "fft"):
        bad = shaping.nonfinite_masks(x, y)
        if bad is not None:
            x, y = shaping.zero_nonfinite(x), shaping.zero_nonfinite(y)
        # finite inputs whose product overflows: inf - inf inside a transform would give NaN
        # where numpy.convolve gives +-inf, so the product is formed on scaled operands
        out = shaping.run_scaled(lambda u, v: _run_transform(the_plan, u, v), x, y)
        if bad is not None:
            out = shaping.mark_nonfinite(out, bad, x.shape[-1], y.shape[-1])
    return out


def _run_transform(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    if the_plan.engine == "fft":
        keep = shaping.needed_entries(the_plan.mode, x.shape[-1], y.shape[-1],
                                      the_plan.output_length)
        return convolve_fft(x, y, the_plan.transform_length, keep, the_plan.threads)
    if x.shape[-1] < y.shape[-1]:
        x, y = y, x
    return convolve_overlap_add(x, y, the_plan.transform_length, the_plan.threads)


def error_bound(a, b, the_plan: Plan | None = None) -> float:
    """Rigorous bound on the absolute error of any output coefficient of a float product.

    For the FFT engines this is Percival's bound (C. Percival, Math. Comp. 72 (2003) 387-395,
    Theorem 5.1; restated in Brent & Zimmermann, *Modern Computer Arithmetic*, section 3.3.2):

        max_k |c'_k - c_k| <= ||a||_2 ||b||_2 [(1+eps)^(3n) (1+sqrt5 eps)^(3n+1) (1+beta)^(3n) - 1]

    for a transform of length ``2^n`` with twiddle error ``beta``, evaluated in exact rational
    arithmetic (:func:`polyconv.bounds.fft_error_bound`).  The FFT library is pocketfft, which is
    mixed radix: we count ``n = ceil(log2 N)`` levels for a transform of length ``N`` plus one more
    when ``N`` is not a power of two (a radix-3 or -5 pass does at most a few more roundings per
    output than the radix-2 levels it replaces), and take ``beta = 4 eps`` as measured for
    pocketfft's twiddles (bench/RESULTS.md); these are stated assumptions about pocketfft, not
    theorems.  Overlap-add adds two block products per output: twice the block bound.  Direct
    summation: ``gamma_m ||a||_2 ||b||_2`` with ``m = min(n1, n2)`` (Higham, *Accuracy and
    Stability of Numerical Algorithms*, 2nd ed., section 3.1, with Cauchy-Schwarz).

    Parameters
    ----------
    a, b : array_like
        Float operands (1-D; for N-D the largest row norms are used).
    the_plan : Plan, optional
        The plan whose engine to bound; default the plan ``convolve`` would use.

    Returns
    -------
    float
        The bound (absolute, for float64 arithmetic; ``0.0`` for an exact integer plan).
    """
    if the_plan is None:
        return plan(a, b).error_bound  # plan() computes it
    if the_plan.exact:
        return 0.0
    return _float_bound(the_plan, inputs.prepare_pair(a, b))


def _float_bound(the_plan: Plan, pair: inputs.OperandPair) -> float:
    """:func:`error_bound` of a float plan for prepared operands (axis last, largest rows)."""
    x = np.asarray(pair.a, dtype=np.complex128 if pair.kind == "complex" else np.float64)
    y = np.asarray(pair.b, dtype=x.dtype)
    norm_a = max(norm2_upper(np.abs(r)) for r in x.reshape(-1, x.shape[-1]))
    norm_b = max(norm2_upper(np.abs(r)) for r in y.reshape(-1, y.shape[-1]))
    return convolution_error_bound(the_plan.engine, norm_a, norm_b, the_plan.transform_length,
                                   min(the_plan.lengths))
