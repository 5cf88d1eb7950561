"""Tests of geosample.stats.sizing against published values and independent computations.

Sources are named beside each check: "CHECKS.md" rows quote ../shared/CHECKS.md
(Chebyshev, Cantelli, Hoeffding 1963 JASA 58:13-30, Cochran, Sampling Techniques,
3rd ed. 1977, ch. 4 and 5); expectations marked "computed" are derived here, with
math, fractions or scipy, never by calling the code under test.
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from geosample.errors import GeosampleError, InfeasibleError, SettingError
from geosample.model import Allocation
from geosample.rng import stream
from geosample.stats import sizing
from geosample.stats.sizing import (
    ALLOCATION_METHODS,
    ASSUMPTIONS,
    BOUNDS,
    FORMULAS,
    achieved,
    allocate,
    error_probability,
    half_width,
    largest_remainder,
    sample_size,
    shares,
    stratified_error_bound,
    stratified_half_width,
)

# CHECKS.md notation: L = 80, d = 15, a = 0.10
L, D, A = 80.0, 15.0, 0.10


# --------------------------------------------------------------------------- published rows
def test_chebyshev_two_sided_checks_row():
    # CHECKS.md, Chebyshev two-sided: (L/2)^2 / (a d^2) = 71.1 -> 72
    r = sample_size(D, range=L, confidence=1 - A, bound="chebyshev")
    assert r.n == 72
    assert math.isclose(r.error_bound, 40**2 / (72 * 15**2))  # computed: 0.0988
    assert 40**2 / (71 * 15**2) > A  # computed: 71 is not enough
    assert r.sigma == 40 and "Popoviciu" in r.sentence()


def test_cantelli_exactly_64_checks_row():
    # CHECKS.md, Cantelli one-sided: (L/2)^2 (1-a) / (a d^2) is exactly 64 -> 64 (watch floating point)
    exact = Fraction(40) ** 2 * Fraction(9, 10) / (Fraction(1, 10) * 15**2)
    assert exact == 64  # computed in exact arithmetic
    r = sample_size(D, range=L, confidence=0.90, bound="cantelli", sides="one")
    assert r.n == 64
    # computed: at n = 64 the Cantelli error bound sigma^2 / (sigma^2 + n d^2) is exactly a
    assert Fraction(1600, 1600 + 64 * 225) == Fraction(1, 10)
    assert math.isclose(r.error_bound, 0.1)


@pytest.mark.parametrize("sides, expected, formula", [
    # CHECKS.md, Hoeffding two-sided (Hoeffding 1963, JASA 58:13-30): L^2 ln(2/a) / (2 d^2) = 42.6 -> 43
    ("two", 43, L**2 * math.log(2 / A) / (2 * D**2)),
    # CHECKS.md, Hoeffding one-sided: L^2 ln(1/a) / (2 d^2) = 32.7 -> 33
    ("one", 33, L**2 * math.log(1 / A) / (2 * D**2)),
])
def test_hoeffding_checks_rows(sides, expected, formula):
    assert math.ceil(formula) == expected  # the row's arithmetic, computed
    r = sample_size(D, range=L, confidence=0.90, bound="hoeffding", sides=sides)
    assert r.n == expected
    k = 2 if sides == "two" else 1
    assert math.isclose(r.error_bound, k * math.exp(-2 * expected * D**2 / L**2))
    assert r.error_bound <= A


def _t_smallest(s, d, a, sides="two"):
    """Computed with scipy: the smallest n with (t_{q, n-1} s / d)^2 <= n (CHECKS.md's rule)."""
    q = 1 - a / 2 if sides == "two" else 1 - a
    n = 2
    while (stats.t.ppf(q, n - 1) * s / d) ** 2 > n:
        n += 1
    return n


def test_t_iteration_checks_row():
    # CHECKS.md, Student t with pilot sd (Cochran 1977, ch. 4): s = 30, d = 10, a = 0.05, listed as 37 (computed).
    # Recomputed here with scipy from the row's own rule, "smallest n with (t_{1-a/2,n-1} s/d)^2 <= n":
    # at n = 37, (t_{0.975,36} * 3)^2 = 37.018 > 37, so 37 misses ±10 (t half-width 10.0025) and the
    # smallest n meeting the rule is 38. The iteration n <- ceil(...) from the normal start alternates
    # 37, 38, 37, ..., which is where the listed 37 comes from. We test what the rule gives: 38.
    expected = _t_smallest(30, 10, 0.05)
    assert expected == 38
    assert stats.t.ppf(0.975, 36) * 30 / math.sqrt(37) > 10
    cycle, n = [], math.ceil((stats.norm.ppf(0.975) * 3) ** 2)
    for _ in range(6):
        n = math.ceil((stats.t.ppf(0.975, n - 1) * 3) ** 2)
        cycle.append(n)
    assert set(cycle[-4:]) == {37, 38}
    r = sample_size(10, sd=30, confidence=0.95, bound="t")
    assert r.n == expected
    assert r.half_width <= 10 and math.isclose(r.half_width, stats.t.ppf(0.975, 37) * 30 / math.sqrt(38))
    assert math.isclose(r.error_bound, 2 * stats.t.sf(10 * math.sqrt(38) / 30, 37))
    assert "normal" in r.assumption


@pytest.mark.parametrize("s, d, conf, sides", [(30, 10, 0.95, "two"), (12, 3, 0.90, "one"), (5, 4, 0.99, "two"),
                                              (100, 7, 0.80, "two")])
def test_t_matches_scipy_computation(s, d, conf, sides):
    assert sample_size(d, sd=s, confidence=conf, bound="t", sides=sides).n == _t_smallest(s, d, 1 - conf, sides)


def test_textbook_chebyshev_example():
    # common practice (a textbook worked example of the pairwise-independent sampling bound):
    # range 50, tolerance 20, 95% two-sided Chebyshev gives n = 32; at n = 32 the error bound is 0.0488
    r = sample_size(20, range=50, confidence=0.95, bound="chebyshev")
    assert r.n == 32
    assert round(r.error_bound, 4) == 0.0488
    assert round(error_probability(32, 20, range=50), 4) == 0.0488
    assert math.isclose(achieved(32, tolerance=20, range=50).error_bound, 25**2 / (32 * 20**2))  # computed


# --------------------------------------------------------------------------- every bound
@pytest.mark.parametrize("bound", BOUNDS)
def test_every_bound_has_assumption_formula_and_meets_its_guarantee(bound):
    sides = "one" if bound == "cantelli" else "two"
    r = sample_size(D, range=L, sd=30, confidence=0.90, bound=bound, sides=sides)
    assert ASSUMPTIONS[bound] and FORMULAS[bound] and r.assumption == ASSUMPTIONS[bound]
    assert r.error_bound <= A * (1 + 1e-9)
    assert r.half_width <= D * (1 + 1e-9)
    assert error_probability(r.n - 1, D, range=L, sd=30, bound=bound, sides=sides) > A  # n is the smallest
    assert math.isclose(error_probability(r.n, D, range=L, sd=30, bound=bound, sides=sides), r.error_bound)
    assert math.isclose(half_width(r.n, 0.90, range=L, sd=30, bound=bound, sides=sides), r.half_width)


def test_bernstein_against_the_inequality():
    # Bernstein's inequality (common practice): P(|mean - mu| >= d) <= 2 exp(-n d^2 / (2 sigma^2 + 2 L d / 3));
    # computed: the smallest n making it <= a, with sigma = 20, L = 80, d = 15, a = 0.10
    sig = 20.0
    expected = next(n for n in range(1, 1000) if 2 * math.exp(-n * D**2 / (2 * sig**2 + 2 * L * D / 3)) <= A)
    assert sample_size(D, range=L, sd=sig, confidence=0.90, bound="bernstein").n == expected
    # the half-width solves the same equation at that n
    hw = half_width(expected, 0.90, range=L, sd=sig, bound="bernstein")
    assert math.isclose(2 * math.exp(-expected * hw**2 / (2 * sig**2 + 2 * L * hw / 3)), A)


def test_betting_is_sized_as_hoeffding():
    h = sample_size(D, range=L, confidence=0.9, bound="hoeffding")
    b = sample_size(D, range=L, confidence=0.9, bound="betting")
    assert (b.n, b.error_bound) == (h.n, h.error_bound)
    assert "conservative" in b.assumption


def test_chebyshev_one_sided_is_the_conservative_two_sided_form():
    one = sample_size(D, range=L, confidence=0.9, bound="chebyshev", sides="one")
    assert one.n == 72  # the two-sided Chebyshev n (CHECKS.md row), valid one-sided
    assert sample_size(D, range=L, confidence=0.9, bound="cantelli", sides="one").n < one.n


def test_sd_is_used_and_capped_at_popoviciu():
    assert sample_size(D, sd=20, confidence=0.9).n == math.ceil(20**2 / (0.1 * 15**2))  # computed: 17.8 -> 18
    capped = sample_size(D, range=L, sd=60, confidence=0.9)  # sd above range/2 = 40 is impossible
    assert capped.n == 72 and capped.sigma == 40 and capped.notes


@given(d=st.floats(0.5, 50), L_=st.floats(1, 200), conf=st.floats(0.5, 0.999),
       bound=st.sampled_from(["chebyshev", "hoeffding"]), sides=st.sampled_from(["two", "one"]))
@settings(max_examples=150, deadline=None)
def test_sample_size_is_the_smallest_integer_of_the_closed_form(d, L_, conf, bound, sides):
    a = 1 - conf
    k = 2 if sides == "two" else 1
    x = (L_ / 2) ** 2 / (a * d**2) if bound == "chebyshev" else L_**2 * math.log(k / a) / (2 * d**2)  # CHECKS.md
    n = sample_size(d, range=L_, confidence=conf, bound=bound, sides=sides).n
    assert n >= x * (1 - 1e-9)
    assert n - 1 < x or n == 1


def test_whole_number_ceilings_do_not_round_up():
    # computed: (L/2)^2 / (a d^2) with L = 40, d = 2, a = 0.2 is exactly 500, but 1 - 0.8 is
    # 0.19999999999999996 in binary, so a naive ceiling gives 501
    assert math.ceil((40 / 2) ** 2 / ((1 - 0.8) * 2**2)) == 501
    assert sample_size(2, range=40, confidence=0.8).n == 500
    # Hoeffding one-sided exactly representable case: L^2 ln(1/a) / (2 d^2) with a = e^-2 gives L^2 / d^2
    assert sample_size(5, range=50, confidence=1 - math.exp(-2), bound="hoeffding", sides="one").n == 100


# --------------------------------------------------------------------------- inverse
def test_achieved_what_24_samples_buy():
    r = achieved(24, tolerance=15, range=80)
    assert math.isclose(r.error_bound, 1600 / (24 * 225))  # computed: 0.296
    assert math.isclose(r.confidence_reached, 1 - 1600 / (24 * 225))
    assert r.confidence == 0.95
    assert math.isclose(r.half_width, 40 / math.sqrt(24 * 0.05))  # computed: 36.5
    assert "24 samples" in r.sentence() and "36.5" in r.sentence()


@pytest.mark.parametrize("bound", BOUNDS)
def test_achieved_inverts_sample_size(bound):
    sides = "one" if bound == "cantelli" else "two"
    r = sample_size(D, range=L, sd=30, confidence=0.9, bound=bound, sides=sides)
    back = achieved(r.n, tolerance=D, confidence=0.9, range=L, sd=30, bound=bound, sides=sides)
    assert back.half_width <= D * (1 + 1e-9) and back.error_bound <= A * (1 + 1e-9)


def test_achieved_without_guarantee_says_so():
    r = achieved(1, tolerance=1, range=80)
    assert r.error_bound == 1.0 and "guarantees nothing" in r.sentence()


# --------------------------------------------------------------------------- geomean
def test_geomean_states_the_factor():
    r = sample_size(0.3, range=2.0, confidence=0.9, statistic="geomean")
    assert r.n == sample_size(0.3, range=2.0, confidence=0.9).n  # same math on log10 values
    assert math.isclose(r.tolerance_factor, 10**0.3)  # computed: 1.995
    assert "factor of 1.995" in r.sentence() and "geometric mean" in r.sentence()
    assert sample_size(0.3, range=2.0).tolerance_factor is None
    a = achieved(20, tolerance=0.3, range=2.0, statistic="geomean")
    assert math.isclose(a.half_width_factor, 10**a.half_width)


# --------------------------------------------------------------------------- errors
@pytest.mark.parametrize("kwargs, setting", [
    (dict(tolerance=0, range=80), "tolerance"),
    (dict(tolerance=-3, range=80), "tolerance"),
    (dict(tolerance=15, range=80, confidence=1.0), "confidence"),
    (dict(tolerance=15, range=80, confidence=0.0), "confidence"),
    (dict(tolerance=15, range=80, confidence=1.5), "confidence"),
    (dict(tolerance=15, bound="t"), "sd"),
    (dict(tolerance=15, bound="hoeffding"), "range"),
    (dict(tolerance=15, range=80, bound="bernstein"), "sd"),
    (dict(tolerance=15, range=80, bound="nope"), "bound"),
    (dict(tolerance=15, range=-80), "range"),
    (dict(tolerance=15, sd=0), "sd"),
    (dict(tolerance=15), "range"),
    (dict(tolerance=15, range=80, bound="cantelli"), "sides"),
    (dict(tolerance=15, range=80, statistic="median"), "statistic"),
])
def test_bad_input_names_the_setting(kwargs, setting):
    tol = kwargs.pop("tolerance")
    with pytest.raises(SettingError) as exc:
        sample_size(tol, **kwargs)
    assert exc.value.setting == setting
    assert isinstance(exc.value, ValueError) and isinstance(exc.value, GeosampleError)


def test_unknown_bound_lists_the_bounds_and_names_can_be_mapped():
    with pytest.raises(SettingError) as exc:
        sample_size(1, range=2, bound="nope", names=sizing.CLI_NAMES)
    assert exc.value.setting == "--bound"
    assert all(b in str(exc.value) for b in BOUNDS)


def test_n_below_one_is_refused():
    with pytest.raises(SettingError, match="n"):
        achieved(0, tolerance=1, range=2)
    with pytest.raises(SettingError, match="2"):
        achieved(1, tolerance=1, sd=2, bound="t")


# --------------------------------------------------------------------------- allocation (Cochran ch. 5)
# CHECKS.md (Cochran 1977, ch. 5, worked exercise): N = (100000, 500000), sd = (20, 12), n = 100
W_COCHRAN = (100000, 500000)


@pytest.mark.parametrize("method, kw, real, ints", [
    ("neyman", dict(sd=(20, 12)), (25.0, 75.0), (25, 75)),
    ("optimal", dict(sd=(20, 12), cost=(4, 1)), (14.29, 85.71), (14, 86)),
    ("proportional", dict(sd=(20, 12)), (16.67, 83.33), (17, 83)),
])
def test_cochran_allocations(method, kw, real, ints):
    p = shares(W_COCHRAN, method=method, **kw)
    assert tuple(round(100 * x, 2) for x in p) == real  # CHECKS.md values
    a = allocate(W_COCHRAN, n=100, method=method, **kw)
    assert isinstance(a, Allocation)
    assert a.n == ints and a.total == 100 and sum(a.n) == 100
    # largest remainder (computed by hand): floors, then the leftover to the largest fractional part
    q = [100 * x for x in p]
    floors = [math.floor(v) for v in q]
    extra = sorted(range(2), key=lambda h: -(q[h] - floors[h]))[: 100 - sum(floors)]
    assert a.n == tuple(f + (h in extra) for h, f in enumerate(floors))


def test_equal_allocation_and_weights_are_normalised():
    assert allocate([3, 1, 1, 1], n=10, method="equal").n == (3, 3, 2, 2)  # computed: 2.5 each, ties to the first
    a = allocate([2, 6], n=8)
    assert a.weights == (0.25, 0.75) and a.n == (2, 6)


def test_minimum_per_stratum_is_respected_and_noted():
    a = allocate([0.01, 0.49, 0.5], strata=["Cove", "North", "South"], n=20, min_per_stratum=3)
    assert a.n[0] == 3 and sum(a.n) == 20 and min(a.n) >= 3
    assert any("Cove" in note and "3" in note for note in a.notes)
    with pytest.raises(InfeasibleError, match="9"):
        allocate([1, 1, 1], n=8, min_per_stratum=3)


def test_allocation_errors():
    with pytest.raises(SettingError):
        allocate([1, -1], n=10)
    with pytest.raises(SettingError):
        allocate([0, 0], n=10)
    with pytest.raises(SettingError):
        allocate([1, 1], n=10, method="best")
    with pytest.raises(SettingError):
        allocate([1, 1], n=10, method="neyman")  # neither sd nor range
    with pytest.raises(SettingError):
        allocate([1, 1], range=80)  # neither n nor tolerance
    with pytest.raises(SettingError):
        allocate([1, 1], n=10, range=[80, 40, 20])  # wrong length


@pytest.mark.parametrize("bound", BOUNDS)
def test_single_stratum_reduces_to_sample_size(bound):
    sides = "one" if bound == "cantelli" else "two"
    n = sample_size(D, range=L, sd=30, confidence=0.9, bound=bound, sides=sides).n
    a = allocate([1.0], tolerance=D, range=L, sd=30, confidence=0.9, bound=bound, sides=sides)
    assert a.total == max(n, 2) and a.n == (a.total,)


def _cheb_V(w, n_h, L_h):
    """CHECKS.md stratified Chebyshev: sum_h W_h^2 (L_h/2)^2 / n_h (Cochran ch. 5), computed here."""
    return sum(wh**2 * (Lh / 2) ** 2 / nh for wh, Lh, nh in zip(w, L_h, n_h))


def _hoef_err(w, n_h, L_h, d, k):
    """CHECKS.md stratified Hoeffding: k exp(-2 d^2 / sum_h W_h^2 L_h^2 / n_h), computed here."""
    return k * math.exp(-2 * d**2 / sum(wh**2 * Lh**2 / nh for wh, Lh, nh in zip(w, L_h, n_h)))


@given(
    raw=st.lists(st.floats(0.01, 1.0), min_size=1, max_size=5),
    ranges=st.lists(st.floats(5.0, 100.0), min_size=5, max_size=5),
    d=st.floats(8.0, 40.0),
    conf=st.sampled_from([0.8, 0.9, 0.95]),
    method=st.sampled_from(ALLOCATION_METHODS),
    bound=st.sampled_from(["chebyshev", "hoeffding"]),
    sides=st.sampled_from(["two", "one"]),
)
@settings(max_examples=60, deadline=None)
def test_stratified_total_meets_the_guarantee_after_rounding(raw, ranges, d, conf, method, bound, sides):
    k = len(raw)
    w = [x / sum(raw) for x in raw]
    L_h = ranges[:k]
    a = 1 - conf
    alloc = allocate(raw, tolerance=d, range=L_h, method=method, cost=[1 + h for h in range(k)], bound=bound,
                     confidence=conf, sides=sides)
    assert sum(alloc.n) == alloc.total and min(alloc.n) >= 2

    def meets(n_h):
        if bound == "chebyshev":  # two-sided form, used one-sided too (conservative)
            return _cheb_V(w, n_h, L_h) <= a * d**2 * (1 + 1e-9)
        return _hoef_err(w, n_h, L_h, d, 2 if sides == "two" else 1) <= a * (1 + 1e-9)

    assert meets(alloc.n)
    assert alloc.error_bound <= a * (1 + 1e-9)
    # no allocation at all (Neyman's real-valued optimum) can do with fewer (Cochran ch. 5), computed
    if bound == "chebyshev":
        assert alloc.total >= sum(wh * Lh / 2 for wh, Lh in zip(w, L_h)) ** 2 / (a * d**2) * (1 - 1e-9)
    # every smaller total, rounded the same way, misses the guarantee (the search is exhaustive from below)
    p = shares(raw, method=method, range=L_h, cost=[1 + h for h in range(k)])
    for total in range(max(2 * k, alloc.total - 40), alloc.total):
        assert not meets(largest_remainder(p, total, minimum=2)[0])


def test_fixed_n_with_tolerance_reports_what_it_guarantees():
    w, n_h = (0.3, 0.7), (12, 28)
    a = allocate(w, n=40, tolerance=15, range=80, confidence=0.9)
    assert a.n == n_h
    assert math.isclose(a.error_bound, _cheb_V(w, n_h, (80, 80)) / 15**2)  # computed
    assert math.isclose(a.achieved_tolerance, math.sqrt(_cheb_V(w, n_h, (80, 80)) / 0.1))
    assert any("does not reach" in note for note in a.notes)


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


def test_stratified_t_allocation_meets_the_t_guarantee():
    w, sd_h = (0.4, 0.6), (10.0, 25.0)
    a = allocate(w, tolerance=5, sd=sd_h, method="neyman", bound="t")
    assert a.error_bound <= 0.05 * (1 + 1e-9)
    assert a.achieved_tolerance <= 5


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
