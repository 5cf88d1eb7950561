"""Sizing in field days ``k`` and visits per day ``m``: days are the primary units.

Each drawn field day ``i`` contributes ``z_i``, the estimate of the mean from that day's
visits alone; the estimate is the mean of the ``z_i`` (the shared model of
``../shared/DESIGN.md`` and ``docs/methods.md``, "Field days as primary units").

- **Range alone.** Every ``z_i`` lies in the declared range ``[lower, lower + L]``, and
  nothing is known about how the variation splits between and within days. The worst
  case puts all of it between days (every visit of a day reads the same), so a
  range-only bound counts days, not visits: Chebyshev's error probability for ``k``
  days is ``(L/2)^2 / (k d^2)`` whatever ``m`` is (``../shared/CHECKS.md``: range 80,
  d = 16, 16 days -> 0.39, where 63 independent visits would give 0.099).
- **Stated variance components.** With a between-day sd ``S_b`` and a within-day sd
  ``S_w`` (from a pilot or an earlier season; an assumption the report names), the sd
  of one day's contribution is ``sqrt(S_b^2 + S_w^2 / m)`` and the variance of the
  estimate ``V = S_b^2 / k + S_w^2 / (k m)`` (Cochran, Sampling Techniques, 3rd ed.
  1977, ch. 10; Brus 2022, Spatial Sampling with R, ch. 7 and 15). The cost
  ``c_day k + c_visit k m`` is least, for a given ``V``, at
  ``m_opt = (S_w / S_b) sqrt(c_day / c_visit)`` (Brus ch. 7; Cochran's
  ``(S_2 / S_u) sqrt(c_1 / c_2)`` with ``S_u = S_b`` the between-day component).

Which bound uses what (what ``assess`` delivers on the same day units):

===========  ==================================================  ===================================
bound        the promise rests on                                half-width at ``k`` days
===========  ==================================================  ===================================
chebyshev    the range alone (sd of a day at most L/2)           ``(L/2) / sqrt(k a)``
cantelli     the range alone                                     ``(L/2) sqrt((1 - a) / (k a))``
hoeffding    the range alone                                     ``L sqrt(ln(s/a) / (2 k))``
t            the stated day sd (approximate, df = k - 1)         ``t_{q, k-1} sd_day / sqrt(k)``
bernstein    range and stated day sd: empirical Bernstein,       ``sqrt(2 sd^2 u / k) + 7 L u / (3 (k - 1))``,
             at most ±d whenever the observed sd is at most it   ``u = ln(2 / delta)``
betting      range and stated day sd (else L/2): the betting     by simulation (at most ±d in at
             interval, simulated (three-point law, that sd)      least 90% of simulated seasons)
===========  ==================================================  ===================================

The coverage of every interval holds whatever the spread (it is a theorem on the
range, or approximate for t); only the *width* of the data-dependent ones (t,
bernstein, betting) rests on the stated spread.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any, Mapping

import numpy as np

from ..errors import InfeasibleError, SettingError
from ._checks import _check_confidence, _check_n, _check_positive, _names, _num, _pct
from .bounds import BOUND_NAMES, _check_bound_sides, _err, _hw, _k, smallest_n

__all__ = [
    "RANGE_ONLY",
    "SPREAD_BOUNDS",
    "BETTING_QUANTILE",
    "DaysPlan",
    "day_sd",
    "optimal_per_day",
    "days_half_width",
    "days_needed",
    "betting_half_width",
    "plan_days",
]

#: Bounds whose promise rests on the range alone (they count days).
RANGE_ONLY = ("chebyshev", "cantelli", "hoeffding")
#: Bounds whose width rests on a stated spread (the day sd).
SPREAD_BOUNDS = ("t", "bernstein", "betting")
#: The betting promise: the half-width is at most ``d`` in at least this share of simulated seasons.
BETTING_QUANTILE = 0.90
#: Simulated seasons per candidate ``k`` for the betting size.
BETTING_REPLICATES = 200

_MAX_DAYS = 100_000


@dataclass(frozen=True)
class DaysPlan:
    """Field days and visits per day for a mean within the tolerance, and what they promise.

    Attributes
    ----------
    days, per_day, visits : int
        ``k`` field days, ``m`` visits per day, ``k m`` visits in all.
    bound, sides : str
    confidence : float
    tolerance : float or None
        The half-width asked for (None when ``k`` and ``m`` were fixed without one).
    half_width : float
        The half-width promised at ``k`` days (for betting: the simulated 90% quantile).
    error_bound : float
        The error probability for ``tolerance`` (``1 - confidence`` for betting and
        bernstein, whose intervals are built at that level; approximate for t).
    basis : str
        ``"range"`` (the promise rests on the range alone), ``"components"`` (on the
        stated between-day and within-day sds) or ``"sd"`` (on a stated sd of a day's
        contribution, all variation taken as between days).
    range, lower, sd, sd_between, sd_within : float or None
        The inputs.
    day_sd : float or None
        The sd of one day's contribution the promise used (``L/2`` for range-only
        Chebyshev and Cantelli; None for Hoeffding).
    per_day_optimum : float or None
        ``(S_w / S_b) sqrt(c_day / c_visit)`` when components and costs are given.
    cost : float or None
        ``c_day k + c_visit k m`` when costs are given.
    assumption : str
        What the promise rests on, in one sentence (names the stated sds as an assumption).
    notes : tuple of str
    """

    days: int
    per_day: int
    visits: int
    bound: str
    sides: str
    confidence: float
    tolerance: float | None
    half_width: float
    error_bound: float
    basis: str
    range: float | None
    lower: float | None
    sd: float | None
    sd_between: float | None
    sd_within: float | None
    day_sd: float | None
    per_day_optimum: float | None
    cost: float | None
    assumption: str
    notes: tuple[str, ...] = ()

    def sentence(self) -> str:
        """The promise in plain words (a statement about the sampling procedure)."""
        if self.visits == self.days * self.per_day:
            head = (f"{self.days} field days x {self.per_day} visit{'s' if self.per_day != 1 else ''} a day "
                    f"= {self.visits} visits: ")
        else:
            head = f"{self.visits} visits on {self.days} field days (at least {self.per_day} a day): "
        pm = f"±{_num(self.half_width)}" if self.sides == "two" else f"{_num(self.half_width)} on the side that matters"
        conf = _pct(self.confidence)
        if self.bound in RANGE_ONLY:
            by = f"by {BOUND_NAMES[self.bound]} on the {self.days} days (the range alone), "
            at = f"at {conf} confidence the half-width is {pm}"
            if self.tolerance is None:
                return head + by + at + "."
            if self.error_bound >= 1.0:
                return head + by + f"there is no guarantee for ±{_num(self.tolerance)}; " + at + "."
            within = (f"within ±{_num(self.tolerance)}" if self.sides == "two"
                      else f"less than {_num(self.tolerance)} off on the side that matters")
            return (head + by + f"the estimate will be {within} of the true mean with probability at least "
                    f"{_pct(1 - self.error_bound)} (error probability at most {self.error_bound:.3g}); " + at + ".")
        if self.bound == "t":
            return (head + f"by the Student t approximation on the {self.days} days, about {pm} at about {conf}, "
                    f"if the sd of a day's contribution is about {_num(self.day_sd)} ({self._rests()}); "
                    "approximate, not a bound.")
        if self.bound == "bernstein":
            return (head + f"the empirical Bernstein interval on the {self.days} days contains the true mean in at "
                    f"least {conf} of designs (the range alone); its half-width is at most {pm} whenever the "
                    f"observed sd of the day contributions is at most {_num(self.day_sd)} ({self._rests()}).")
        return (head + f"the betting interval on the {self.days} days contains the true mean in at least {conf} of "
                f"designs (the range alone); its half-width was at most {pm} in {BETTING_QUANTILE:.0%} of "
                f"simulated seasons with a day sd of {_num(self.day_sd)} ({self._rests()}).")

    def _rests(self) -> str:
        if self.basis == "components":
            return (f"an assumption: the stated between-day sd {_num(self.sd_between)} and within-day sd "
                    f"{_num(self.sd_within)}")
        if self.basis == "sd":
            return f"an assumption: the stated sd {_num(self.sd)}, taken as all between days"
        return "the largest sd the range allows, range/2"

    def as_dict(self) -> dict[str, Any]:
        """The fields as a plain dict (for JSON)."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


# --------------------------------------------------------------------------- formulas
def day_sd(sd_between: float, sd_within: float, per_day: int) -> float:
    """The sd of one day's contribution: ``sqrt(S_b^2 + S_w^2 / m)`` (Cochran 1977, ch. 10).

    >>> day_sd(3.0, 8.0, 4)
    5.0
    """
    return math.sqrt(sd_between**2 + sd_within**2 / per_day)


def optimal_per_day(sd_between: float, sd_within: float, cost_day: float, cost_visit: float) -> float:
    """The cost-optimal visits per day ``(S_w / S_b) sqrt(c_day / c_visit)`` (Brus 2022, ch. 7).

    Infinite when ``S_b = 0`` (no day effect: as many visits a day as the day allows).

    >>> optimal_per_day(2.0, 8.0, 9.0, 1.0)
    12.0
    """
    if sd_between <= 0:
        return math.inf
    return (sd_within / sd_between) * math.sqrt(cost_day / cost_visit)


def _eb_delta(a: float, sides: str, strata: int) -> float:
    """The error ``bernstein_half_width`` is called with by ``assess`` (a split over sides and strata)."""
    return a / (_k(sides) * strata)


@functools.lru_cache(maxsize=4096)
def betting_half_width(k: int, spread: float, confidence: float, *, sides: str = "two", strata: int = 1,
                       replicates: int = BETTING_REPLICATES, quantile: float = BETTING_QUANTILE,
                       seed: int = 20271) -> float:
    """The ``quantile`` of the betting interval's half-width over simulated seasons of ``k`` days, on [0, 1].

    The day contributions are simulated on [0, 1] from the three-point law with mass
    ``2 spread^2`` at each end and the rest at 1/2: sd ``spread``, and of the symmetric laws
    with that sd the one whose sample sd varies most (the widest interval quantiles; a two-point
    law ``1/2 ± spread`` gives nearly the same width every season and promised too little on
    real two-stage data). ``spread = 1/2`` is Bernoulli(1/2), the widest case the range allows.
    The interval
    is :func:`geosample.stats.betting.betting_bounds` (the one ``assess`` uses) at error
    ``(1 - confidence) / strata``; one-sided: the distance from the mean to the bound that
    matters. A fixed seed makes the size reproducible.
    """
    from .betting import betting_bounds

    a = (1.0 - confidence) / strata
    s = min(max(spread, 0.0), 0.5)
    widths = np.empty(replicates)
    for r in range(replicates):
        # replicate r's seasons for different k share their first days (common random numbers across k)
        u = np.random.default_rng([seed, r]).random(k)
        p = 2.0 * s * s
        x = np.where(u < p, 0.0, np.where(u < 2.0 * p, 1.0, 0.5))
        lo, hi = betting_bounds(x, alpha=a, sides=sides, direction="below")
        widths[r] = (hi - lo) / 2.0 if sides == "two" else hi - float(x.mean())
    return float(np.quantile(widths, quantile))


def _spread_sd(bound: str, L: float | None, sd: float | None, sd_between: float | None, sd_within: float | None,
               m: int) -> tuple[float | None, str]:
    """The day sd a bound's promise uses, and its basis."""
    if bound in ("chebyshev", "cantelli"):
        return L / 2.0, "range"
    if bound == "hoeffding":
        return None, "range"
    if sd_between is not None and sd_within is not None:
        s = day_sd(sd_between, sd_within, m)
        basis = "components"
    elif sd is not None:
        s, basis = sd, "sd"
    else:
        return (L / 2.0, "range") if bound == "betting" else (None, "range")
    if L is not None:
        s = min(s, L / 2.0)  # Popoviciu: no sd can exceed range/2
    return s, basis


def days_half_width(bound: str, sides: str, k: int, confidence: float, *, range: float | None, sd: float | None,
                    strata: int = 1) -> float:
    """The half-width promised at ``k`` days (``sd`` the day sd the bound's promise uses; checked inputs)."""
    a = 1.0 - confidence
    if bound == "bernstein":
        from .intervals import bernstein_half_width

        return bernstein_half_width(k, sd, range, _eb_delta(a, sides, strata))
    if bound == "betting":
        return range * betting_half_width(k, sd / range, confidence, sides=sides, strata=strata)
    sig = sd if bound != "hoeffding" else None
    return _hw(bound, sides, [1.0], [k], a, [sig], [range], [sd])


def days_needed(bound: str, sides: str, d: float, confidence: float, *, range: float | None, sd: float | None,
                strata: int = 1) -> int:
    """The smallest ``k`` whose promised half-width is at most ``d`` (checked inputs)."""
    a = 1.0 - confidence
    if bound in ("chebyshev", "cantelli", "hoeffding", "t"):
        sig = sd if bound != "hoeffding" else None
        k, x, _ = smallest_n(bound, sides, d, a, sigma=sig, range=range, sd=sd)
        if k is None:
            raise InfeasibleError(f"the tolerance {d!r} needs about {x:.3g} field days with the {bound} bound; "
                                  "choose a larger tolerance or a lower confidence.")
        return k

    @functools.lru_cache(maxsize=None)
    def ok(k: int) -> bool:
        return days_half_width(bound, sides, k, confidence, range=range, sd=sd, strata=strata) <= d * (1 + 1e-9)

    # bracket: betting is never much narrower than the normal-theory interval, and at the widest spread a
    # little wider than Hoeffding's; starting the search there only ever errs towards more days
    z = NormalDist().inv_cdf(1.0 - a / (_k(sides) * strata))
    normal = (z * sd / d) ** 2
    lo = max(2, int(0.8 * normal))
    hi = max(lo, math.ceil(1.3 * normal) + 2)
    while not ok(hi):
        lo, hi = hi + 1, int(hi * 1.5) + 1
        if hi > _MAX_DAYS:
            raise InfeasibleError(f"the tolerance {d!r} needs more than {_MAX_DAYS} field days with the {bound} "
                                  "bound; choose a larger tolerance or a lower confidence.")
    while lo < hi:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid + 1
    return hi


# --------------------------------------------------------------------------- the plan
_KEYS = ("tolerance", "range", "lower", "sd", "sd_between", "sd_within", "per_day", "days", "cost_day",
         "cost_visit", "confidence", "bound", "sides", "max_per_day", "max_days", "n")
#: Option names used in messages when the command line calls :func:`plan_days`.
CLI_NAMES = {k: "--" + k.replace("_", "-") for k in _KEYS}
CLI_NAMES.update(sd_between="--sd-between-days", sd_within="--sd-within-day", n="--days")


def _assumption(bound: str, basis: str) -> str:
    if bound in RANGE_ONLY:
        return ("the field days are drawn at random and every result lies in the declared range; the guarantee "
                "counts days, not visits, because the worst case puts all variation between days.")
    what = {"components": "the stated between-day and within-day sds (an assumption, from a pilot or an earlier "
                          "season, not checked by this design)",
            "sd": "the stated sd, taken as the sd of a whole day's contribution (an assumption)",
            "range": "the range alone (the widest spread it allows)"}[basis]
    if bound == "t":
        return f"the mean of the day contributions is approximately normal and its sd is as from {what}."
    return (f"coverage rests on the range alone (days drawn at random, every result in the declared range); "
            f"the width rests on {what}.")


def plan_days(tolerance: float | None = None, *, range: float | None = None, lower: float | None = None,
              sd: float | None = None, sd_between: float | None = None, sd_within: float | None = None,
              per_day: int | None = None, days: int | None = None, cost_day: float | None = None,
              cost_visit: float | None = None, max_per_day: int | None = None, max_days: int | None = None,
              confidence: float = 0.95, bound: str = "chebyshev", sides: str = "two", strata: int = 1,
              names: Mapping[str, str] | None = None) -> DaysPlan:
    """Choose ``k`` field days and ``m`` visits per day for a mean within ``tolerance``.

    ``m`` is ``per_day`` when given; else, with both sds and both costs, the integer next
    to :func:`optimal_per_day` (floor or ceiling, whichever costs less) for the bounds whose
    width uses the spread, and 1 for range-only bounds (extra visits on a day add nothing to
    a range-only guarantee); capped at ``max_per_day`` (the crew's limit). ``k`` is ``days``
    when given (the promise is then what ``k`` days buy), else the smallest ``k`` whose
    promised half-width is at most ``tolerance`` (:func:`days_needed`). ``max_days`` (a
    crew-day budget) is a constraint: a ``k`` above it is refused with the figures.

    Examples
    --------
    >>> p = plan_days(16, range=80, days=16, per_day=4, confidence=0.90)   # CHECKS.md: 0.39
    >>> round(p.error_bound, 2), p.visits
    (0.39, 64)
    >>> plan_days(15, range=80, confidence=0.90).days                      # as 72 independent samples
    72
    """
    nm = _names(names, CLI_NAMES)
    bound, sides = _check_bound_sides(bound, sides, nm)
    conf = _check_confidence(confidence, nm)
    a = 1.0 - conf
    L = None if range is None else _check_positive(range, "range", nm, "the largest possible difference "
                                                                         "between two measurements")
    if lower is not None and not (isinstance(lower, (int, float)) and not isinstance(lower, bool)
                                  and math.isfinite(lower)):
        raise SettingError(nm["lower"], lower, "a number (the smallest possible value)")
    s = None if sd is None else _check_positive(sd, "sd", nm, "a standard deviation")
    sb = None if sd_between is None else _check_nonneg(sd_between, "sd_between", nm)
    sw = None if sd_within is None else _check_nonneg(sd_within, "sd_within", nm)
    if (sb is None) != (sw is None):
        missing = "sd_within" if sw is None else "sd_between"
        raise SettingError(nm[missing], None, "a number >= 0: the between-day and within-day sds go together",
                           fix=f"give both {nm['sd_between']} and {nm['sd_within']}, or neither")
    cd = None if cost_day is None else _check_positive(cost_day, "cost_day", nm, "the cost of one field day")
    cv = None if cost_visit is None else _check_positive(cost_visit, "cost_visit", nm, "the cost of one visit")
    if (cd is None) != (cv is None):
        missing = "cost_visit" if cv is None else "cost_day"
        raise SettingError(nm[missing], None, "a positive number: the day and visit costs go together",
                           fix=f"give both {nm['cost_day']} and {nm['cost_visit']}, or neither")
    if bound in ("chebyshev", "cantelli", "hoeffding", "bernstein", "betting") and L is None:
        raise SettingError(nm["range"], None, f"a positive number: the {bound} bound over field days needs the "
                                              "range L", fix=f"give {nm['range']} L")
    if bound in ("t", "bernstein") and s is None and sb is None:
        raise SettingError(nm["sd_between"], None, f"the sds of the days: the {bound} bound needs a stated spread",
                           fix=f"give {nm['sd_between']} and {nm['sd_within']} (from a pilot or an earlier "
                               f"season), or {nm['sd']} for the sd of a day's contribution")
    if sb is not None and sb == 0 and sw == 0:
        raise SettingError(nm["sd_between"], 0, "sds not both 0", fix="give the sds from a pilot")
    mmax = None if max_per_day is None else _check_n(max_per_day, {**nm, "n": nm["max_per_day"]}, 1)
    kmax = None if max_days is None else _check_n(max_days, {**nm, "n": nm["max_days"]}, 1)
    m_fixed = None if per_day is None else _check_n(per_day, {**nm, "n": nm["per_day"]}, 1)
    k_fixed = None if days is None else _check_n(days, {**nm, "n": nm["days"]}, 2 if bound in SPREAD_BOUNDS else 1)
    d = None if tolerance is None else _check_positive(tolerance, "tolerance", nm, "the half-width D")
    if d is None and k_fixed is None:
        raise SettingError(nm["tolerance"], None, "a positive number (the half-width D), or a number of days",
                           fix=f"give {nm['tolerance']}, or {nm['days']} K")
    notes: list[str] = []
    if m_fixed is not None and mmax is not None and m_fixed > mmax:
        raise SettingError(nm["per_day"], m_fixed, f"at most {mmax} ({nm['max_per_day']})")

    m_opt = None
    if sb is not None and cd is not None:
        m_opt = optimal_per_day(sb, sw, cd, cv)
    if m_fixed is not None:
        candidates = [m_fixed]
    elif bound in RANGE_ONLY or sb is None:
        candidates = [1]
        if bound in RANGE_ONLY:
            notes.append(f"{bound}: the guarantee rests on the days alone, so visits per day were set to 1 "
                         f"(give {nm['per_day']} M for more visits a day: they add coverage of the water, not "
                         "to this guarantee)")
        else:
            notes.append(f"no between-day and within-day sds: one visit a day (give {nm['sd_between']}, "
                         f"{nm['sd_within']} and the costs to choose visits per day)")
    elif m_opt is None:
        candidates = [1]
        notes.append(f"no costs: one visit a day, the fewest visits (give {nm['cost_day']} and {nm['cost_visit']} "
                     "to choose visits per day by cost)")
    else:
        top = mmax if mmax is not None else 10_000
        base = min(m_opt, top)
        candidates = sorted({max(1, min(top, math.floor(base))), max(1, min(top, math.ceil(base)))})
        if mmax is not None and m_opt > mmax:
            notes.append(f"the cost-optimal {_num(m_opt)} visits a day is above {nm['max_per_day']} = {mmax}")

    best = None
    for m in candidates:
        sig, basis = _spread_sd(bound, L, s, sb, sw, m)
        k = k_fixed if k_fixed is not None else days_needed(bound, sides, d, conf, range=L, sd=sig, strata=strata)
        cost = None if cd is None else cd * k + cv * k * m
        key = (cost if cost is not None else k * m, k)
        if best is None or key < best[0]:
            best = (key, m, k, sig, basis, cost)
    _, m, k, sig, basis, cost = best
    if kmax is not None and k > kmax:
        raise InfeasibleError(
            f"{k} field days are needed for ±{_num(d)} at {_pct(conf)} with the {bound} bound, more than "
            f"{nm['max_days']} = {kmax}. Raise {nm['max_days']}, allow a larger {nm['tolerance']} or a lower "
            f"{nm['confidence']}" + ("" if bound in RANGE_ONLY else ", or add visits per day") + ".")
    hw = days_half_width(bound, sides, k, conf, range=L, sd=sig, strata=strata)
    if bound in RANGE_ONLY or bound == "t":
        eb = _err(bound, sides, [1.0], [k], d if d is not None else hw, [sig], [L], [sig])
    else:
        eb = a
    if sb is not None and bound in RANGE_ONLY:
        notes.append(f"the stated sds are not used by the {bound} bound: its guarantee rests on the range alone "
                     "(the t, bernstein and betting bounds use them)")
    if s is not None and sb is None and bound in SPREAD_BOUNDS:
        notes.append(f"sd {_num(s)} taken as the sd of a whole day's contribution (all variation between days, "
                     "the worst case); give the between-day and within-day sds to use visits per day")
    if d is not None and hw > d * (1 + 1e-9):
        notes.append(f"{k} days do not reach ±{_num(d)} at {_pct(conf)}: they reach ±{_num(hw)}")
    return DaysPlan(days=int(k), per_day=int(m), visits=int(k * m), bound=bound, sides=sides, confidence=conf,
                    tolerance=d, half_width=float(hw), error_bound=float(min(eb, 1.0)), basis=basis, range=L,
                    lower=lower, sd=s, sd_between=sb, sd_within=sw, day_sd=sig, per_day_optimum=m_opt, cost=cost,
                    assumption=_assumption(bound, basis), notes=tuple(notes))


def _check_nonneg(value: Any, key: str, nm: dict[str, str]) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
        raise SettingError(nm[key], value, "a number >= 0 (a standard deviation)")
    return float(value)
