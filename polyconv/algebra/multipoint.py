"""Multipoint evaluation and interpolation by the subproduct tree.

* :func:`evaluate_points`: ``f(x_0), ..., f(x_(n-1))`` by the remainder tree: ``f mod M_root``,
  then ``r mod M_child`` down the tree of ``M_node = prod_(i in node) (x - x_i)``; at the leaves
  (blocks of at most 64 points) the remainder of the parent is evaluated by Horner's rule,
  batched over all leaves (von zur Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed.,
  Algorithms 10.3 and 10.5; Borodin & Moenck, J. Comput. System Sci. 8 (1974)).  Cost
  ``O(M(n) log n)``: the tree and two divisions per node (:func:`polyconv.algebra.poly_divmod`'s
  Newton division on :func:`polyconv.convolve`).
* :func:`interpolate`: the polynomial of degree ``< n`` through ``(x_i, y_i)`` by Lagrange's
  formula on the tree (MCA Algorithm 10.11): weights ``y_i / M'(x_i)`` from one evaluation of
  ``M'``, then ``R_node = R_left M_right + R_right M_left`` upwards.

Arithmetic follows the inputs: residues mod ``m`` (``modulus=``), exact integers (evaluation
only: the divisors are monic, so the remainders stay integral), or floats.  For floats,
:func:`evaluate_points` can return a rigorous a-posteriori bound per point
(:mod:`polyconv.algebra.multipoint_bounds` derives it); the remainder tree is numerically
unstable in general (Köhler & Ziegler, "On the stability of fast polynomial arithmetic",
2008), which the bound shows rather than hides.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..numerics.budget import check_allocation
from . import multipoint_bounds as mb
from .checks import _check_modulus, _combine, _sequence
from .division import _divmod
from .rings import _Floats, _Integers, _Ring, _ring_for
from .series_newton import derivative, vadd, vmul

__all__ = ["evaluate_points", "interpolate"]

#: at most this many points per leaf of the tree
LEAF = 64
#: floats, method "auto": largest tree bound accepted, relative to Horner's error scale
TREE_TOLERANCE = 1e-8


@dataclass
class _Node:
    lo: int                      # first point
    hi: int                      # one past the last point
    poly: np.ndarray             # prod (x - x_i), lowest degree first (monic)
    children: tuple = ()
    error: float = 0.0           # floats: bound on max |computed - exact| coefficient of poly


def evaluate_points(f, points, *, modulus: int | None = None, error_bound: bool = False,
                    method: str = "auto"):
    """The values ``f(x_i)`` of a polynomial at many points.

    Parameters
    ----------
    f : array_like, 1-D
        Coefficients, lowest degree first.
    points : array_like, 1-D
        The points ``x_i`` (repetitions allowed), at least one.
    modulus : int, optional
        Integer ``f`` and ``points`` only: values mod ``modulus`` (any modulus).
    error_bound : bool
        Floats only: also return a bound on ``|value_i - f(x_i)|`` for each point.
    method : {"auto", "tree", "horner"}
        Floats only.  "tree": the subproduct tree; "horner": Horner's rule at every point
        (``len(f)`` vector steps, stable: Higham, *Accuracy and Stability*, eq. (5.3)); "auto":
        the tree, unless its bound exceeds ``TREE_TOLERANCE`` (``1e-8``) relative to
        ``max_i sum_k |f_k| |x_i|^k`` at some point, then Horner's rule (the float tree is
        unstable for many points off the unit circle: Köhler & Ziegler 2008).

    Returns
    -------
    values : numpy.ndarray
        One value per point: residues in ``[0, modulus)``, exact integers (int64 when they fit),
        or float64/complex128.
    bounds : numpy.ndarray of float64
        Only with ``error_bound=True``: rigorous a-posteriori bounds (under the stated float
        product bounds of :func:`polyconv.error_bound`; derivation in
        :mod:`polyconv.algebra.multipoint_bounds`); ``inf`` where they overflow.

    Raises
    ------
    ValueError, TypeError
        Naming ``f``, ``points``, ``modulus`` or ``error_bound``.

    Examples
    --------
    >>> from polyconv.algebra.multipoint import evaluate_points
    >>> evaluate_points([1, 2, 3], [0, 1, 2, 10]).tolist()
    [1, 6, 17, 321]
    >>> evaluate_points([1, 2, 3], [5, 6], modulus=7).tolist()
    [2, 2]
    """
    ring, coeffs, pts = _prepare(f, points, modulus)
    if method not in ("auto", "tree", "horner"):
        raise ValueError(f"method must be 'auto', 'tree' or 'horner'; got {method!r}")
    if error_bound and not isinstance(ring, _Floats):
        raise ValueError("error_bound=True is for float input; integer and modular values are "
                         "exact")
    if isinstance(ring, _Floats):
        return _evaluate_floats(ring, coeffs, pts, error_bound, method)
    values, _ = _evaluate_tree(ring, coeffs, pts, False)
    return values


def _evaluate_tree(ring: _Ring, coeffs: np.ndarray, pts: np.ndarray, with_errors: bool):
    tree = _tree(ring, pts, with_errors=with_errors)
    pieces: list = []
    root_error = 0.0
    r = coeffs
    if coeffs.shape[0] > tree.poly.shape[0] - 1 and tree.children:
        r, root_error = _remainder(ring, coeffs, tree, with_errors, pts)
    _descend(ring, tree, r, root_error, pieces, with_errors, pts)
    return _evaluate_leaves(ring, pieces, pts, with_errors)


def _evaluate_floats(ring: _Ring, coeffs: np.ndarray, pts: np.ndarray, with_errors: bool,
                     method: str):
    """The tree with its bound; "auto" falls back to Horner's rule over all points when the
    tree's bound exceeds ``TREE_TOLERANCE`` relative to ``max_x sum_k |f_k| |x|^k``."""
    if method == "tree" or (method == "auto" and pts.shape[0] > LEAF):
        with np.errstate(all="ignore"):
            values, bounds = _evaluate_tree(ring, coeffs, pts, True)
        if method == "tree":
            return (values, bounds) if with_errors else values
        scale = mb.horner_scale(coeffs, pts)
        if np.all(np.isfinite(bounds)) and np.all(bounds <= TREE_TOLERANCE * scale):
            return (values, bounds) if with_errors else values
    whole = _Node(0, pts.shape[0], coeffs)
    values, bounds = _evaluate_leaves(ring, [(whole, coeffs, 0.0)], pts, with_errors)
    return (values, bounds) if with_errors else values


def interpolate(points, values, *, modulus: int | None = None) -> np.ndarray:
    """The polynomial of degree ``< n`` with ``p(x_i) = y_i`` for ``n`` distinct points.

    Parameters
    ----------
    points : array_like, 1-D
        ``n >= 1`` distinct points (mod ``modulus``: pairwise differences must be units).
    values : array_like, 1-D
        ``n`` values.
    modulus : int, optional
        Integer points and values: interpolate mod ``modulus``.  Without it integer input is
        taken as float (the interpolant generally has rational coefficients).

    Returns
    -------
    numpy.ndarray
        ``n`` coefficients, lowest degree first.

    Raises
    ------
    ValueError
        For repeated points (or differences that are not units mod ``modulus``) and bad input.

    Notes
    -----
    Floats: no forward error bound is given, since interpolation in floats is as ill-conditioned
    as the Vandermonde matrix (condition growing exponentially in ``n`` for real points;
    Gautschi, Numer. Math. 23 (1975); Higham, *Accuracy and Stability of Numerical
    Algorithms*, 2nd ed., chapter 22).  Check a result with
    ``evaluate_points(p, points, error_bound=True)``: it bounds the residual rigorously.

    Examples
    --------
    >>> from polyconv.algebra.multipoint import interpolate
    >>> interpolate([0, 1, 2], [1, 6, 17], modulus=101).tolist()
    [1, 2, 3]
    """
    arr_x, kind_x = _sequence(points, "points")
    arr_y, kind_y = _sequence(values, "values")
    if arr_x.shape[0] != arr_y.shape[0]:
        raise ValueError(f"points and values must have the same length; got {arr_x.shape[0]} "
                         f"and {arr_y.shape[0]}")
    kind = _combine([kind_x, kind_y])
    m = _check_modulus(modulus, kind, "points and values hold")
    ring = _ring_for("real" if kind == "integer" and m is None else kind, m)
    pts, ys = ring.convert(arr_x), ring.convert(arr_y)
    check_allocation(8 * pts.shape[0] * 16, f"interpolate at {pts.shape[0]} points")
    tree = _tree(ring, pts, with_errors=False)
    weights = evaluate_points(derivative(ring, tree.poly), pts, modulus=m)
    weights = ring.convert(np.asarray(weights))
    inverse = _unit_inverses(ring, weights)
    return _combine_up(ring, tree, vmul(ring, ys, inverse), pts)


# ----------------------------------------------------------------------------- validation


def _prepare(f, points, modulus):
    arr_f, kind_f = _sequence(f, "f")
    arr_x, kind_x = _sequence(points, "points")
    kind = _combine([kind_f, kind_x])
    m = _check_modulus(modulus, kind, "f and points hold")
    ring = _ring_for(kind, m)
    check_allocation(8 * (arr_f.shape[0] + 16 * arr_x.shape[0]),
                     f"evaluate_points at {arr_x.shape[0]} points")
    return ring, ring.convert(arr_f), ring.convert(arr_x)


def _unit_inverses(ring: _Ring, w: np.ndarray) -> np.ndarray:
    if isinstance(ring, _Floats):
        if np.any(w == 0):
            raise ValueError("points must be distinct (two points coincide)")
        return 1.0 / w
    out = []
    for v in w.tolist():
        inv = ring.unit_inverse(v)
        if inv is None:
            raise ValueError(f"points must be distinct modulo {ring.modulus} with unit "
                             f"differences; prod (x_i - x_j) over j != i is {v} for some i")
        out.append(inv)
    return ring.convert(np.array(out, dtype=object))


# ----------------------------------------------------------------------------- the tree


def _leaf_polys(ring: _Ring, pts: np.ndarray) -> np.ndarray:
    """Rows ``prod_j (x - pts[r, j])`` (lowest degree first) for a matrix of points, built by
    ``p <- x p - c p`` for all rows at once."""
    count, size = pts.shape
    if isinstance(ring, _Integers):
        pts = pts.astype(object)
    p = ring.zeros(count * (size + 1)).reshape(count, size + 1).astype(pts.dtype)
    p[:, 0] = 1
    for j in range(size):
        shifted = np.zeros_like(p)
        shifted[:, 1:] = p[:, :-1]
        c = np.repeat(pts[:, j: j + 1], size + 1, axis=1)
        p = _sub2(ring, shifted, vmul(ring, p.ravel(), c.ravel()).reshape(p.shape))
    return p


def _sub2(ring: _Ring, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    return ring.sub(x.ravel(), y.ravel()).reshape(x.shape)


def _tree(ring: _Ring, pts: np.ndarray, *, with_errors: bool) -> _Node:
    n = pts.shape[0]
    leaves_count = -(-n // LEAF)
    bounds = [round(i * n / leaves_count) for i in range(leaves_count + 1)]
    leaves: list[_Node] = []
    by_size: dict[int, list[int]] = {}
    for i in range(leaves_count):
        by_size.setdefault(bounds[i + 1] - bounds[i], []).append(i)
    polys: dict[int, np.ndarray] = {}
    errors: dict[int, float] = {}
    for ids in by_size.values():
        block = np.stack([pts[bounds[i]: bounds[i + 1]] for i in ids])
        rows = _leaf_polys(ring, block)
        errs = mb.leaf_errors(block, ring) if with_errors else [0.0] * len(ids)
        for i, row, e in zip(ids, rows, errs, strict=True):
            polys[i], errors[i] = row, e
    leaves = [_Node(bounds[i], bounds[i + 1], polys[i], (), errors[i])
              for i in range(leaves_count)]
    return _join(ring, leaves, with_errors)


def _join(ring: _Ring, nodes: list[_Node], with_errors: bool) -> _Node:
    if len(nodes) == 1:
        return nodes[0]
    half = len(nodes) // 2
    left, right = _join(ring, nodes[:half], with_errors), _join(ring, nodes[half:], with_errors)
    poly = ring.mul(left.poly, right.poly)
    if isinstance(ring, _Floats):
        poly[-1] = 1  # the exact product is monic; its error bound covers every coefficient
    error = mb.product_error(left, right) if with_errors else 0.0
    return _Node(left.lo, right.hi, poly, (left, right), error)


# ----------------------------------------------------------------------------- remainders


def _remainder(ring: _Ring, r: np.ndarray, node: _Node, with_errors: bool,
               pts: np.ndarray) -> tuple[np.ndarray, float]:
    """``r mod node.poly`` and (floats) the error it adds at the node's points."""
    q, rem = _divmod(ring, r, node.poly, 1)
    if not with_errors:
        return rem, 0.0
    return rem, mb.division_error(r, q, rem, node, pts[node.lo: node.hi])


def _descend(ring: _Ring, node: _Node, r: np.ndarray, error: float, pieces: list,
             with_errors: bool, pts: np.ndarray) -> None:
    if not node.children:
        pieces.append((node, r, error))
        return
    for child in node.children:
        if child.children and r.shape[0] > child.poly.shape[0] - 1:
            rem, added = _remainder(ring, r, child, with_errors, pts)
            _descend(ring, child, rem, error + added, pieces, with_errors, pts)
        else:
            _descend(ring, child, r, error, pieces, with_errors, pts)


def _evaluate_leaves(ring: _Ring, pieces: list, pts: np.ndarray, with_errors: bool):
    """Horner's rule for every leaf at once: remainders padded to one length (top zeros) and
    leaves to one size (dummy points whose values are dropped)."""
    n = pts.shape[0]
    if isinstance(ring, _Integers):
        values = np.empty(n, dtype=object)
        for node, r, _ in pieces:
            acc = np.zeros(node.hi - node.lo, dtype=object)
            x = pts[node.lo: node.hi].astype(object)
            for c in r[::-1].tolist():
                acc = acc * x + c
            values[node.lo: node.hi] = acc
        return ring.to_result(values), None
    width = max(r.shape[0] for _, r, _ in pieces)
    size = max(node.hi - node.lo for node, _, _ in pieces)
    dtype = np.result_type(pts.dtype, *(r.dtype for _, r, _ in pieces))
    coeffs = np.zeros((len(pieces), width), dtype=dtype)
    x = np.zeros((len(pieces), size), dtype=pts.dtype)
    for row, (node, r, _) in enumerate(pieces):
        coeffs[row, : r.shape[0]] = r
        x[row, : node.hi - node.lo] = pts[node.lo: node.hi]
    acc = np.zeros(x.shape, dtype=dtype)
    for k in range(width - 1, -1, -1):
        if isinstance(ring, _Floats):
            acc = acc * x + coeffs[:, k: k + 1]
        else:
            acc = vadd(ring, vmul(ring, acc, x), np.broadcast_to(coeffs[:, k: k + 1], x.shape))
    values = np.empty(n, dtype=dtype)
    bounds = np.zeros(n)
    extra = mb.horner_errors(coeffs, x) if with_errors else None
    for row, (node, _, err) in enumerate(pieces):
        values[node.lo: node.hi] = acc[row, : node.hi - node.lo]
        if with_errors:
            bounds[node.lo: node.hi] = err + extra[row, : node.hi - node.lo]
    return values, bounds


# ----------------------------------------------------------------------------- interpolation


def _combine_up(ring: _Ring, node: _Node, c: np.ndarray, pts: np.ndarray) -> np.ndarray:
    """``sum_(i in node) c_i prod_(j in node, j != i) (x - x_j)`` (``node.poly`` has degree
    ``hi - lo``; the result has ``hi - lo`` coefficients)."""
    if node.children:
        left, right = node.children
        a = ring.mul(_combine_up(ring, left, c, pts), right.poly)
        b = ring.mul(_combine_up(ring, right, c, pts), left.poly)
        size = node.hi - node.lo
        return vadd(ring, a[:size], b[:size]) if not isinstance(ring, _Floats) else (
            a[:size] + b[:size])
    return _leaf_combination(ring, node.poly, pts[node.lo: node.hi], c[node.lo: node.hi])


def _leaf_combination(ring: _Ring, poly: np.ndarray, x: np.ndarray, c: np.ndarray) -> np.ndarray:
    """``sum_i c_i poly / (x - x_i)`` for the roots ``x_i`` of ``poly``: synthetic division
    (Horner's scheme) by every ``x - x_i`` at once, the quotients' coefficients summed with the
    weights as they appear."""
    d = poly.shape[0] - 1
    out = ring.zeros(d)
    if isinstance(ring, _Integers):
        raise TypeError("interpolation needs floats or a modulus")
    acc = ring.zeros(x.shape[0]).astype(np.result_type(x.dtype, poly.dtype))
    for k in range(d, 0, -1):
        top = np.broadcast_to(poly[k: k + 1], x.shape)
        if isinstance(ring, _Floats):
            acc = acc * x + top
            out[k - 1] = np.dot(c, acc)
        else:
            acc = vadd(ring, vmul(ring, acc, x), np.ascontiguousarray(top))
            out[k - 1] = _sum_mod(vmul(ring, c, acc), ring.modulus)
    return out


def _sum_mod(x: np.ndarray, m: int) -> int:
    if x.dtype == np.int64 and m < 2**31:
        return int(np.sum(x) % m)  # at most 64 terms below 2^31
    return sum(int(v) for v in x) % m
