"""Tests of geosample.stats.twostage: sizing in field days k and visits per day m.

Sources are named beside each check: "CHECKS.md" rows quote ../shared/CHECKS.md ("Two-stage designs":
Cochran, Sampling Techniques, 3rd ed. 1977, ch. 10; Brus 2022, Spatial Sampling with R, ch. 7 and 15);
expectations marked "computed" are derived here with math, numpy or scipy, never by calling the code under
test. Simulations use fixed seeds; their false-alarm rates are stated beside them.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from geosample.errors import InfeasibleError, SettingError
from geosample.stats.bounds import error_probability
from geosample.stats.twostage import (BETTING_QUANTILE, day_sd, days_needed, optimal_per_day, plan_days)


# --------------------------------------------------------------------------- CHECKS.md rows
def test_range_only_counts_days_checks_row():
    # CHECKS.md "Two-stage designs": range 80, d = 16, 16 days -> (80/2)^2 / (16 x 16^2) = 0.39;
    # with 63 independent visits it would be 0.099
    p = plan_days(16, range=80, days=16, per_day=4, confidence=0.90)
    assert math.isclose(p.error_bound, 40**2 / (16 * 16**2))  # computed: 0.390625
    assert round(p.error_bound, 2) == 0.39 and p.visits == 64 and p.basis == "range"
    assert round(error_probability(63, 16, range=80), 3) == 0.099  # the visit count the report used to print
    # more visits a day change nothing in a range-only guarantee
    assert plan_days(16, range=80, days=16, per_day=12, confidence=0.90).error_bound == p.error_bound
    assert "0.391" in p.sentence() and "range alone" in p.sentence()


def test_brus_optimum_and_k_formula_checks_rows():
    # CHECKS.md (Brus 2022 ch. 7): m = (S_w / S_b) sqrt(c1 / c2); computed by hand: (8 / 2) x sqrt(9 / 1) = 12
    assert optimal_per_day(2.0, 8.0, 9.0, 1.0) == 12.0
    # k = (S_w S_b sqrt(c2 / c1) + S_b^2) / V_max is day_sd(m_opt)^2 / V_max: S_w^2 / m_opt = S_w S_b sqrt(c2/c1)
    sb, sw, c1, c2, vmax = 3.0, 11.0, 150.0, 12.0, 0.8
    m = optimal_per_day(sb, sw, c1, c2)
    k_brus = (sw * sb * math.sqrt(c2 / c1) + sb**2) / vmax  # CHECKS.md formula
    assert math.isclose(day_sd(sb, sw, m) ** 2 / vmax, k_brus)
    # Cochran ch. 10: V(mean) = S1^2/k + S2^2/(k m) with f1, f2 small; day_sd^2 / k is that
    assert math.isclose(day_sd(sb, sw, 4) ** 2 / 10, sb**2 / 10 + sw**2 / 40)


def test_no_day_effect_means_no_limit_on_visits_per_day():
    assert optimal_per_day(0.0, 5.0, 100.0, 1.0) == math.inf
    p = plan_days(2.0, range=80, bound="t", sd_between=0.0, sd_within=10.0, cost_day=100, cost_visit=1,
                  max_per_day=8)
    assert p.per_day == 8  # capped by the crew's limit


# --------------------------------------------------------------------------- choosing k and m
def _t_days(sdd, d, a):
    """Computed with scipy: the smallest k >= 2 with t_{1-a/2, k-1} sdd / sqrt(k) <= d."""
    k = 2
    while stats.t.ppf(1 - a / 2, k - 1) * sdd / math.sqrt(k) > d:
        k += 1
    return k


def test_t_plan_is_the_smallest_k_at_the_cost_optimal_m():
    sb, sw, c1, c2, d = 6.0, 15.0, 200.0, 20.0, 5.0
    p = plan_days(d, range=80, bound="t", sd_between=sb, sd_within=sw, cost_day=c1, cost_visit=c2)
    m_opt = (sw / sb) * math.sqrt(c1 / c2)  # Brus ch. 7, computed: 7.906
    assert p.per_day in (math.floor(m_opt), math.ceil(m_opt))
    assert p.days == _t_days(math.sqrt(sb**2 + sw**2 / p.per_day), d, 0.05)
    assert p.basis == "components" and "assumption" in p.sentence()
    # brute force over every m (computed): the chosen design costs at most 2% more than the best integer one
    brute = min(c1 * _t_days(math.sqrt(sb**2 + sw**2 / m), d, 0.05)
                + c2 * m * _t_days(math.sqrt(sb**2 + sw**2 / m), d, 0.05) for m in range(1, 40))
    assert p.cost <= 1.02 * brute


def test_range_only_bounds_use_one_visit_a_day_unless_told():
    p = plan_days(15, range=80, confidence=0.90, bound="hoeffding")
    assert (p.days, p.per_day) == (43, 1)  # CHECKS.md Hoeffding row, counted in days
    q = plan_days(15, range=80, confidence=0.90, bound="hoeffding", per_day=4, sd_between=3, sd_within=9)
    assert (q.days, q.per_day, q.visits) == (43, 4, 172)
    assert any("not used" in n for n in q.notes)


def test_crew_day_budget_is_a_constraint():
    with pytest.raises(InfeasibleError, match="max-days = 30"):
        plan_days(15, range=80, confidence=0.90, max_days=30)


@pytest.mark.parametrize("kwargs, setting", [
    (dict(tolerance=5, range=80, bound="t", sd_between=3), "--sd-within-day"),
    (dict(tolerance=5, range=80, bound="t", sd_between=3, sd_within=5, cost_day=10), "--cost-visit"),
    (dict(tolerance=5, bound="hoeffding"), "--range"),
    (dict(tolerance=5, range=80, bound="bernstein"), "--sd-between-days"),
    (dict(tolerance=5, range=80, per_day=0), "--per-day"),
    (dict(tolerance=5, range=80, sd_between=-1, sd_within=2), "--sd-between-days"),
    (dict(range=80), "--tolerance"),
])
def test_bad_input_names_the_option(kwargs, setting):
    with pytest.raises(SettingError) as e:
        plan_days(**kwargs)
    assert setting in str(e.value)


# --------------------------------------------------------------------------- simulation
def test_variance_of_the_day_mean_estimate_by_simulation():
    # Cochran 1977 ch. 10 (CHECKS.md): V = S_b^2 / k + S_w^2 / (k m) for days and visits drawn at random.
    # 20,000 simulated seasons: the relative standard error of a variance estimate is about 1%, so a 5%
    # margin has a false-alarm rate far below 1e-6.
    rng = np.random.default_rng(101)
    sb, sw, k, m = 4.0, 9.0, 12, 5
    day = rng.normal(0, sb, size=(20_000, k, 1))
    est = (day + rng.normal(0, sw, size=(20_000, k, m))).mean(axis=(1, 2))
    assert abs(est.var() / (day_sd(sb, sw, m) ** 2 / k) - 1) < 0.05


def test_range_only_guarantee_holds_when_each_day_sets_the_values():
    # The worst case of the range alone: every visit of a day reads the same, 0 or 80 with equal chance.
    # Chebyshev sized on days keeps its promise (exact binomial, computed with scipy); the same number of
    # visits sized as independent samples (Hoeffding, 43 visits = 11 days of 4) does not: 0.227 > 0.10.
    d, a = 15.0, 0.10
    p = plan_days(d, range=80, confidence=1 - a, per_day=4)
    k = p.days
    b = np.arange(k + 1)
    miss = stats.binom.pmf(b, k, 0.5)[np.abs(b / k - 0.5) >= d / 80].sum()  # P(|mean - 40| >= d)
    assert miss <= a
    k_visits = 43 // 4 + 1  # 11 days
    b = np.arange(k_visits + 1)
    miss_visits = stats.binom.pmf(b, k_visits, 0.5)[np.abs(b / k_visits - 0.5) >= d / 80].sum()
    assert miss_visits > 0.2  # computed: 0.2266


def test_betting_days_deliver_the_promised_width_on_fresh_simulations():
    # A season of k days with the stated spread (day contributions 40 ± 20 on a range of 80, sd 20): the
    # betting interval (the one assess uses) is at most the promised ±d in at least about 90% of fresh
    # seasons (seeds other than the sizing's). 300 seasons: the binomial standard error of a 90% share is
    # 1.7%, so requiring 85% has a false-alarm rate below 0.2%.
    from geosample.stats.betting import betting_bounds

    d = 8.0
    p = plan_days(d, range=80, bound="betting", sd=20.0, confidence=0.90)
    assert p.basis == "sd" and p.half_width <= d
    rng = np.random.default_rng(7)
    ok = cover = 0
    for _ in range(300):
        x = 0.5 + 0.25 * np.where(rng.random(p.days) < 0.5, -1.0, 1.0)
        lo, hi = betting_bounds(x, alpha=0.10)
        ok += 80 * (hi - lo) / 2 <= d
        cover += lo <= 0.5 <= hi
    assert ok / 300 >= BETTING_QUANTILE - 0.05
    assert cover / 300 >= 0.90 - 0.05
    # and one day fewer would not have been promised (the search is for the smallest k)
    assert days_needed("betting", "two", d, 0.90, range=80.0, sd=20.0) == p.days


def test_bernstein_days_width_follows_the_observed_sd():
    # the empirical Bernstein half-width assess computes (Maurer & Pontil 2009, Thm 4, as in stats/intervals.py):
    # sqrt(2 s^2 u / k) + 7 L u / (3 (k - 1)), u = ln(2 / delta), delta = a / 2 two-sided; computed here
    p = plan_days(10.0, range=80, bound="bernstein", sd=12.0)
    u = math.log(2 / (0.05 / 2))

    def eb(k, s):
        return math.sqrt(2 * s**2 * u / k) + 7 * 80 * u / (3 * (k - 1))

    assert eb(p.days, 12.0) <= 10.0 < eb(p.days - 1, 12.0)
    assert eb(p.days, 11.0) <= 10.0  # any observed sd at most the stated one keeps the promise
