"""Fixed-n half-widths (geosample/stats/intervals.py).

External checks: the sizing rows of ../shared/CHECKS.md read backwards, Cochran 1977 ch. 5 by hand,
scipy.stats (t intervals, Welch degrees of freedom) as reference library, and simulated coverage on
bounded populations (fixed seeds; each coverage check allows 3 Monte Carlo standard errors).
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from geosample.stats.intervals import (
    bernstein_half_width,
    cantelli_half_width,
    chebyshev_half_width,
    hoeffding_half_width,
    stratified_mean,
    t_half_width,
    welch_df,
)

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import at_least_nominal as _at_least_nominal  # noqa: E402


# --------------------------------------------------------------------------- CHECKS.md: sizing rows, read backwards
# Source: ../shared/CHECKS.md, "Sample size for a mean of bounded measurements", L = 80, d = 15, a = 0.10.
# The published n is the smallest n whose half-width is <= d, so the half-width at n must be <= 15 and at n - 1 > 15.
@pytest.mark.parametrize("fn, n", [
    (lambda n: chebyshev_half_width([1.0], [n], [80], 0.90), 72),   # Chebyshev two-sided: 71.1 -> 72
    (lambda n: hoeffding_half_width([1.0], [n], [80], 0.90, "two"), 43),  # Hoeffding 1963, two-sided: 42.6 -> 43
    (lambda n: hoeffding_half_width([1.0], [n], [80], 0.90, "one"), 33),  # Hoeffding one-sided: 32.7 -> 33
])
def test_half_widths_match_the_published_sample_sizes(fn, n):
    assert fn(n) <= 15 < fn(n - 1)


def test_cantelli_row_is_exactly_64():
    # CHECKS.md: Cantelli one-sided, (L/2)^2 (1 - a) / (a d^2) = 64 exactly -> half-width 15 at n = 64
    assert cantelli_half_width([1.0], [64], [80], 0.90) == pytest.approx(15.0, rel=1e-12)


def test_stratified_range_variance_is_cochrans_sum():
    # Cochran 1977 ch. 5: Var = sum W_h^2 sigma_h^2 / n_h with sigma_h = L_h / 2 (Popoviciu); computed by hand
    w, n, L = [0.5, 0.3, 0.2], [6, 4, 3], [400, 200, 100]
    V = 0.25 * 200**2 / 6 + 0.09 * 100**2 / 4 + 0.04 * 50**2 / 3
    assert chebyshev_half_width(w, n, L, 0.95) == pytest.approx(math.sqrt(V / 0.05))
    S = 0.25 * 400**2 / 6 + 0.09 * 200**2 / 4 + 0.04 * 100**2 / 3  # CHECKS.md stratified Hoeffding
    assert hoeffding_half_width(w, n, L, 0.95) == pytest.approx(math.sqrt(S * math.log(2 / 0.05) / 2))


# --------------------------------------------------------------------------- coverage simulations
POPULATIONS = {
    # bounded populations on [0, 1] (rescaled by L in the tests): name -> (sampler, true mean)
    "uniform": (lambda rng, size: rng.uniform(size=size), 0.5),
    "two-point at the ends": (lambda rng, size: (rng.uniform(size=size) < 0.3).astype(float), 0.3),
    "skewed beta(1, 6)": (lambda rng, size: rng.beta(1, 6, size=size), 1 / 7),
}




@pytest.mark.parametrize("pop", list(POPULATIONS))
@pytest.mark.parametrize("bound", ["chebyshev", "hoeffding", "cantelli", "bernstein"])
def test_range_bounds_cover_at_least_nominally_on_stratified_bounded_data(pop, bound):
    rng = np.random.default_rng(20270601)
    sampler, mu01 = POPULATIONS[pop]
    reps, conf = 4000, 0.90
    w = np.array([0.5, 0.3, 0.2])
    n = np.array([12, 8, 5])
    L = np.array([80.0, 40.0, 120.0])
    shift = np.array([0.0, 10.0, 5.0])
    true = float(w @ (shift + L * mu01))
    means = np.empty((reps, 3))
    sds = np.empty((reps, 3))
    for h in range(3):
        y = shift[h] + L[h] * sampler(rng, (reps, n[h]))
        means[:, h] = y.mean(axis=1)
        sds[:, h] = y.std(axis=1, ddof=1)
    est = stratified_mean(w, means)
    if bound == "chebyshev":
        ok = np.abs(est - true) <= chebyshev_half_width(w, n, L, conf)
    elif bound == "hoeffding":
        ok = np.abs(est - true) <= hoeffding_half_width(w, n, L, conf)
    elif bound == "cantelli":  # one-sided upper bound
        ok = true <= est + cantelli_half_width(w, n, L, conf)
    else:  # empirical Bernstein, per stratum at a / H, two-sided
        a = (1 - conf) / 3
        d = np.array([[bernstein_half_width(int(n[h]), s[h], L[h], a / 2) for h in range(3)] for s in sds])
        ok = np.abs(est - true) <= d @ w
    cover = ok.mean()
    assert _at_least_nominal(cover, conf, reps), f"{bound} on {pop}: coverage {cover:.4f} < {conf}"


def test_t_interval_is_within_two_points_of_nominal_on_normal_data():
    rng = np.random.default_rng(7)
    reps, conf = 20000, 0.95
    w = np.array([0.5, 0.3, 0.2])
    n = np.array([8, 6, 5])
    mu, sd = np.array([40.0, 60.0, 90.0]), np.array([10.0, 25.0, 5.0])
    means, sds = np.empty((reps, 3)), np.empty((reps, 3))
    for h in range(3):
        y = rng.normal(mu[h], sd[h], size=(reps, n[h]))
        means[:, h], sds[:, h] = y.mean(axis=1), y.std(axis=1, ddof=1)
    d, _ = t_half_width(w, n, sds, conf)
    cover = (np.abs(stratified_mean(w, means) - w @ mu) <= d).mean()
    assert abs(cover - conf) <= 0.02, f"t coverage {cover:.4f}"


# --------------------------------------------------------------------------- t against scipy
def test_t_half_width_matches_scipy_for_one_stratum():
    rng = np.random.default_rng(9)
    y = rng.normal(50, 12, size=15)
    d, df = t_half_width([1.0], [15], [y.std(ddof=1)], 0.95)
    ci = stats.ttest_1samp(y, 0).confidence_interval(0.95)  # reference library
    assert df == 14
    assert float(d) == pytest.approx((ci.high - ci.low) / 2)


def test_welch_df_matches_scipy_welch_test():
    # Welch's two-sample df has the same form as the stratified one with W = (1, 1) (Satterthwaite 1946)
    rng = np.random.default_rng(10)
    a, b = rng.normal(0, 1, 9), rng.normal(0, 3, 14)
    ref = stats.ttest_ind(a, b, equal_var=False).df
    assert float(welch_df([1.0, 1.0], [9, 14], [a.std(ddof=1), b.std(ddof=1)])) == pytest.approx(ref)
