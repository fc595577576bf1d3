"""Claim-count and severity laws of an ``aggregate`` spec, beyond the plain forms.

Counts (``[claims]``, key ``law``):

``poisson`` (``mean``), ``negative-binomial`` (``mean``, ``variance``), ``binomial`` (``trials``,
``probability``)
    The ``(a, b, 0)`` laws.
``zero-truncated`` (``base``), ``zero-modified`` (``base``, ``p0``)
    The ``(a, b, 1)`` laws of :func:`polyconv.dist.zero_truncated` / ``zero_modified`` from a
    ``base = { law = "poisson", mean = 2.0 }`` table; compounded by their ``(a, b, 1)`` recursion.
``mixed-poisson`` (``mean``, ``mixing`` = ``"gamma"`` | ``"inverse-gaussian"`` | ``"lognormal"``,
``cv``)
    :func:`polyconv.dist.mixed_poisson` (gamma: the negative binomial; others by quadrature).
``empirical`` (``values`` + ``probabilities``, or ``per_year`` observed counts, or
``claims_file`` + ``years = [first, last]``)
    :func:`polyconv.dist.empirical_counts` / :func:`polyconv.dist.claims_counts` (with the
    sample-size caveats in the report).

Severities (``[severity]``): the forms of :mod:`polyconv.cli.laws`, plus

``law = "splice"`` with ``threshold``, ``below`` and ``above`` (two law tables) and optional
``weight_below``; ``law = "mixture"`` with ``components = [{ weight, law, params }, ...]``;
``claims_file = "claims.csv"`` (column ``amount``) as an empirical severity with its caveats;
and on any continuous form the modifiers ``truncate_below`` (losses at or below it are never
reported; ``shift = true`` for the excess), ``censor_at`` (a per-claim cap) and ``inflation``
(a factor applied before discretisation; on a table, :meth:`Lattice.scaled` keeping the mean).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from pathlib import Path

from ..dist import Lattice, law_ops
from ..dist import count_laws as cl
from ..dist.claims_data import claims_counts, claims_severity
from ..dist.law_moments import law_mean, limited_mean
from . import laws
from .spec import Section

BASE_LAWS = ("poisson", "negative-binomial", "binomial")
COUNT_LAWS = BASE_LAWS + ("zero-truncated", "zero-modified", "mixed-poisson", "empirical")
MIXINGS = ("gamma", "inverse-gaussian", "lognormal")
MODIFIERS = ("truncate_below", "shift", "censor_at", "inflation")


@dataclass
class Counts:
    """A parsed claim-count law."""

    law: object
    text: str
    caveats: list[str] = field(default_factory=list)


def parse_counts(sec: Section) -> Counts:
    """The claim-count law of ``sec`` (module docstring)."""
    law = sec.string("law", choices=COUNT_LAWS)
    if law in BASE_LAWS:
        frozen, text = _base(sec, law)
        return Counts(frozen, text)
    if law in ("zero-truncated", "zero-modified"):
        sec.check_keys(("law", "base") + (("p0",) if law == "zero-modified" else ()))
        base = sec.table("base")
        frozen, text = _base(base, base.string("law", choices=BASE_LAWS))
        if law == "zero-truncated":
            try:
                return Counts(cl.zero_truncated(frozen), f"zero-truncated {text}")
            except ValueError as exc:
                raise sec.error("base", str(exc)) from None
        p0 = sec.number("p0", minimum=0.0, below=1.0)
        try:
            return Counts(cl.zero_modified(frozen, p0), f"zero-modified {text}, P(N = 0) = {p0:g}")
        except ValueError as exc:
            raise sec.error("base", str(exc)) from None
    if law == "mixed-poisson":
        sec.check_keys(("law", "mean", "mixing", "cv"))
        mean = sec.number("mean", positive=True)
        mixing = sec.string("mixing", choices=MIXINGS)
        cv = sec.number("cv", positive=True)
        frozen = cl.mixed_poisson(mean, mixing, cv)
        caveats = []
        gap = getattr(frozen, "quadrature_gap", 0.0)
        if gap:
            caveats.append(f"mixed Poisson ({mixing}) by {cl.QUADRATURE_NODES}-node quadrature: "
                           f"its variance differs from the exact mixed variance by {gap:.3g}")
        return Counts(frozen, f"mixed Poisson ({mixing} mixing), mean {mean:g}, cv {cv:g}",
                      caveats)
    return _empirical(sec)


def _base(sec: Section, law: str) -> tuple[object, str]:
    from scipy import stats  # on first use: every command builds the parser (test_import_light)

    if law == "poisson":
        sec.check_keys(("law", "mean"))
        mean = sec.number("mean", minimum=0.0)
        return stats.poisson(mean), f"Poisson, mean {mean:g}"
    if law == "negative-binomial":
        sec.check_keys(("law", "mean", "variance"))
        mean = sec.number("mean", positive=True)
        var = sec.number("variance", positive=True)
        if not var > mean:
            raise sec.error("variance", f"must exceed the mean ({mean:g}) for a negative "
                            f"binomial; got {var:g} (equal: use law = \"poisson\")")
        size, prob = mean * mean / (var - mean), mean / var
        if not (size > 0 and prob > 0 and math.isfinite(size)):
            raise sec.error("mean", f"and variance ({mean:g}, {var:g}) give a negative binomial "
                            f"with n = {size:g}, p = {prob:g} beyond the float range; give a "
                            f"mean and variance whose ratio and mean^2 / (variance - mean) "
                            f"are positive finite numbers")
        return stats.nbinom(size, prob), f"negative binomial, mean {mean:g}, variance {var:g}"
    sec.check_keys(("law", "trials", "probability"))
    trials = sec.integer("trials", minimum=0)
    prob = sec.number("probability", minimum=0.0, maximum=1.0)
    return stats.binom(trials, prob), f"binomial, {trials} trials, probability {prob:g}"


def _empirical(sec: Section) -> Counts:
    sec.check_keys(("law", "values", "probabilities", "per_year", "claims_file", "years"))
    forms = [k for k in ("values", "per_year", "claims_file") if sec.has(k)]
    if len(forms) != 1:
        raise sec.error("law", "an empirical count law needs exactly one of 'values' (with "
                        "'probabilities'), 'per_year' or 'claims_file' (with 'years')")
    if forms[0] == "values":
        values = sec.numbers("values", minimum=0.0)
        probs = sec.numbers_like("probabilities", values, minimum=0.0)
        try:
            law = cl.empirical_counts(values, probs)
        except ValueError as exc:
            raise sec.error("values", str(exc)) from None
        return Counts(law, f"empirical table of {len(values)} claim counts")
    if forms[0] == "per_year":
        per_year = sec.numbers("per_year", minimum=0.0)
    else:
        years = sec.numbers("years")
        if len(years) != 2 or years[0] > years[1] or any(y != int(y) for y in years):
            raise sec.error("years", "must be [first, last]: the whole years observed")
        rows = read_claims_file(sec, "claims_file", "year")
        first, last = int(years[0]), int(years[1])
        outside = [y for y in rows if not first <= y <= last]
        if outside:
            raise sec.error("claims_file", f"has claims in year {outside[0]:g}, outside "
                            f"years = [{first}, {last}]")
        per_year = [sum(1 for y in rows if int(y) == t) for t in range(first, last + 1)]
    try:
        data = claims_counts(per_year)
    except ValueError as exc:
        raise sec.error(forms[0], str(exc)) from None
    return Counts(data.law, f"empirical, claim counts of {data.n} observed years", data.caveats)


def read_claims_file(sec: Section, key: str, column: str) -> list[float]:
    """The numbers of ``column`` in the CSV named by ``sec[key]`` (relative to the spec)."""
    name = sec.string(key)
    base = Path(sec.doc.source).parent if sec.doc.source not in ("", "<string>") else Path()
    path = Path(name) if Path(name).is_absolute() else base / name
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            reader = csv.DictReader(fh)
            if reader.fieldnames is None or column not in reader.fieldnames:
                raise sec.error(key, f"{path} has no column {column!r} (columns: "
                                f"{', '.join(reader.fieldnames or [])})")
            out = []
            for i, row in enumerate(reader, start=2):
                try:
                    out.append(float(row[column]))
                except (TypeError, ValueError):
                    raise sec.error(key, f"{path} line {i}: {column} = {row[column]!r} is not a "
                                    "number") from None
    except OSError as exc:
        raise sec.error(key, f"cannot read {path}: {exc.strerror or exc}") from None
    if not out or not all(math.isfinite(v) and v >= 0 for v in out):
        raise sec.error(key, f"{path}: column {column!r} must hold finite numbers >= 0 (and at "
                        "least one row)")
    return out


# ------------------------------------------------------------------------------ severities


def _plain(sec: Section) -> Section:
    """``sec`` without the modifier keys (the plain form :mod:`polyconv.cli.laws` reads)."""
    return Section({k: v for k, v in sec.data.items() if k not in MODIFIERS}, sec.path, sec.doc)


def is_composite(sec: Section) -> bool:
    """Whether the severity uses a form of this module (not only :mod:`polyconv.cli.laws`)."""
    return sec.has("claims_file") or any(sec.has(k) for k in MODIFIERS) or \
        (sec.has("law") and sec.raw("law") in ("splice", "mixture"))


def continuous_law(sec: Section):
    """The frozen continuous law of a law table (plain, splice or mixture), modifiers applied."""
    plain = _plain(sec)
    kind = plain.raw("law", None)
    if kind == "splice":
        plain.check_keys(("law", "threshold", "below", "above", "weight_below"))
        t = plain.number("threshold", positive=True)
        w = plain.number("weight_below", None, minimum=0.0, maximum=1.0)
        try:
            law = law_ops.splice(continuous_law(plain.table("below")),
                                 continuous_law(plain.table("above")), t, w)
        except ValueError as exc:
            raise plain.error("threshold", str(exc)) from None
    elif kind == "mixture":
        plain.check_keys(("law", "components"))
        comps = plain.raw("components")
        if not isinstance(comps, list) or not comps or not all(isinstance(c, dict)
                                                               for c in comps):
            raise plain.error("components", "must be a list of tables { weight, law, params }")
        weights, parts = [], []
        for i, c in enumerate(comps):
            one = Section(c, plain.path + ("components", i), plain.doc)
            weights.append(one.number("weight", minimum=0.0))
            parts.append(continuous_law(Section({k: v for k, v in c.items() if k != "weight"},
                                                one.path, one.doc)))
        if abs(math.fsum(weights) - 1.0) > 1e-9:
            raise plain.error("components", f"weights must sum to 1; they sum to "
                              f"{math.fsum(weights)!r}")
        law = law_ops.mixture(weights, parts)
    else:
        if laws.describe_kind(plain) != "law":
            raise sec.error(MODIFIERS[0] if any(sec.has(k) for k in MODIFIERS[:3]) else "law",
                            "truncate_below, censor_at and shift apply to continuous laws only")
        plain.check_keys(laws.LAW_KEYS)
        law = laws.frozen_law(plain)
    return _modified(sec, law)


def _modified(sec: Section, law):
    if sec.has("inflation"):
        law = law_ops.inflated(law, sec.number("inflation", positive=True))
    if sec.has("truncate_below"):
        d = sec.number("truncate_below", minimum=0.0)
        shift = sec.raw("shift", False)
        if not isinstance(shift, bool):
            raise sec.error("shift", "must be true or false")
        try:
            law = law_ops.left_truncated(law, d, shift=shift)
        except ValueError as exc:
            raise sec.error("truncate_below", str(exc)) from None
    elif sec.has("shift"):
        raise sec.error("shift", "applies only with truncate_below")
    if sec.has("censor_at"):
        law = law_ops.censored(law, sec.number("censor_at", positive=True))
    return law


def build_severity(sec: Section, step: float, *, rule: str, max_points: int,
                   points: int | None) -> laws.Built:
    """The severity on the grid of ``step``: :func:`polyconv.cli.laws.build` for the plain forms,
    this module's for the others (module docstring)."""
    if not is_composite(sec):
        return laws.build(sec, step, rule=rule, max_points=max_points, points=points)
    if sec.has("claims_file"):
        sec.check_keys(("claims_file", "inflation"))
        data = claims_severity(read_claims_file(sec, "claims_file", "amount"), step)
        lat = data.law
        if sec.has("inflation"):
            lat = lat.scaled(sec.number("inflation", positive=True), rule="moments")
        return laws.Built(lat, f"empirical: {data.n} claims from {sec.string('claims_file')}",
                          list(data.caveats))
    if laws.describe_kind(_plain(sec)) != "law" and sec.raw("law", "") not in ("splice",
                                                                               "mixture"):
        if set(sec.keys()) & set(MODIFIERS[:3]):
            raise sec.error(next(k for k in MODIFIERS[:3] if sec.has(k)),
                            "applies to continuous laws only (a table: use 'inflation')")
        built = laws.build(_plain(sec), step, rule=rule, max_points=max_points, points=points)
        factor = sec.number("inflation", positive=True)
        return laws.Built(built.lattice.scaled(factor, rule="moments"),
                          f"{built.description}, inflated x{factor:g}", built.notes)
    law = continuous_law(sec)
    notes: list[str] = []
    if points is None:
        top = float(law.isf(laws.TAIL)) / step
        need = math.ceil(top) + 3 if math.isfinite(top) else math.inf
        points = int(min(need, max_points))
        if need > max_points:
            notes.append(f"the severity grid was cut at {max_points} points (raise "
                         "grid.max_points to go further)")
    lat = Lattice.from_law(law, step=step, size=max(points, 2), rule=rule)
    return laws.Built(lat, describe(sec), notes)


def describe(sec: Section) -> str:
    """A one-line description of a severity table."""
    kind = sec.raw("law", "")
    if kind == "splice":
        text = (f"splice at {sec.number('threshold'):g} of {describe(sec.table('below'))} "
                f"and {describe(sec.table('above'))}")
    elif kind == "mixture":
        text = "mixture of " + " and ".join(
            f"{c.get('weight', 0):g} x {describe(Section(c, sec.path, sec.doc))}"
            for c in sec.raw("components"))
    else:
        params = sec.raw("params", {})
        text = f"{kind}(" + ", ".join(f"{k}={v:g}" for k, v in params.items()) + ")"
    mods = [f"inflated x{sec.raw('inflation'):g}" if sec.has("inflation") else "",
            f"truncated below {sec.raw('truncate_below'):g}" if sec.has("truncate_below") else "",
            f"censored at {sec.raw('censor_at'):g}" if sec.has("censor_at") else ""]
    return ", ".join([text] + [m for m in mods if m])


@dataclass
class ExactLaw:
    """A severity's exact mean and limited expected value ``E[min(X, u)]`` (before the grid)."""

    mean: float
    limited: object


def exact_law(sec: Section) -> ExactLaw | None:
    """The exact law behind a severity table: a continuous law's (:mod:`polyconv.dist.
    law_moments`), or the table's / sample's own values before they are put on the grid
    (inflation applied); None for a form without one."""
    factor = float(sec.raw("inflation", 1.0)) if sec.has("claims_file") or \
        laws.describe_kind(_plain(sec)) != "law" else 1.0
    if sec.has("claims_file"):
        values = read_claims_file(sec, "claims_file", "amount")
        probs = [1.0 / len(values)] * len(values)
    elif sec.raw("law", None) is not None:
        law = continuous_law(sec)
        return ExactLaw(float(law_mean(law)), lambda u: float(limited_mean(law, u)))
    elif sec.has("samples"):
        values = sec.numbers("samples")
        probs = [1.0 / len(values)] * len(values)
    else:
        values = sec.numbers("values")
        key = "probabilities" if sec.has("probabilities") else "counts"
        weights = sec.numbers(key)
        total = math.fsum(weights)
        probs = [w / total for w in weights]
    v = [x * factor for x in values]
    return ExactLaw(math.fsum(x * p for x, p in zip(v, probs, strict=True)),
                    lambda u: math.fsum(min(x, u) * p for x, p in zip(v, probs, strict=True)))


def exact_mean(sec: Section) -> float | None:
    """``E[X]`` of the severity (:func:`exact_law`)."""
    ex = exact_law(sec)
    return None if ex is None else ex.mean
