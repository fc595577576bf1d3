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

from .allocation import Contributions, split_contributions, tvar_contributions
from .brackets import Bracket, GoalBracket, bracket_to_goal, law_bracket
from .claims_data import claims_counts, claims_severity
from .compound import compound
from .count_laws import empirical_counts, mixed_poisson, zero_modified, zero_truncated
from .delays import all_of, first_of, mixture, series
from .distortion import layer_table, proportional_hazard, wang
from .errors import AccuracyWarning, TruncationWarning
from .exceedance import (
    aggregate_exceedance,
    largest_claim,
    occurrence_exceedance,
    return_period_table,
)
from .goal_aggregate import aggregate_for_goal
from .goals import Goal
from .lattice import Lattice
from .law_ops import censored, inflated, left_truncated, splice
from .law_ops import mixture as law_mixture
from .ledger import Bounded, ErrorLedger
from .network import Block, Network
from .order_stats import kth_of
from .portfolio import portfolio, regrid
from .reinsurance import XoLLayer, quota_share, surplus_share, xol_programme
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
    # actuarial toolkit (issue 14)
    "XoLLayer", "xol_programme", "quota_share", "surplus_share",
    "portfolio", "regrid", "tvar_contributions", "split_contributions", "Contributions",
    "zero_truncated", "zero_modified", "mixed_poisson", "empirical_counts",
    "splice", "law_mixture", "left_truncated", "censored", "inflated",
    "largest_claim", "occurrence_exceedance", "aggregate_exceedance", "return_period_table",
    "claims_severity", "claims_counts", "wang", "proportional_hazard", "layer_table",
]

