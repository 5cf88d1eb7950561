"""Tests for geosample.randomizer.days: field days as primary units with known inclusion probabilities.

The checks over many draws go through ``schedule_visits`` (what ``make_design`` calls) and compare what
happened with the probabilities the design states on each FieldDay (and writes to schedule.csv).
"""
from __future__ import annotations

import datetime as dt
import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.stats
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from geosample.errors import InfeasibleError, SettingError
from geosample.model import Site, SiteDraw
from geosample.randomizer.days import allocate_days, draw_days
from geosample.randomizer.time import field_days, plan_days, schedule_visits

CLOCK = ["07:00", "15:00"]
N_DRAWS = 2000


def draw_of(n: int) -> SiteDraw:
    sites = tuple(Site(f"A-{i + 1:03d}", "A", "primary", 0, i, 1000.0 * i, 0.0, 45.0, -93.0) for i in range(n))
    return SiteDraw(sites, "srs", 0.0, None, {})


def short_last_week_season():
    # Weekdays from Monday 2027-06-07 to Tuesday 2027-08-31: 12 full ISO weeks and a last week of 2 days
    # (30-31 August), the case where largest-remainder rounding drew the short week's days about twice as
    # often as the others.
    cal = field_days("2027-06-07", "2027-08-31", window=CLOCK, timezone="America/Chicago")
    assert [len([d for d in cal if d.temporal_stratum == w]) for w in ("2027-W35",)] == [2]
    assert len(cal) == 62
    return cal


# --------------------------------------------------------------------------- the allocation rule
def test_allocation_by_hand():
    # Every stratum one day; the extra days by Huntington-Hill priority K^2 / (a (a + 1)), ties to the smallest
    # radical inverse of the position (0, 1/2, 1/4, 3/4, 1/8, ...): worked by hand.
    assert allocate_days([5, 5, 5, 5, 2], 7) == (2, 1, 2, 1, 1)
    assert allocate_days([5] * 12 + [2], 16) == (2, 1, 1, 1, 2, 1, 1, 1, 2, 1, 1, 1, 1)  # weeks 1, 5, 9
    assert allocate_days([3, 1], 4) == (3, 1)
    assert allocate_days([10, 1], 2) == (1, 1)  # a stratum always keeps its one day
    with pytest.raises(ValueError):
        allocate_days([5, 5], 1)


@settings(max_examples=200, deadline=None)
@given(sizes=st.lists(st.integers(1, 31), min_size=1, max_size=25), frac=st.floats(0, 1))
def test_allocation_is_a_huntington_hill_divisor_rounding(sizes, frac):
    # Divisor-method characterisation (Balinski & Young 1982, Fair Representation; memory): an allocation a is a
    # Huntington-Hill apportionment iff some divisor D gives a_s = K_s / D rounded at the geometric mean
    # sqrt(a (a + 1)), i.e. max_s K_s^2 / (a_s (a_s + 1)) <= min_s K_s^2 / (a_s (a_s - 1)) over the strata
    # not at their bounds (a_s = 1 is the floor of one day, a_s = K_s the cap). Checked exactly with Fractions.
    k = len(sizes) + round(frac * (sum(sizes) - len(sizes)))
    a = allocate_days(sizes, k)
    assert sum(a) == k and all(1 <= x <= K for x, K in zip(a, sizes))
    up = [Fraction(K * K, x * (x + 1)) for x, K in zip(a, sizes) if x < K]
    down = [Fraction(K * K, x * (x - 1)) for x, K in zip(a, sizes) if x > 1]
    if up and down:
        assert max(up) <= min(down)


def test_too_few_days_for_the_temporal_strata_names_the_settings():
    cal = short_last_week_season()
    with pytest.raises(SettingError) as err:
        draw_days(cal.days, 12, rng=np.random.default_rng(0))  # 13 weekly strata
    msg = str(err.value)
    assert msg.startswith("time.field_days") and "13 temporal strata" in msg and 'time.temporal = "month"' in msg
    with pytest.raises(SettingError, match="time.field_days"):
        draw_days(cal.days, 63, rng=np.random.default_rng(0))
    with pytest.raises(InfeasibleError, match="time.field_days = 13"):
        plan_days(40, cal.days, per_day=3, rng=np.random.default_rng(0), field_days=13)


# --------------------------------------------------------------------------- one draw
def test_one_draw_states_and_respects_its_probabilities():
    cal = short_last_week_season()
    sch = schedule_visits(draw_of(40), cal, per_day=4, seed=5, field_days=16)
    assert len(sch.days) == 62  # every allowed day kept, with its probability
    drawn = [d for d in sch.days if d.drawn]
    assert len(drawn) == 16
    for d in sch.days:
        K = sum(1 for x in sch.days if x.temporal_stratum == d.temporal_stratum)
        k = sum(1 for x in drawn if x.temporal_stratum == d.temporal_stratum)
        assert d.inclusion_p == k / K  # equal within its stratum, k_s / K_s
    used = {v.day_index for v in sch.visits if v.role == "primary"}
    assert used == {i for i, d in enumerate(sch.days) if d.drawn}  # every drawn day is worked, no other
    per = np.bincount([v.day_index for v in sch.visits], minlength=62)[sorted(used)]
    assert sorted(set(per.tolist())) == [2, 3]  # 40 visits on 16 days: 8 days of 3, 8 of 2
    rec = sch.day_draw
    assert rec["allowed"] == 62 and rec["drawn"] == 16 and len(rec["days"]) == 62
    assert rec["strata"][-1] == {"name": "2027-W35", "allowed": 2, "drawn": 1, "inclusion_p": 0.5}
    assert sum(d["visits"] for d in rec["days"]) == 40


def test_without_a_budget_each_visit_gets_its_own_day_when_the_season_allows():
    cal = short_last_week_season()
    sch = schedule_visits(draw_of(30), cal, per_day=4, seed=2)
    assert sum(d.drawn for d in sch.days) == 30
    assert len({v.day_index for v in sch.visits}) == 30
    full = schedule_visits(draw_of(100), cal, per_day=2, seed=2)
    assert all(d.drawn and d.inclusion_p == 1.0 for d in full.days)  # 62 days for 100 visits: all drawn


# --------------------------------------------------------------------------- many draws
@pytest.fixture(scope="module")
def many_draws():
    cal = short_last_week_season()
    stated, hits = None, np.zeros(len(cal))
    designs = []
    for seed in range(N_DRAWS):
        sch = schedule_visits(draw_of(40), cal, per_day=4, seed=seed, field_days=16)
        p = np.array([d.inclusion_p for d in sch.days])
        if stated is None:
            stated = p
        assert np.array_equal(p, stated)  # the probabilities do not depend on the seed
        drawn = np.array([d.drawn for d in sch.days])
        hits += drawn
        designs.append(drawn)
    return cal, stated, hits, np.array(designs)


def test_each_days_share_of_designs_matches_its_stated_probability(many_draws):
    # 2000 designs (fixed seeds 0..1999). Within a temporal stratum of K days of which k are drawn without
    # replacement, the inclusion indicators have variance p (1 - p) and covariance -p (1 - p) / (K - 1)
    # (Cochran 1977, Sampling Techniques, ch. 2, simple random sampling; memory), so over N independent
    # designs (K - 1) / K * sum_d (O_d - N p)^2 / (N p (1 - p)) is asymptotically chi-square with K - 1
    # degrees of freedom; the strata are independent, so their sum has sum (K_s - 1). scipy's chi2 gives the
    # p-value; false-alarm rate 0.001.
    cal, p, hits, _ = many_draws
    stat, df = 0.0, 0
    strata = {}
    for i, d in enumerate(cal.days):
        strata.setdefault(d.temporal_stratum, []).append(i)
    for name, idx in strata.items():
        K, pi = len(idx), p[idx[0]]
        assert np.all(p[idx] == pi)
        if pi == 1.0:
            assert np.all(hits[idx] == N_DRAWS)
            continue
        stat += (K - 1) / K * float(np.sum((hits[idx] - N_DRAWS * pi) ** 2) / (N_DRAWS * pi * (1 - pi)))
        df += K - 1
    assert scipy.stats.chi2.sf(stat, df) > 0.001
    # The short last week: its stated probability is 1/2 and its days' share is 1/2 (not the 1/4 target of
    # the old rounding, which drew them about half the time while implying 16/62).
    short = strata["2027-W35"]
    assert p[short[0]] == 0.5
    se = math.sqrt(0.25 / N_DRAWS)
    assert all(abs(hits[i] / N_DRAWS - 0.5) < 4 * se for i in short)  # ~4 sd: false alarm < 1e-4 each


def test_weighted_mean_of_a_day_quantity_is_unbiased(many_draws):
    # Horvitz-Thompson (Horvitz & Thompson 1952; Cochran 1977 ch. 9A; memory): (1/K) sum_{drawn} y_d / p_d is
    # unbiased for the mean of y over the K allowed days. A day quantity built to break easy assumptions:
    # high on the short last week's two days, a trend over the season, and a weekly cycle. The average of the
    # 2000 estimates must be within 4 Monte Carlo standard errors of the true mean (false alarm < 1e-4),
    # while the plain mean of the drawn days (which ignores the unequal probabilities) is far off.
    cal, p, _, designs = many_draws
    y = np.array([50.0 if d.temporal_stratum == "2027-W35" else 0.1 * i + 3.0 * d.date.weekday()
                  for i, d in enumerate(cal.days)])
    truth = y.mean()
    ht = (designs * (y / p)).sum(axis=1) / len(y)
    se = ht.std(ddof=1) / math.sqrt(len(ht))
    assert abs(ht.mean() - truth) < 4 * se
    plain = (designs * y).sum(axis=1) / designs.sum(axis=1)
    assert abs(plain.mean() - truth) > 10 * se  # the test can tell a biased estimator from an unbiased one


def test_which_drawn_days_get_the_extra_visit_is_uniform():
    # 40 visits on 16 days: 8 days carry 3. Over 2000 draws each drawn day carries 3 with probability 1/2
    # (SRSWOR of 8 of 16 drawn days). Binomial check per position, ~4 sd (false alarm < 1e-4 each).
    cal = short_last_week_season()
    rng = np.random.default_rng(31)
    heavy = np.zeros(16)
    for _ in range(N_DRAWS):
        plan = plan_days(40, cal.days, per_day=4, rng=rng, field_days=16)
        heavy += np.asarray(plan.visits) == 3
    se = math.sqrt(0.25 / N_DRAWS)
    assert np.all(np.abs(heavy / N_DRAWS - 0.5) < 4 * se)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    start=st.dates(min_value=dt.date(2026, 1, 1), max_value=dt.date(2030, 12, 31)),
    n_days=st.integers(1, 120),
    weekdays=st.sets(st.sampled_from(["mon", "tue", "wed", "thu", "fri", "sat", "sun"]), min_size=1),
    temporal=st.sampled_from(["week", "month", "season"]),
    per_day=st.integers(1, 6),
    fill=st.floats(0, 1),
    budget=st.one_of(st.none(), st.floats(0, 1)),
    seed=st.integers(0, 2**32 - 1),
)
def test_plan_days_limits(start, n_days, weekdays, temporal, per_day, fill, budget, seed):
    end = start + dt.timedelta(days=n_days - 1)
    try:
        days = field_days(start, end, weekdays=weekdays, window=CLOCK, timezone="UTC", temporal=temporal).days
    except InfeasibleError:
        return  # no allowed weekday in a short season
    n = int(fill * len(days) * per_day)
    k = None if budget is None else max(1, round(budget * len(days)))
    k_eff = min(k if k is not None else len(days), n)
    try:
        plan = plan_days(n, days, per_day=per_day, rng=np.random.default_rng(seed), field_days=k)
    except (SettingError, InfeasibleError) as exc:
        n_strata = len({d.temporal_stratum for d in days})
        assert k_eff < n_strata or k_eff * per_day < n, exc  # refused only when it cannot be done
        return
    assert sum(plan.visits) == n and all(1 <= c <= per_day for c in plan.visits)
    assert max(plan.visits, default=0) - min(plan.visits, default=0) <= 1
    assert len(plan.drawn) == len(set(plan.drawn)) == k_eff
    for d in plan.days:
        same = [x for x in plan.days if x.temporal_stratum == d.temporal_stratum]
        assert d.inclusion_p == sum(x.drawn for x in same) / len(same)
