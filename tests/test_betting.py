"""The betting bound (geosample/stats/betting.py).

External checks: the betting definition check of ../shared/CHECKS.md, a brute-force grid of the
confidence set, the bets written out from the paper's definitions, and simulated coverage on bounded
populations (fixed seeds; 3 Monte Carlo standard errors).
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from geosample.stats.betting import (
    betting_interval,
    betting_log_capital,
    betting_pvalue,
    betting_sequence,
    capital_process,
    prpl_bets,
)
from geosample.stats.intervals import hoeffding_half_width

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import at_least_nominal as _at_least_nominal  # noqa: E402
from test_intervals import POPULATIONS  # noqa: E402


# --------------------------------------------------------------------------- CHECKS.md: betting definition check
def test_capital_process_definition_check():
    # CHECKS.md (Waudby-Smith & Ramdas 2024, memory of the paper's definitions): x = (1, 1, 1), m = 0.5,
    # fixed bet 0.5: K+ = 1.25^3 = 1.953125, K- = 0.75^3 = 0.421875
    k = capital_process([1, 1, 1], 0.5, 0.5, 0.5)
    assert k.plus[-1] == pytest.approx(1.953125, abs=1e-15)
    assert k.minus[-1] == pytest.approx(0.421875, abs=1e-15)


def test_log_capital_agrees_with_the_capital_process():
    rng = np.random.default_rng(3)
    x = rng.uniform(size=20)
    lam = np.full(20, 0.4)
    lc = betting_log_capital(x, np.array([0.3]), lam, theta=0.5, c=0.9)[:, 0]
    k = capital_process(x, 0.3, 0.4, 0.4)
    assert np.allclose(np.exp(lc), np.maximum(0.5 * k.plus, 0.5 * k.minus))


def test_bets_are_predictable():
    # bet t uses only x_1..x_{t-1}: changing x_t leaves bets 1..t unchanged
    rng = np.random.default_rng(4)
    x = rng.uniform(size=30)
    y = x.copy()
    y[10] = 1 - y[10]
    a, b = prpl_bets(x, 0.05), prpl_bets(y, 0.05)
    assert np.array_equal(a[:11], b[:11]) and not np.array_equal(a[11:], b[11:])


def test_betting_sequence_never_widens_and_contains_the_final_interval():
    rng = np.random.default_rng(5)
    x = rng.beta(2, 5, size=300)
    seq = betting_sequence(x, alpha=0.05)
    assert np.all(np.diff(seq.low) >= 0) and np.all(np.diff(seq.high) <= 0)
    assert seq.low[-1] <= seq.low_final <= x.mean() <= seq.high_final <= seq.high[-1]


@pytest.mark.parametrize("sides, direction", [("two", "below"), ("one", "below"), ("one", "above")])
def test_betting_bounds_agree_with_a_brute_force_grid(sides, direction):
    # the set {m : hedged capital stayed below 1/a at every time}, evaluated directly on 20,001 means
    from geosample.stats.betting import betting_bounds

    rng = np.random.default_rng(16)
    x = rng.beta(3, 4, size=150)
    a = 0.05
    theta = {"two": 0.5, "below": 0.0, "above": 1.0}[sides if sides == "two" else direction]
    m = np.linspace(0, 1, 20001)
    lc = betting_log_capital(x, m, prpl_bets(x, a, sides), theta=theta, c=0.5)
    inside = m[lc.max(axis=0) < math.log(1 / a)]
    lo, hi = betting_bounds(x, alpha=a, sides=sides, direction=direction)
    assert lo <= inside.min() and hi >= inside.max()  # never narrower than the exact set
    assert inside.min() - lo < 1e-4 and hi - inside.max() < 1e-4
    seq = betting_sequence(x, alpha=a, sides=sides, direction=direction)
    assert seq.low[-1] <= inside.min() and seq.high[-1] >= inside.max()


def test_betting_interval_in_original_units_and_one_sided():
    rng = np.random.default_rng(6)
    v = 50 + 30 * rng.beta(2, 3, size=200)
    two = betting_interval(v, lower=0, range=200, confidence=0.95)
    up = betting_interval(v, lower=0, range=200, confidence=0.95, sides="one", direction="below")
    assert two.low < v.mean() < two.high
    assert up.low == -math.inf and v.mean() < up.high < two.high  # a one-sided bound is tighter on its side
    with pytest.raises(ValueError, match="outside the declared range"):
        betting_interval([10, 250], lower=0, range=200)


@pytest.mark.parametrize("pop", list(POPULATIONS))
def test_betting_sequence_covers_at_least_nominally(pop):
    # The running-intersection sequence misses the true mean iff the hedged capital at the true mean
    # reaches 1/a at some time (Ville's inequality bounds that by a). Checked at the true mean for
    # many replicates, then on full intervals for a few.
    rng = np.random.default_rng(11)
    sampler, mu = POPULATIONS[pop]
    reps, n, a = 2000, 60, 0.05
    x = sampler(rng, (reps, n))
    misses = 0
    for row in x:
        lc = betting_log_capital(row, np.array([mu]), prpl_bets(row, a), theta=0.5, c=0.5)
        misses += bool(lc.max() >= math.log(1 / a))
    cover = 1 - misses / reps
    assert _at_least_nominal(cover, 1 - a, reps), f"betting on {pop}: coverage {cover:.4f}"
    for row in x[:40]:  # the interval returned holds every mean the capital did not reject
        seq = betting_sequence(row, alpha=a)
        lc = betting_log_capital(row, np.array([mu]), prpl_bets(row, a), theta=0.5, c=0.5)
        if lc.max() < math.log(1 / a):
            assert seq.low_final <= mu <= seq.high_final


def test_betting_is_narrower_than_hoeffding_on_low_variance_data():
    rng = np.random.default_rng(8)
    L, n = 400.0, 500
    v = L * rng.beta(2, 30, size=n)  # counts well inside a generous declared range
    bet = betting_interval(v, lower=0, range=L, confidence=0.95)
    hoef = 2 * hoeffding_half_width([1.0], [n], [L], 0.95)
    ratio = (bet.high - bet.low) / hoef
    print(f"betting / hoeffding width ratio: {ratio:.3f}")
    assert ratio < 1, f"betting width / hoeffding width = {ratio:.3f}"


def test_betting_pvalue_is_one_over_the_largest_capital():
    rng = np.random.default_rng(13)
    x = rng.beta(2, 8, size=80)
    p = betting_pvalue(x, 0.5, alpha=0.05)
    lc = betting_log_capital(x, np.array([0.5]), prpl_bets(x, 0.05), theta=0.5, c=0.5)
    assert p == pytest.approx(min(1.0, float(np.exp(-lc.max()))))
    assert p < 0.05 and betting_pvalue(x, float(x.mean()), alpha=0.05) > 0.05


def test_censored_betting_bounds_hold_every_value_the_censored_results_may_take():
    # K+ on the lowest possible values and K- on the highest (bets from the reported values) can only reject
    # fewer means than the true values would: the interval holds [low(x_true), high(x_true)] for any x_true in the box
    from geosample.stats.betting import betting_bounds

    rng = np.random.default_rng(17)
    x = rng.beta(2, 5, size=120)
    cens = x < 0.15
    rep = np.where(cens, 0.15, x)  # reported "<0.15"
    lo, hi = betting_bounds(rep, alpha=0.05, x_low=np.where(cens, 0.0, rep), x_high=rep)
    for _ in range(20):
        truth = np.where(cens, rng.uniform(0, 0.15, size=x.size), rep)
        t_lo, t_hi = betting_bounds(rep, alpha=0.05, x_low=truth, x_high=truth)  # same bets, true values
        assert lo <= t_lo and hi >= t_hi
