"""polyconv.dist: probability distributions on lattices, computed by convolution.

Sums of independent random variables (``X + Y``, :meth:`Lattice.nfold`), compound distributions
(:func:`compound`), continuous laws put on a lattice (:meth:`Lattice.from_law`, bracketed by
:func:`law_bracket`, to a stated precision by :func:`bracket_to_goal`; grids sized for a
:class:`Goal` by :func:`aggregate_for_goal`), delay networks
(:func:`series`, :func:`all_of`, :func:`first_of`, :func:`mixture`, :func:`kth_of`,
:func:`retry`, :func:`hedge`, :class:`Network` with shared stages drawn once, measured samples
via :meth:`Lattice.from_samples` / :func:`from_histogram` with their DKW band, sensitivity
:func:`stage_effects` / :func:`required_speedup`, :func:`reliability` / :func:`hazard`) and
risk measures (quantile,
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

from .brackets import Bracket, GoalBracket, bracket_to_goal, law_bracket
from .compound import compound
from .delays import all_of, first_of, mixture, series
from .errors import AccuracyWarning, TruncationWarning
from .goals import Goal, aggregate_for_goal
from .lattice import Lattice
from .ledger import Bounded, ErrorLedger
from .network import Block, Network
from .order_stats import kth_of
from .reliability import hazard, reliability
from .retry import hedge, retry
from .samples import dkw_epsilon, from_histogram
from .sensitivity import required_speedup, stage_effects
from .step_check import CoarseStepWarning, StepCheck, check_step

__all__ = [
    "Lattice",
    "ErrorLedger",
    "Bounded",
    "compound",
    "series",
    "all_of",
    "first_of",
    "mixture",
    "AccuracyWarning",
    "TruncationWarning",
    "CoarseStepWarning",
    "StepCheck",
    "check_step",
    "law_bracket",
    "bracket_to_goal",
    "GoalBracket",
    "Bracket",
    "Goal",
    "aggregate_for_goal",
    "kth_of",
    "retry",
    "hedge",
    "Network",
    "Block",
    "from_histogram",
    "dkw_epsilon",
    "stage_effects",
    "required_speedup",
    "reliability",
    "hazard",
]
