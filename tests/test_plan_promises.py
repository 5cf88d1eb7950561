"""Plan and assessment agree: for every bound, what the plan promises is what the assessment's interval delivers.

For each bound the plan accepts, a design is sized in field days (``stats.twostage.plan_days``), a season of
day contributions is simulated that meets the plan's stated assumptions (days drawn at random, every result
inside the declared range, the stated between-day and within-day sds), and the interval is computed with the
functions ``assess`` uses (``stats.intervals``, ``stats.betting``) on the k day contributions. Checked:
the delivered half-width against the promised one, and the coverage against the nominal level.

Sources: Chebyshev, Cantelli, Hoeffding (1963) and Student t as in ../shared/CHECKS.md; the empirical Bernstein
bound of Maurer & Pontil (2009, Thm 4) and the betting interval of Waudby-Smith & Ramdas (2024) as implemented
for assess; two-stage variance Cochran (1977) ch. 10 and Brus (2022) ch. 7 (CHECKS.md "Two-stage designs").
Every simulation has a fixed seed; each check states its Monte Carlo margin.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from geosample.stats.betting import betting_bounds
from geosample.stats.intervals import (bernstein_half_width, cantelli_half_width, chebyshev_half_width,
                                       hoeffding_half_width, t_half_width)
from geosample.stats.twostage import BETTING_QUANTILE, plan_days

L, MU = 80.0, 40.0  # range [0, 80], true mean 40
SB, SW = 6.0, 15.0  # stated between-day and within-day sds
SEASONS = 400


def _seasons(k: int, m: int, rng: np.random.Generator, sb: float = SB, sw: float = SW) -> np.ndarray:
    """Day contributions of SEASONS seasons of k days x m visits: mean 40, day effect ±sb, visit effect ±sw.

    Two-point effects (the widest spread for their sd): every visit lies in [40 - sb - sw, 40 + sb + sw],
    inside the range [0, 80]; the day contribution is the mean of its m visits.
    """
    day = sb * np.where(rng.random((SEASONS, k, 1)) < 0.5, -1.0, 1.0)
    visit = sw * np.where(rng.random((SEASONS, k, m)) < 0.5, -1.0, 1.0)
    return (MU + day + visit).mean(axis=2)


def _worst_days(k: int, rng: np.random.Generator) -> np.ndarray:
    """The worst case of the range alone: every visit of a day reads the same, 0 or 80 (sd 40 = L/2)."""
    return L * (rng.random((SEASONS, k)) < 0.5)


def _coverage_floor(conf: float) -> float:
    """Nominal minus three binomial standard errors of SEASONS seasons (false alarm about 0.1% if exact)."""
    return conf - 3 * math.sqrt(conf * (1 - conf) / SEASONS)


@pytest.mark.parametrize("bound, sides, conf, d, interval", [
    ("chebyshev", "two", 0.90, 15.0, lambda k: chebyshev_half_width([1.0], [k], [L], 0.90)),
    ("cantelli", "one", 0.90, 15.0, lambda k: cantelli_half_width([1.0], [k], [L], 0.90)),
    ("hoeffding", "two", 0.90, 15.0, lambda k: hoeffding_half_width([1.0], [k], [L], 0.90, "two")),
])
def test_range_only_bounds_deliver_the_promise_on_the_worst_days(bound, sides, conf, d, interval):
    p = plan_days(d, range=L, confidence=conf, bound=bound, sides=sides, per_day=4)
    assert p.basis == "range" and p.half_width <= d * (1 + 1e-9)  # Cantelli: exactly 15 (CHECKS.md: 64)
    # the assessment's fixed half-width on the k days is the promise (no data needed: it depends on k only)
    assert math.isclose(interval(p.days), p.half_width, rel_tol=1e-12)
    z = _worst_days(p.days, np.random.default_rng([11, p.days]))
    est = z.mean(axis=1)
    miss = (est - MU >= p.half_width) if sides == "one" else (np.abs(est - MU) >= p.half_width)
    assert 1 - miss.mean() >= _coverage_floor(conf)


def test_t_delivers_about_the_promise_when_the_stated_sds_hold():
    # approximate: the t half-width is random; with the stated sds true, its median is at most the promise
    # (the sample sd's median is below the true sd) and coverage is near nominal (CLT on k days)
    p = plan_days(5.0, range=L, bound="t", sd_between=SB, sd_within=SW, cost_day=200, cost_visit=20)
    z = _seasons(p.days, p.per_day, np.random.default_rng(12))
    hw, _ = t_half_width([1.0], [p.days], z.std(axis=1, ddof=1)[:, None], 0.95)
    assert np.median(hw) <= p.half_width * 1.02 and p.half_width <= 5.0
    covered = np.abs(z.mean(axis=1) - MU) < hw
    print(f"t: k = {p.days}, m = {p.per_day}, coverage {covered.mean():.3f}, median half-width {np.median(hw):.3f}")
    assert covered.mean() >= 0.95 - 0.04  # approximate interval: 4 points below nominal at most (labelled)


def test_bernstein_delivers_the_promise_whenever_the_observed_sd_is_at_most_the_stated_one():
    p = plan_days(12.0, range=L, bound="bernstein", sd_between=SB, sd_within=SW, cost_day=200, cost_visit=20)
    z = _seasons(p.days, p.per_day, np.random.default_rng(13))
    s = z.std(axis=1, ddof=1)
    hw = np.array([bernstein_half_width(p.days, si, L, 0.05 / 2) for si in s])  # as assess: a / (2 sides)
    assert np.all(hw[s <= p.day_sd] <= p.half_width * (1 + 1e-12))
    assert p.half_width <= 12.0
    # with the stated sds true the observed sd is at most the stated one in about half the seasons or more,
    # and the width is never far above the promise
    assert np.median(hw) <= p.half_width * 1.02
    assert np.mean(np.abs(z.mean(axis=1) - MU) < hw) >= _coverage_floor(0.95)


@pytest.mark.parametrize("spread", ["stated", "widest"])
def test_betting_delivers_the_promise_in_most_seasons(spread):
    if spread == "stated":
        p = plan_days(8.0, range=L, bound="betting", sd_between=SB, sd_within=SW, cost_day=200, cost_visit=20,
                      confidence=0.90)
        z = _seasons(p.days, p.per_day, np.random.default_rng(14))
    else:  # no stated spread: sized for the widest the range allows, checked on the worst days
        p = plan_days(15.0, range=L, bound="betting", confidence=0.90)
        z = _worst_days(p.days, np.random.default_rng(15))
    hw, cover = [], []
    for row in z[:200]:
        lo, hi = betting_bounds(row / L, alpha=0.10)
        hw.append(L * (hi - lo) / 2)
        cover.append(lo * L <= MU <= hi * L)
    share = np.mean(np.array(hw) <= p.half_width * (1 + 1e-9))
    print(f"betting ({spread}): k = {p.days}, m = {p.per_day}, within the promise in {share:.3f} of seasons, "
          f"coverage {np.mean(cover):.3f}")
    # promise: at most ±d in 90% of simulated seasons; 200 fresh seasons: binomial SE 2.1%, margin 7%
    assert share >= BETTING_QUANTILE - 0.07
    assert np.mean(cover) >= 0.90 - 3 * math.sqrt(0.09 / 200)


# --------------------------------------------------------------------------- through the assessment itself
def _visits(k: int, m: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """One season's results (k days x m visits, two-point day and visit effects) and each result's day."""
    day = SB * np.where(rng.random((k, 1)) < 0.5, -1.0, 1.0)
    visit = SW * np.where(rng.random((k, m)) < 0.5, -1.0, 1.0)
    return (MU + day + visit).ravel(), np.repeat(np.arange(k), m)


@pytest.mark.parametrize("bound, sides, conf, d", [
    ("chebyshev", "two", 0.90, 15.0), ("cantelli", "one", 0.90, 15.0), ("hoeffding", "two", 0.90, 15.0),
    ("t", "two", 0.95, 5.0), ("bernstein", "two", 0.95, 12.0), ("betting", "two", 0.90, 8.0),
])
def test_assess_keeps_the_plans_promise_on_data_meeting_its_assumptions(bound, sides, conf, d):
    # The plan (stats.twostage.plan_days) against the assessment's own interval on visit-level results with
    # their field days (stats.assessment.stratified_interval, the pure core of assess), one stratum, 150
    # seasons whose results meet the plan's assumptions (in the range, the stated sds).
    from geosample.stats.assessment import stratified_interval

    spread = dict(sd_between=SB, sd_within=SW, cost_day=200, cost_visit=20) if bound in ("t", "bernstein",
                                                                                          "betting") else {}
    p = plan_days(d, range=L, confidence=conf, bound=bound, sides=sides,
                  per_day=None if spread else 4, **spread)
    rng = np.random.default_rng([21, len(bound)])
    hw, covered, day_sd_ok = [], [], []
    for _ in range(150):
        y, day = _visits(p.days, p.per_day, rng)
        iv = stratified_interval(bound, [y], [1.0], [0.0], [L], conf, sides=sides, direction="below", days=[day])
        hw.append((iv.high - iv.low) / 2 if sides == "two" else iv.high - iv.estimate)
        covered.append(iv.low <= MU <= iv.high)
        day_sd_ok.append(y.reshape(p.days, p.per_day).mean(axis=1).std(ddof=1) <= p.day_sd if p.day_sd else True)
    hw, covered, day_sd_ok = np.array(hw), np.array(covered), np.array(day_sd_ok)
    print(f"{bound}: k = {p.days}, m = {p.per_day}, promised {p.half_width:.3f}, delivered median {np.median(hw):.3f} "
          f"max {hw.max():.3f}, coverage {covered.mean():.3f}")
    if bound in ("chebyshev", "cantelli", "hoeffding"):  # fixed width: exactly the promise
        assert np.allclose(hw, p.half_width, rtol=1e-9)
    elif bound == "t":  # approximate (labelled so): about the promise
        assert np.median(hw) <= p.half_width * 1.05
    elif bound == "bernstein":  # at most the promise whenever the day means' sd is at most the stated one
        assert np.all(hw[day_sd_ok] <= p.half_width * (1 + 1e-9)) and day_sd_ok.any()
    else:  # betting: at most the promise in about 90% of seasons (150 seasons: SE 2.4%, margin 3 SE)
        assert np.mean(hw <= p.half_width * (1 + 1e-9)) >= BETTING_QUANTILE - 0.075
    floor = conf - 0.04 if bound == "t" else conf - 3 * math.sqrt(conf * (1 - conf) / 150)
    assert covered.mean() >= floor
