"""Tests of geosample.stats.bounds: every bound's error probability, half-width and smallest n.

Sources are named beside each check: "CHECKS.md" rows quote ../shared/CHECKS.md (Chebyshev, Cantelli,
Hoeffding 1963 JASA 58:13-30, Cochran, Sampling Techniques, 3rd ed. 1977, ch. 4 and 5); expectations
marked "computed" are derived here, with math or scipy, never by calling the code under test.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from geosample.rng import stream
from geosample.stats.bounds import (BOUNDS, half_width, smallest_n, stratified_error_bound,
                                    stratified_half_width)
from geosample.stats.sizing import sample_size

# CHECKS.md notation: L = 80, d = 15, a = 0.10
L, D, A = 80.0, 15.0, 0.10


def test_bernstein_against_the_inequality():
    # Bernstein's inequality (common practice): P(|mean - mu| >= d) <= 2 exp(-n d^2 / (2 sigma^2 + 2 L d / 3));
    # computed: the smallest n making it <= a, with sigma = 20, L = 80, d = 15, a = 0.10
    sig = 20.0
    expected = next(n for n in range(1, 1000) if 2 * math.exp(-n * D**2 / (2 * sig**2 + 2 * L * D / 3)) <= A)
    assert sample_size(D, range=L, sd=sig, confidence=0.90, bound="bernstein").n == expected
    # the half-width solves the same equation at that n
    hw = half_width(expected, 0.90, range=L, sd=sig, bound="bernstein")
    assert math.isclose(2 * math.exp(-expected * hw**2 / (2 * sig**2 + 2 * L * hw / 3)), A)


@pytest.mark.parametrize("bound, expected", [
    ("chebyshev", 72),  # CHECKS.md: 71.1 -> 72
    ("hoeffding", 43),  # CHECKS.md: 42.6 -> 43
])
def test_smallest_n_checks_rows(bound, expected):
    n, x, rule = smallest_n(bound, "two", D, A, sigma=L / 2, range=L, sd=None)
    assert n == expected and math.ceil(x) == expected and "n >=" in rule


def test_smallest_n_is_none_beyond_a_trillion():
    n, x, _ = smallest_n("chebyshev", "two", 1e-6, 0.05, sigma=40.0, range=80.0, sd=None)
    assert n is None and x > 1e12


@pytest.mark.parametrize("bound", BOUNDS)
def test_every_bound_is_listed_with_its_sizing_rule(bound):
    from geosample.stats.bounds import ASSUMPTIONS, FORMULAS
    assert ASSUMPTIONS[bound] and FORMULAS[bound]


def _cheb_V(w, n_h, L_h):
    """CHECKS.md stratified Chebyshev: sum_h W_h^2 (L_h/2)^2 / n_h (Cochran ch. 5), computed here."""
    return sum(wh**2 * (Lh / 2) ** 2 / nh for wh, Lh, nh in zip(w, L_h, n_h))


def _hoef_err(w, n_h, L_h, d, k):
    """CHECKS.md stratified Hoeffding: k exp(-2 d^2 / sum_h W_h^2 L_h^2 / n_h), computed here."""
    return k * math.exp(-2 * d**2 / sum(wh**2 * Lh**2 / nh for wh, Lh, nh in zip(w, L_h, n_h)))


def test_stratified_functions_against_independent_formulas():
    w, n_h, L_h = (0.2, 0.5, 0.3), (5, 12, 9), (40, 80, 60)
    assert math.isclose(stratified_error_bound(w, n_h, 20, range=L_h), _cheb_V(w, n_h, L_h) / 400)
    assert math.isclose(stratified_error_bound(w, n_h, 20, range=L_h, bound="hoeffding"),
                        _hoef_err(w, n_h, L_h, 20, 2))
    assert math.isclose(stratified_half_width(w, n_h, 0.9, range=L_h), math.sqrt(_cheb_V(w, n_h, L_h) / 0.1))
    V = _cheb_V(w, n_h, L_h)
    assert math.isclose(stratified_error_bound(w, n_h, 20, range=L_h, bound="cantelli", sides="one"),
                        V / (V + 400))
    # t: normal-theory stratified variance with Welch-Satterthwaite df (Cochran 1977, ch. 5), via scipy
    sd_h = (10, 25, 15)
    v = [wh**2 * s**2 / nh for wh, s, nh in zip(w, sd_h, n_h)]
    df = sum(v) ** 2 / sum(x**2 / (nh - 1) for x, nh in zip(v, n_h))
    assert math.isclose(stratified_half_width(w, n_h, 0.95, sd=sd_h, bound="t"),
                        stats.t.ppf(0.975, df) * math.sqrt(sum(v)))


# --------------------------------------------------------------------------- simulated coverage
R = 20_000  # replicates per case: a coverage's standard error is at most 0.0035


def _means(dist: str, n: int, rng: np.random.Generator) -> tuple[np.ndarray, float]:
    if dist == "uniform":
        return rng.uniform(0, L, size=(R, n)).mean(axis=1), L / 2
    if dist == "two-point":  # half the mass at each end of the range: the largest possible variance
        return L * rng.binomial(n, 0.5, size=R) / n, L / 2
    return L * rng.beta(2.0, 8.0, size=(R, n)).mean(axis=1), L * 0.2  # skewed beta(2, 8) on [0, L]


@pytest.mark.parametrize("dist", ["uniform", "two-point", "beta"])
@pytest.mark.parametrize("bound, sides, d, conf", [
    ("chebyshev", "two", 15.0, 0.90), ("cantelli", "one", 15.0, 0.90), ("hoeffding", "two", 15.0, 0.90),
    ("hoeffding", "one", 15.0, 0.90), ("chebyshev", "two", 30.0, 0.70), ("hoeffding", "two", 30.0, 0.70),
    ("cantelli", "one", 25.0, 0.75),
])
def test_simulated_coverage_is_at_least_nominal(dist, bound, sides, d, conf):
    # The bounds are conservative, so the true coverage is well above nominal in every case here:
    # the chance of a false alarm (simulated coverage below nominal) is far below 1e-6.
    n = sample_size(d, range=L, confidence=conf, bound=bound, sides=sides).n
    rng = stream(20270601, f"test/coverage/{dist}/{bound}/{sides}/{d}")
    means, mu = _means(dist, n, rng)
    if sides == "two":
        assert np.mean(np.abs(means - mu) < d) >= conf
    else:  # each direction separately
        assert np.mean(means - mu < d) >= conf
        assert np.mean(mu - means < d) >= conf


def test_simulation_detects_too_few_samples():
    # the same check with a quarter of the Chebyshev n fails for the two-point distribution,
    # so the coverage test above can fail
    n = sample_size(15.0, range=L, confidence=0.9).n // 24  # 3 samples
    means, mu = _means("two-point", n, stream(7, "test/undercoverage"))
    assert np.mean(np.abs(means - mu) < 15.0) < 0.9
