"""Public entry points: validate -> plan -> engine -> shape (:mod:`polyconv.pipeline`).

``convolve`` and ``plan`` share the first two stages (:mod:`polyconv.pipeline.prepare`);
``convolve`` then runs exactly one engine and shapes its full (or truncated) product into the
requested mode, dtype and axis (:mod:`polyconv.pipeline.execute`).  Dask operands go to the
optional back end.  Nothing inside polyconv imports this module.
"""

from __future__ import annotations

import sys

import numpy as np

from .pipeline import execute, nd, prepare
from .pipeline.nd_plan import NdPlan
from .pipeline.plan import Plan
from .pipeline.small import tiny_arrays, tiny_product


def plan(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
         length: int | None = None, axis: int = -1, axes=None) -> Plan | NdPlan:
    """Say how :func:`convolve` would compute this product, without computing it.

    Parameters are those of :func:`convolve`.

    Returns
    -------
    Plan or NdPlan
        ``engine``, ``exact``, ``certificate``, ``error_bound``, ``predicted_seconds``, ``reason``
        and the engine's parameters; ``str(plan)`` explains it in a few lines.  With ``axes=``
        naming several axes, an :class:`~polyconv.pipeline.nd_plan.NdPlan` (axes, modes,
        transform shape, and for integers the 1-D plan of the flattened product).

    Examples
    --------
    >>> import numpy as np, polyconv
    >>> polyconv.plan(np.ones(10), np.ones(3)).engine
    'direct'
    """
    several, axis = _axes(axes, axis)
    if several:
        return nd.plan_nd(a, b, axes=axes, mode=mode, method=method, modulus=modulus,
                          length=length)
    return prepare.plan(a, b, mode=mode, method=method, modulus=modulus, length=length, axis=axis)


def _axes(axes, axis) -> tuple[bool, int]:
    """``(True, axis)`` when ``axes`` names several axes, else ``(False, the one axis)``."""
    if axes is None:
        return False, axis
    if not (isinstance(axis, int) and axis == -1):
        raise ValueError(f"give axis= or axes=, not both (got axis={axis!r}, axes={axes!r})")
    single = nd.single_axis(axes)
    return (True, axis) if single is None else (False, single)


def convolve(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
             length: int | None = None, axis: int = -1, axes=None) -> np.ndarray:
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
        "direct-exact", "fft-exact", "limbs", "kronecker", "ntt", "ntt-compiled" (numba kernels),
        "ntt-batch" (many short rows in one compiled call) for integers (each refuses, with a
        ValueError saying why, where it cannot give an exact result).  :func:`plan` tells what
        "auto" would do.
    modulus : int, optional
        Integer operands only: return the product's coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Mode "full" only: return just the first ``length`` coefficients (a truncated product),
        zero padded if the product is shorter.
    axis : int
        The convolution axis of each operand.
    axes : int or sequence of int, optional
        Convolve over several axes at once (scipy.signal.fftconvolve's ``axes=``): a and b must
        have the same number of dimensions, the other axes broadcast.  ``mode`` then applies
        along each axis (numpy.convolve's definitions per axis), or give one mode per axis.
        Floats: one N-D real transform, overlap-add along the long axis, or direct summation,
        as the cost model picks; integers: exact, by Kronecker substitution of the axes into
        one (:mod:`polyconv.pipeline.nd_exact`).  ``None`` (default): ``axis`` alone.

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
    if axes is None:
        if type(a) is np.ndarray and type(b) is np.ndarray:  # the common case
            if (mode == "full" and method == "auto" and length is None and axis == -1
                    and type(axis) is int):  # tiny 1-D int64 products: one compiled call
                out = tiny_arrays(a, b, modulus)
                if out is not None:
                    return out
            return execute.convolve(a, b, mode=mode, method=method, modulus=modulus,
                                    length=length, axis=axis)
        out = tiny_product(a, b, mode, method, modulus, length, axis)  # tiny plain lists
        if out is not None:  # (a dask array is never one)
            return out
    if _is_dask_array(a) or _is_dask_array(b):
        if axes is not None:
            raise ValueError("axes= is not supported for dask arrays; compute them first")
        return _convolve_dask(a, b, mode, method, modulus, length, axis)
    several, axis = _axes(axes, axis)
    if several:
        return nd.convolve_nd(a, b, axes=axes, mode=mode, method=method, modulus=modulus,
                              length=length)[0]
    return execute.convolve(a, b, mode=mode, method=method, modulus=modulus, length=length,
                            axis=axis)


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


def error_bound(a, b, the_plan: Plan | NdPlan | None = None, *, axes=None) -> float:
    """Rigorous bound on the absolute error of any output coefficient of a float product.

    For the FFT engines this is Percival's bound (C. Percival, Math. Comp. 72 (2003) 387-395,
    Theorem 5.1; restated in Brent & Zimmermann, *Modern Computer Arithmetic*, section 3.3.2):

        max_k |c'_k - c_k| <= ||a||_2 ||b||_2 [(1+eps)^(3n) (1+sqrt5 eps)^(3n+1) (1+beta)^(3n) - 1]

    for a transform of length ``2^n`` with twiddle error ``beta``, evaluated in exact rational
    arithmetic (:func:`polyconv.numerics.bounds.fft_error_bound`).  The FFT library is pocketfft,
    which is
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
    the_plan : Plan or NdPlan, optional
        The plan whose engine to bound; default the plan ``convolve`` would use.
    axes : int or sequence of int, optional
        As for :func:`convolve`: over several axes the bound is Percival's at the N-D
        transform's total length ``prod N_k`` (the row-column transform has ``sum log2 N_k``
        butterfly levels), twice that for overlap-add, ``gamma_m ||a||_2 ||b||_2`` with ``m =
        prod min(n1_k, n2_k)`` for direct summation (:mod:`polyconv.pipeline.nd`).

    Returns
    -------
    float
        The bound (absolute, for float64 arithmetic; ``0.0`` for an exact integer plan).
    """
    several, axis = _axes(axes, -1)
    if several or isinstance(the_plan, NdPlan):
        return nd.error_bound_nd(a, b, the_plan, axes=axes if axes is not None
                                 else the_plan.axes)
    if axes is not None and axis != -1:
        return prepare.error_bound(np.moveaxis(np.asarray(a), axis, -1),
                                   np.moveaxis(np.asarray(b), axis, -1), the_plan)
    return prepare.error_bound(a, b, the_plan)


