"""``polyconv.dist`` families: lattices, queries, answers and goals, laws, compounds."""

from __future__ import annotations

import math
import random
from fractions import Fraction
from pathlib import Path

from .common import CaseTimeout, classify_exception, hostile_sequence


def case_dist_answers(rng: random.Random, work: Path):
    """``Lattice.bounded`` / ``quantile_bracket`` and ``Goal`` with hostile measures and
    tolerances; a range must contain the direct sum it brackets."""
    import numpy as np

    from polyconv import dist

    names = ["measure", "arg", "rtol", "atol", "tol", "p", "level", "measures", "max_points",
             "goal", "point", "retention", "bounded", "quantile_bracket",
             "d", "x"]  # bounded(measure, arg) names arg as the measure's own: stop_loss(d)
    try:
        if rng.random() < 0.3:
            measures = rng.choice([[("var", 0.995)], [("tvar", 1.5)], [], [("bogus", 1)],
                                   [("cdf", float("nan"))], "var", [("mean", None)], None,
                                   [("sf", 1e300)], [("quantile", True)]])
            dist.Goal(measures, rtol=rng.choice([1e-4, 0, -1, float("nan"), "1", 1e300]),
                      atol=rng.choice([0.0, 0.0, 1.0, -1.0]),
                      max_points=rng.choice([2**16, 1, 2.5, 2**40, True]))
            return "ok", ""
        pmf = rng.choice([[0.2, 0.3, 0.5], [1.0], [0.25] * 4, [0.1] * 10])
        lat = dist.Lattice(pmf, rng.choice([1.0, 0.5, 1e-300, 1e300]))
        if rng.random() < 0.3:
            p = rng.choice([0.5, 0.9, 0.0, 1.0, -0.1, float("nan"), "0.5", True, 1 - 1e-17])
            lo, hi = lat.quantile_bracket(p, tol=rng.choice([None, 1e-9, 0.0, -1.0, "x"]))
            if isinstance(p, float) and 0 <= p <= 1 and not lo <= float(lat.quantile(p)) <= hi:
                return "wrong", f"quantile_bracket({p!r}) = ({lo}, {hi}) misses quantile " \
                                f"{lat.quantile(p)}"
            return "ok", ""
        measure = rng.choice(["cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean", "std",
                              "bogus", None, 3])
        arg = rng.choice([None, 0.5, 1.0, 0.99, 2.0, -1.0, float("inf"), float("nan"), 1e300,
                          "1", True])
        answer = lat.bounded(measure, arg, rtol=rng.choice([None, None, 1e-3, 0.0, -1.0,
                                                            float("nan"), "x"]))
        if measure in ("cdf", "sf") and isinstance(arg, float) and math.isfinite(arg) and \
                not answer.refused:
            v, q = lat.values, np.asarray(lat.pmf)
            at = arg + 1e-9 * lat.step  # documented: within 1e-9 steps of a point counts as it
            ref = float(q[v <= at].sum()) if measure == "cdf" else float(q[v > at].sum())
            if not answer.low - 1e-12 <= ref <= answer.high + 1e-12:
                return "wrong", f"bounded({measure!r}, {arg!r}) = [{answer.low}, " \
                                f"{answer.high}] misses the direct sum {ref}"
    except BaseException as exc:  # noqa: BLE001
        if isinstance(exc, CaseTimeout):
            raise
        return classify_exception(exc, names)
    return "ok", ""


def case_dist(rng: random.Random, work: Path):
    import numpy as np
    from scipy import stats

    from polyconv import dist

    names = ["pmf", "step", "origin", "trust_floor", "x", "p", "d", "deductible", "limit",
             "law", "rule",
             "n", "counts", "severity", "method", "size", "dist", "delays", "delay", "weights",
             "k",
             "level", "probability", "quantile", "Lattice", "lattice"]
    pick = rng.randrange(4)
    try:
        if pick == 0:
            pmf = rng.choice([[0.5, 0.5], [0.2, 0.3, 0.5], [1.0], [0.25] * 4,
                              hostile_sequence(rng), [1.0, 1.0], [-0.1, 1.1], [0.5, float("nan")]])
            step = rng.choice([1.0, 1.0, 0.5, 0, -1, float("nan"), 1e-300, 1e300, "1", None])
            origin = rng.choice([0.0, 0.0, 2.0, -1.0, float("inf"), 1e300])
            floor = rng.choice([0.0, 0.0, 1e-12, 1.0, -1.0, float("nan")])
            lat = dist.Lattice(pmf, step, origin, trust_floor=floor)
            p = np.asarray(lat.pmf)
            if p.sum() > 1 + 1e-9 or np.any(p < 0):
                return "wrong", f"Lattice({pmf!r}, trust_floor={floor}) has total {p.sum()}"
            x = rng.choice([0.0, 0.5, 1.0, 2.0, 1e19, -1e19, float("inf"), float("-inf"),
                            float("nan"), "0.5", True, None, [0.5, 1.5], 2**70])
            query = rng.choice(["cdf", "sf", "stop_loss"])
            got = getattr(lat, query)(x)
            if isinstance(x, float) and not math.isnan(x) and np.ndim(got) == 0:
                v = lat.values
                if math.isfinite(x) and p.size <= 4096:  # points in exact arithmetic: origin +
                    o, h, fx = Fraction(lat.origin), Fraction(lat.step), Fraction(x)  # step k
                    snap = Fraction(1, 10**9) * h  # may collapse in float (step 1e-300 at 2)
                    at_or_below = np.array([o + h * k <= fx + snap for k in range(p.size)])
                else:
                    at_or_below = v <= x + 1e-9 * lat.step
                beyond_grid = lat.truncated_mass > 0 and x >= float(v[-1])
                if math.isnan(float(got)) and query in ("cdf", "sf") and beyond_grid:
                    return "ok", ""  # documented: beyond the grid a bound and a warning (#11/5)
                if query == "cdf":
                    # documented: x within 1e-9 steps of a point counts as it; at +inf the
                    # mass beyond the grid (at finite points) counts too
                    ref = float(p[at_or_below].sum()) + \
                        (lat.truncated_mass if x == math.inf else 0.0)
                elif query == "sf":
                    # the mass beyond the grid sits at finite points: none of it is above +inf
                    ref = float(p[~at_or_below].sum()) + \
                        (lat.truncated_mass if x != math.inf else 0.0)
                else:
                    ref = float(np.sum(p * np.maximum(v - x, 0))) if math.isfinite(x) else \
                        (0.0 if x > 0 else math.inf)
                answer = float(got)
                if math.isnan(answer) and query == "stop_loss":
                    # documented refusal (AccuracyWarning, NaN): the certified range is wider
                    # than rtol, e.g. with trust_floor=1.0; that range must hold the sum
                    bounded = lat.bounded("stop_loss", x)
                    # with mass beyond the grid the exact value is the sum plus that mass's
                    # part, unknown but >= 0: the range need only reach at or above the sum
                    low_ok = lat.truncated_mass > 0 or \
                        bounded.low - 1e-9 * max(1.0, abs(ref)) <= ref
                    if not (bounded.refused and low_ok
                            and ref <= bounded.high + 1e-9 * max(1.0, abs(ref))):
                        return "wrong", f"Lattice({pmf!r}, {step}, {origin}, trust_floor=" \
                                        f"{floor}).stop_loss({x!r}) = nan, range " \
                                        f"[{bounded.low}, {bounded.high}], sum {ref!r}"
                elif not (answer == ref or abs(answer - ref) <= 1e-9 * max(1.0, abs(ref))
                          + lat.trust_floor * p.size) and \
                        not (query == "stop_loss" and lat.truncated_mass > 0):
                    return "wrong", f"Lattice({pmf!r}, {step}, {origin}).{query}({x!r}) = " \
                                    f"{got!r}, direct sum {ref!r}"
            elif isinstance(x, float) and math.isnan(x) and np.ndim(got) == 0 and \
                    not math.isnan(float(got)):
                return "wrong", f"Lattice.{query}(nan) = {got!r}"
        elif pick == 1:
            lat = dist.Lattice([0.2, 0.3, 0.5])
            p = rng.choice([0.5, 0.9, 0.0, 1.0, -0.1, 1.1, float("nan"), "0.5", True, None,
                            [0.5, 0.9], 1 - 1e-17])
            fn = rng.choice(["quantile", "value_at_risk", "tail_value_at_risk", "nfold",
                             "layer", "moment"])
            if fn == "nfold":
                lat.nfold(rng.choice([0, 1, 3, -1, 2.5, 2**40, True, "2"]))
            elif fn == "layer":
                lat.layer(rng.choice([0.0, 1.0, -1.0, 1e300, float("nan"), "1"]),
                          rng.choice([math.inf, 1.0, 0.0, -1.0, float("nan")]))
            elif fn == "moment":
                lat.moment(rng.choice([0, 1, 2, -1, 2.5, 10**6, "1"]))
            else:
                got = getattr(lat, fn)(p)
                if fn == "quantile" and isinstance(p, float) and 0 <= p <= 1 and \
                        not isinstance(p, bool):
                    cdf = np.cumsum([0.2, 0.3, 0.5])
                    ref = float(np.argmax(cdf >= p - 1e-12)) if p > 0 else 0.0
                    if not math.isnan(float(got)) and abs(float(got) - ref) > 1e-9:
                        return "wrong", f"quantile({p!r}) = {got!r}, cdf gives {ref}"
        elif pick == 2:
            law = rng.choice([stats.gamma(2.0), stats.lognorm(1.0, scale=5.0), stats.expon(),
                              stats.norm(), stats.gamma, stats.poisson(3), "gamma", None])
            step = rng.choice([1.0, 0.1, 0, -1.0, float("nan"), 1e-300, 1e300])
            size = rng.choice([None, 10, 2, 1, 0, -5, 2**40, 3.5])
            rule = rng.choice(["nearest", "down", "up", "moments", "bogus", None, 3])
            if rng.random() < 0.2:
                dist.check_step(law, step=step, rule=rule, size=size, warn=False)
                return "ok", ""
            lat = dist.Lattice.from_law(law, step=step, size=size, rule=rule)
            p = np.asarray(lat.pmf)
            if np.any(p < 0) or p.sum() > 1 + 1e-9:
                return "wrong", f"from_law({law!r}, step={step}, rule={rule}): mass {p.sum()}"
            frozen = getattr(law, "dist", None) is not None and hasattr(law, "cdf")
            if frozen and rule in ("nearest", "down", "up") and lat.step > 0:
                # oracle: the law's own cdf (scipy); a lattice cdf at a point moves the mass of
                # at most the neighbouring cells (common practice, no source)
                h, x = lat.step, lat.values[: min(p.size, 50)]
                got = np.cumsum(p)[: x.size]
                lo, hi = law.cdf(x - h) - 1e-9, law.cdf(x + h) + 1e-9
                if np.any(got < lo) or np.any(got > hi):
                    j = int(np.argmax((got < lo) | (got > hi)))
                    return "wrong", (f"from_law({law.dist.name}, step={step}, rule={rule}): "
                                     f"cdf at {x[j]} is {got[j]}, law gives {law.cdf(x[j])}")
        else:
            sev = dist.Lattice([0.0, 0.5, 0.5])
            fn = rng.choice(["compound", "series", "all_of", "first_of", "mixture"])
            if fn == "compound":
                counts = rng.choice([stats.poisson(2.0), stats.nbinom(3, 0.4), stats.binom(5, 0.3),
                                     stats.poisson(1e9), stats.poisson, 3, None])
                dist.compound(counts, sev, size=rng.choice([None, 64, 0, -1, 2**40]),
                              method=rng.choice(["auto", "fft", "recursion", "x"]))
            elif fn == "mixture":
                w = rng.choice([[0.5, 0.5], [0.5, 0.5 + 1e-13], [1.0, 0.1], [-1, 2], "ab",
                                [float("nan"), 1]])
                dist.mixture(w, [sev, sev])
            else:
                args = rng.choice([[sev, sev], [], [sev, dist.Lattice([1.0], 0.5)], [sev, 3],
                                   [sev, None]])
                getattr(dist, fn)(*args)
    except BaseException as exc:  # noqa: BLE001
        return classify_exception(exc, names)
    return "ok", ""


