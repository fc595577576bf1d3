"""A reported value always lies inside its own certified range.

Regression: on a compound whose grid cuts off tail mass, the lattice's own TVaR and stop-loss
leave that mass out while the certified range counts it, so the value fell below the range's
low end (an optimistic TVaR, e.g. 1640.9 against a range [1710.9, 1768.3]).  The reference is
the same lattice model on a grid four times longer, where the mass beyond is below 1e-30
(common practice, no source): its answers must lie inside the short grid's ranges.
"""

import warnings

import pytest
from scipy import stats

from polyconv.dist import Lattice, compound


@pytest.fixture(scope="module")
def severity():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return Lattice.from_law(stats.expon(scale=100.0), step=1.0, size=8000)


@pytest.mark.parametrize("size", [1800, 2200, 3000])
def test_tvar_stop_loss_and_mean_inside_their_ranges(severity, size):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        short = compound(stats.poisson(5.0), severity, size=size)
        long = compound(stats.poisson(5.0), severity, size=4 * size)
        for measure, arg in (("tvar", 0.995), ("tvar", 0.99), ("stop_loss", 1500.0),
                             ("mean", None)):
            got = short.bounded(measure, arg, rtol=1.0)
            ref = long.bounded(measure, arg)
            assert not got.refused and not ref.refused, (measure, arg)
            assert got.low <= got.value <= got.high, (measure, arg, got)
            assert got.low <= ref.value <= got.high, (measure, arg, got, ref)
