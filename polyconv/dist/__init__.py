"""polyconv.dist: probability distributions on lattices, computed by convolution.

Sums of independent random variables (``X + Y``, :meth:`Lattice.nfold`), compound distributions
(:func:`compound`), discretisation of continuous laws (:func:`discretize`), delay networks
(:func:`series`, :func:`all_of`, :func:`first_of`, :func:`mixture`) and risk measures (quantile,
VaR, TVaR, stop-loss) on :class:`Lattice` objects.  Each Lattice carries an
:class:`ErrorLedger` (computed-error bounds per point and in L1, truncated mass, where it may lie
and its first moment); every query has a certified range (:meth:`Lattice.bounded` returns a
:class:`Bounded`), quantiles are the lattice's own (never below), and answers whose range is too
wide warn (:class:`AccuracyWarning`) or come back ``nan`` rather than print rounding noise.

Cautions
--------
Results are model outputs, not advice.  They rest on stated assumptions: independence (of the
summands, of claim counts and severities, of the branches of a delay network), discretisation of
continuous laws onto a lattice, and truncation of infinite supports to a finite grid (the missing
mass is reported as ``truncated_mass``, never renormalised away).  Before using them for reserves,
capital, prices or deadlines, check them against local regulation and codes and against qualified
actuarial or engineering practice.
"""

from .compound import compound
from .delays import all_of, first_of, mixture, series
from .discretize import discretize
from .errors import AccuracyWarning, TruncationWarning
from .lattice import Lattice
from .ledger import Bounded, ErrorLedger

__all__ = [
    "Lattice",
    "ErrorLedger",
    "Bounded",
    "discretize",
    "compound",
    "series",
    "all_of",
    "first_of",
    "mixture",
    "AccuracyWarning",
    "TruncationWarning",
]
