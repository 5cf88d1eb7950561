"""Field days as primary units: which allowed days are drawn, with what probability.

Time is sampled in two stages (Cochran 1977, *Sampling Techniques*, ch. 10-11,
two-stage sampling; Brus 2022, *Spatial Sampling with R*, ch. 15, days as the
primary units of a space-time design): first ``k`` field days are drawn from the
``K`` allowed days of the season, then the visits are spread over the drawn days.

- :func:`allocate_days` fixes how many days each temporal stratum gets,
  ``k_s``, by a rule that uses no random number (so the inclusion probabilities
  are known before the draw): proportional to the stratum's allowed days
  ``K_s``, at least one day each, rounded by the Huntington-Hill method, which
  keeps the ratios ``k_s / K_s`` as close to one another as whole numbers allow
  (Balinski & Young 1982, *Fair Representation*, memory). Equal ratios are
  broken by the radical inverse of the stratum's position, which spreads the
  extra days over the season instead of giving them to its first weeks.
- :func:`draw_days` draws ``k_s`` days by simple random sampling without
  replacement within each stratum: every day of stratum ``s`` is drawn with
  probability exactly ``k_s / K_s`` (Cochran 1977, ch. 5, stratified random
  sampling). The probability is stored on each :class:`~geosample.model.FieldDay`.
- :func:`spread_visits` gives the ``n`` visits to the drawn days:
  ``floor(n / k)`` each, and one more to ``n mod k`` drawn days taken at random.

Estimates that treat the drawn days as primary units weight day ``i`` by
``1 / inclusion_p`` (Horvitz-Thompson): ``(1/K) sum_i y_i / p_i`` is unbiased for
the mean of a day-level quantity ``y`` over the ``K`` allowed days. When every
``k_s / K_s`` is equal (one temporal stratum, or strata whose sizes allow it)
the weights are equal and the plain mean over drawn days is that estimator.
"""
from __future__ import annotations

import dataclasses
import heapq
from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from ..errors import InfeasibleError, SettingError
from ..model import FieldDay

__all__ = ["DayDraw", "allocate_days", "draw_days", "spread_visits", "DAY_RULE"]

DAY_RULE = (
    "stratified simple random sampling of days without replacement: each temporal stratum s with K_s allowed "
    "days gets k_s days (proportional to K_s, at least one, rounded by the Huntington-Hill method, equal "
    "priorities broken by the radical inverse of the stratum's position; no random number involved), drawn at "
    "random without replacement; each day of stratum s is drawn with probability k_s / K_s"
)


@dataclass(frozen=True)
class DayDraw:
    """The field days of one design and the probabilities they were drawn with.

    Attributes
    ----------
    days : tuple of FieldDay
        Every allowed day, in date order, with ``inclusion_p`` and ``drawn`` set.
    drawn : tuple of int
        Indices into ``days`` of the drawn days, ascending.
    strata : tuple of (str, int, int)
        Per temporal stratum, in date order: name, allowed days ``K_s``, drawn days ``k_s``.
    visits : tuple of int
        Visits on each drawn day (same order as ``drawn``); empty until spread.
    """

    days: tuple[FieldDay, ...]
    drawn: tuple[int, ...]
    strata: tuple[tuple[str, int, int], ...]
    visits: tuple[int, ...] = ()

    def day_indices(self) -> np.ndarray:
        """One day index per visit, ascending (``drawn[j]`` repeated ``visits[j]`` times)."""
        return np.repeat(np.asarray(self.drawn, dtype=int), np.asarray(self.visits, dtype=int))

    def record(self) -> dict:
        """What the manifest keeps: the rule, each stratum's counts, and every allowed day."""
        per_day = dict(zip(self.drawn, self.visits))
        return {
            "rule": DAY_RULE,
            "allowed": len(self.days),
            "drawn": len(self.drawn),
            "strata": [{"name": name, "allowed": K, "drawn": k, "inclusion_p": k / K}
                       for name, K, k in self.strata],
            "days": [{"date": d.date.isoformat(), "temporal_stratum": d.temporal_stratum,
                      "inclusion_p": d.inclusion_p, "drawn": d.drawn, "visits": int(per_day.get(i, 0))}
                     for i, d in enumerate(self.days)],
        }


def _groups(days: Sequence[FieldDay]) -> dict[str, list[int]]:
    groups: dict[str, list[int]] = {}
    for i, d in enumerate(days):
        groups.setdefault(d.temporal_stratum, []).append(i)
    return groups


def allocate_days(sizes: Sequence[int], k: int) -> tuple[int, ...]:
    """Days per temporal stratum: ``k`` in all, at least one each, proportional to ``sizes``.

    Huntington-Hill rounding: every stratum starts with one day; each further day
    goes to the stratum with the largest priority ``K_s / sqrt(k_s (k_s + 1))``
    among those not yet full (compared exactly, as ``K_s^2 / (k_s (k_s + 1))``).
    Equal priorities go first to the stratum whose position has the smallest
    radical inverse in base 2 (0, 1/2, 1/4, 3/4, ...: spread over the season).
    No random number is used, so the result, and each day's inclusion
    probability ``k_s / K_s``, is known before the draw.

    Parameters
    ----------
    sizes : sequence of int
        Allowed days per stratum, ``K_s >= 1``.
    k : int
        Days to draw, ``len(sizes) <= k <= sum(sizes)``.

    Returns
    -------
    tuple of int

    Raises
    ------
    ValueError
        ``k`` outside that range (callers check it with a message for the user).

    Examples
    --------
    >>> allocate_days([5, 5, 5, 5, 2], 7)
    (2, 1, 2, 1, 1)
    >>> allocate_days([5] * 4, 6)
    (2, 1, 2, 1)
    """
    from .space import radical_inverse

    K = [int(s) for s in sizes]
    if any(s < 1 for s in K) or not len(K) <= k <= sum(K):
        raise ValueError(f"cannot give {k} days to strata of sizes {K}")
    alloc = [1] * len(K)
    spread = radical_inverse(np.arange(len(K)), 2)
    heap = [(-Fraction(s * s, 2), float(spread[i]), i) for i, s in enumerate(K) if s > 1]
    heapq.heapify(heap)
    for _ in range(k - len(K)):
        _, tie, i = heapq.heappop(heap)
        alloc[i] += 1
        a = alloc[i]
        if a < K[i]:
            heapq.heappush(heap, (-Fraction(K[i] * K[i], a * (a + 1)), tie, i))
    return tuple(alloc)


def draw_days(days: Sequence[FieldDay], k: int, *, rng: np.random.Generator) -> DayDraw:
    """Draw ``k`` field days, stratified by temporal stratum, each with a known probability.

    Parameters
    ----------
    days : sequence of FieldDay
        The allowed days, in date order.
    k : int
        Field days to draw.
    rng : numpy.random.Generator
        Draws, for each temporal stratum in date order, its ``k_s`` days
        (``rng.choice(K_s, k_s, replace=False)``).

    Returns
    -------
    DayDraw
        Without ``visits`` (see :func:`spread_visits`).

    Raises
    ------
    SettingError
        (``time.field_days``) ``k`` larger than the allowed days, or smaller than
        the number of temporal strata (a stratum without a day would have
        inclusion probability 0: nothing could be said about it).

    Examples
    --------
    >>> import datetime as dt
    >>> from geosample.randomizer.time import field_days
    >>> cal = field_days("2027-06-07", "2027-06-22", window=["07:00", "15:00"], timezone="UTC")
    >>> d = draw_days(cal.days, 4, rng=np.random.default_rng(1))
    >>> d.strata, sorted({x.inclusion_p for x in d.days})
    ((('2027-W23', 5, 2), ('2027-W24', 5, 1), ('2027-W25', 2, 1)), [0.2, 0.4, 0.5])
    """
    days = tuple(days)
    groups = _groups(days)
    K = sum(len(g) for g in groups.values())
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1 or k > K:
        raise SettingError("time.field_days", k, f"a whole number from 1 to the {K} allowed days of the season",
                           fix="lower time.field_days, or allow more weekdays or a longer season")
    if k < len(groups):
        raise SettingError(
            "time.field_days", int(k),
            f"at least one field day for each of the {len(groups)} temporal strata ({', '.join(list(groups)[:3])}"
            f"{', ...' if len(groups) > 3 else ''}): a stratum without a field day could never be sampled",
            fix=f"raise the number of field days to at least {len(groups)} (time.field_days, or more samples), "
                'or use longer temporal strata: time.temporal = "month" or "season"')
    alloc = allocate_days([len(g) for g in groups.values()], int(k))
    drawn: list[int] = []
    p = [0.0] * len(days)
    for (name, idx), k_s in zip(groups.items(), alloc):
        for i in idx:
            p[i] = k_s / len(idx)
        pick = rng.choice(len(idx), size=k_s, replace=False)
        drawn.extend(idx[int(j)] for j in pick)
    chosen = set(drawn)
    out = tuple(dataclasses.replace(d, inclusion_p=p[i], drawn=i in chosen) for i, d in enumerate(days))
    strata = tuple((name, len(idx), k_s) for (name, idx), k_s in zip(groups.items(), alloc))
    return DayDraw(out, tuple(sorted(drawn)), strata)


def spread_visits(draw: DayDraw, n: int, *, per_day: int, rng: np.random.Generator) -> DayDraw:
    """Give ``n`` visits to the drawn days: ``floor(n / k)`` each, one more on ``n mod k`` of them.

    The days that get one more are drawn at random without replacement
    (``rng.choice(k, n mod k, replace=False)``), so every drawn day is equally
    likely to carry the larger number.

    Raises
    ------
    InfeasibleError
        More than ``per_day`` visits a day would be needed.
    """
    k = len(draw.drawn)
    if n > k * per_day:
        raise InfeasibleError(
            f"{n} primary visits do not fit in {k} field day(s) of at most time.per_day = {per_day} visits "
            f"({k * per_day} visits). Raise time.field_days to at least {-(-n // per_day)}, raise time.per_day "
            f"to at least {-(-n // max(k, 1))}, or take fewer samples.")
    counts = np.full(k, n // k if k else 0, dtype=int)
    if k and n % k:
        counts[rng.choice(k, size=n % k, replace=False)] += 1
    return dataclasses.replace(draw, visits=tuple(int(c) for c in counts))
