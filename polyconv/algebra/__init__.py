"""Polynomial algebra on top of :func:`polyconv.convolve`: powers, products, inverses, division.

Every product here is one call of :func:`polyconv.convolve`, so these functions get faster whenever
the engines behind it do; the one exception is the chain of exact integer products inside
:func:`power` and :func:`product` once coefficients outgrow int64: those intermediates stay as
byte rows (:mod:`polyconv.engines._intpack`) and are multiplied by
:func:`polyconv.engines.kronecker.multiply_rows`, so Python ints are created once, at the end.
Sequences are polynomials with coefficient ``i`` that of ``x**i`` (lowest degree first, as
:func:`numpy.convolve`).  Only 1-D sequences are accepted.

Arithmetic follows the inputs, as for :func:`polyconv.convolve`:

* integers (numpy integer or bool dtypes, or object arrays of Python ints): exact.  Results are
  int64 when every coefficient fits, otherwise object arrays of Python ints;
* ``modulus=m`` (integer inputs only): coefficients in ``[0, m)``, int64 when ``m <= 2**63``;
* floats: float64 (complex128 if any input is complex).

Algorithms and sources

* :func:`power`: left-to-right binary powering (Knuth, TAOCP vol. 2, section 4.6.3), truncating
  every intermediate product to ``length`` when given.
* :func:`product`: a balanced product tree built with a heap, always multiplying the two shortest
  sequences (the Huffman-tree order; von zur Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed.,
  section 10.1 for product trees).
* :func:`inverse_series`: Newton iteration ``b <- b (2 - a b) mod x^(2k)`` (Modern Computer
  Algebra, Algorithm 9.3; Brent & Kung, J. ACM 25 (1978)), with each step written as one *middle
  product* (the coefficients ``k..2k-1`` of ``a b``, a "valid"-mode convolution) and one truncated
  product (Hanrot, Quercia & Zimmermann, "The middle product algorithm I", AAECC 14 (2004)).
* :func:`poly_divmod`: quotient from the reversed series inverse (Modern Computer Algebra,
  Algorithm 9.5), schoolbook long division for short quotients.

Modules: :mod:`.rings` (coefficient rings, the one product call, the work form of integer chains),
:mod:`.checks` (argument and memory-budget checks), :mod:`.products` (power, product trees),
:mod:`.series` (Newton inverse), :mod:`.division` (poly_divmod).
"""

from __future__ import annotations

from .division import ZeroDivisorError, poly_divmod
from .products import power, product
from .rings import counting_products
from .series import inverse_series

__all__ = ["power", "product", "inverse_series", "poly_divmod", "counting_products",
           "ZeroDivisorError"]
