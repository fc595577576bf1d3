"""A-posteriori error bounds of float multipoint evaluation (:mod:`polyconv.algebra.multipoint`).

Notation: ``u = 2^-53``, ``gamma_k = k u / (1 - k u)`` (Higham, *Accuracy and Stability of
Numerical Algorithms*, 2nd ed., Lemma 3.1); ``M_N`` the exact node polynomial
``prod (x - x_i)`` and ``M~_N`` the computed one, ``|M~_N - M_N|_j <= E_N`` for every ``j``.

* Leaves: ``p <- x p - c p`` perturbs each of the ``2s`` products and sums of a coefficient's
  terms by a factor ``1 + theta``, ``|theta| <= gamma_(2s)`` (``gamma_(5s)`` for complex: a
  complex product costs ``sqrt(2) gamma_2``; Higham 3.6), so
  ``E_leaf = gamma_(2s) max_j [prod (x + |x_i|)]_j``.
* Internal nodes: ``M~_N = M~_L M~_R + eta`` with ``|eta_j| <= beta`` from
  :func:`polyconv.error_bound` (Percival's bound for the FFT engines, under the assumptions
  stated there), so ``E_N <= beta + E_L ||M~_R||_1 + E_R ||M~_L||_1 + E_L E_R min(len)``.
* A remainder step ``(q, r') = divmod(r, M~_C)``: with ``delta = r - q M~_C - r'`` (computed, plus
  the rounding of computing it: ``beta(q, M~_C) + gamma_2 (|r| + |q M~_C| + |r'|)``), at every
  point ``x`` of ``C`` we have ``M~_C(x) = M~_C(x) - M_C(x)``, hence
  ``r'(x) - f(x) = (r(x) - f(x)) - q(x) (M~_C - M_C)(x) - delta(x)``: the step adds at most
  ``|q|(rho) E_C sum_(j<=deg) rho^j + |delta|(rho)``, ``rho = max |x|`` over ``C``.
* The leaves' Horner evaluation adds ``gamma_(2L) sum_k |c_k| |x|^k`` (Higham, eq. (5.3);
  ``gamma_(5L)`` complex).

Every bound is itself computed in floating point with non-negative terms only; it is enlarged
by ``1 + gamma`` of its own length and by the factor ``_UP`` (covering the few extra roundings
of sums up to ``2^32`` terms).  Overflow gives ``inf``.
"""

from __future__ import annotations

import numpy as np

from ..pipeline.prepare import error_bound

__all__ = ["division_error", "horner_errors", "horner_scale", "leaf_errors", "product_error"]

_U = 2.0**-53
_UP = 1 + 2.0**-20


def gamma(k: int) -> float:
    """``k u / (1 - k u)`` (``inf`` when ``k u >= 1``)."""
    return k * _U / (1 - k * _U) if k * _U < 1 else float("inf")


def _steps(dtype: np.dtype) -> int:
    return 5 if np.dtype(dtype).kind == "c" else 2


def _positive_horner(coeffs: np.ndarray, rho: np.ndarray | float):
    """``sum_k coeffs_k rho^k`` for non-negative ``coeffs`` (last axis), enlarged for its own
    rounding."""
    acc = np.zeros(np.broadcast(coeffs[..., 0], rho).shape)
    for k in range(coeffs.shape[-1] - 1, -1, -1):
        acc = acc * rho + coeffs[..., k]
    return acc * (1 + gamma(2 * coeffs.shape[-1])) * _UP


def leaf_errors(block: np.ndarray, ring) -> list[float]:
    """``E_leaf`` for each row of points (a leaf)."""
    count, size = block.shape
    q = np.zeros((count, size + 1))
    q[:, 0] = 1.0
    mags = np.abs(block)
    for j in range(size):
        shifted = np.zeros_like(q)
        shifted[:, 1:] = q[:, :-1]
        q = shifted + mags[:, j: j + 1] * q
    factor = gamma(_steps(block.dtype) * size) * (1 + gamma(2 * size)) * _UP
    return (q.max(axis=1) * factor).tolist()


def product_error(left, right) -> float:
    """``E_N`` of ``M~_L M~_R`` from the children's bounds."""
    beta = error_bound(left.poly, right.poly)
    norm_l, norm_r = float(np.abs(left.poly).sum()), float(np.abs(right.poly).sum())
    shortest = min(left.poly.shape[0], right.poly.shape[0])
    total = beta + left.error * norm_r + right.error * norm_l + left.error * right.error * shortest
    return total * (1 + gamma(left.poly.shape[0] + right.poly.shape[0])) * _UP


def division_error(r: np.ndarray, q: np.ndarray, rem: np.ndarray, node, x: np.ndarray) -> float:
    """What one remainder step ``r mod node.poly`` adds to the error at the node's points."""
    n = r.shape[0]
    qm = np.convolve(q, node.poly) if q.shape[0] * node.poly.shape[0] <= 4096 else None
    beta = 0.0
    if qm is None:
        from ..pipeline.execute import convolve
        qm = convolve(q, node.poly)
        beta = error_bound(q, node.poly)
    else:  # numpy's direct sum: gamma_m ||q||_2 ||M||_2 (Higham 3.1 with Cauchy-Schwarz)
        beta = gamma(min(q.shape[0], node.poly.shape[0])) * float(
            np.linalg.norm(q) * np.linalg.norm(node.poly))
    qm = _pad(qm, n)
    r_pad, rem_pad = _pad(r, n), _pad(rem, n)
    delta = np.abs(r_pad - qm - rem_pad)
    delta += beta + gamma(3) * (np.abs(r_pad) + np.abs(qm) + np.abs(rem_pad))
    rho = float(np.abs(x).max()) if x.size else 0.0
    deg = node.poly.shape[0] - 1
    q_at = _positive_horner(np.abs(q), rho)
    powers = _positive_horner(np.ones(deg + 1), rho)
    return float((q_at * node.error * powers + _positive_horner(delta, rho)) * _UP)


def horner_scale(coeffs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``sum_k |f_k| |x_i|^k`` per point (the scale of Horner's rounding error)."""
    acc = np.zeros(x.shape[0])
    ax, mags = np.abs(x), np.abs(coeffs)
    with np.errstate(over="ignore"):
        for k in range(coeffs.shape[0] - 1, -1, -1):
            acc = acc * ax + mags[k]
    return acc


def horner_errors(coeffs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Rounding bounds of Horner's rule for rows of ``coeffs`` at rows of points ``x``."""
    width = coeffs.shape[1]
    mags = np.abs(coeffs)
    acc = np.zeros(x.shape)
    ax = np.abs(x)
    for k in range(width - 1, -1, -1):
        acc = acc * ax + mags[:, k: k + 1]
    steps = _steps(np.result_type(coeffs.dtype, x.dtype))
    return acc * gamma(steps * width) * (1 + gamma(2 * width)) * _UP


def _pad(x: np.ndarray, n: int) -> np.ndarray:
    out = np.zeros(n, dtype=x.dtype)
    k = min(n, x.shape[0])
    out[:k] = x[:k]
    return out
