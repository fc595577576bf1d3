"""Warning classes of :mod:`polyconv.dist`."""

from __future__ import annotations


class AccuracyWarning(UserWarning):
    """A requested probability or risk measure lies below the Lattice's ``trust_floor``.

    The number would be rounding noise, so the measure is returned as ``nan`` (quantiles, tail
    measures) or flagged (probabilities); see :attr:`polyconv.dist.Lattice.trust_floor`.
    """


class TruncationWarning(UserWarning):
    """A result depends on probability mass that lies beyond the lattice (``truncated_mass``)."""
