"""Tests of geosample.stats.allocation (shares, largest remainder, the smallest total over strata).

Sources are named beside each check: "CHECKS.md" rows quote ../shared/CHECKS.md (Cochran, Sampling
Techniques, 3rd ed. 1977, ch. 5); expectations marked "computed" are derived here, never by calling
the code under test.
"""
from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from geosample.errors import InfeasibleError, SettingError
from geosample.model import Allocation
from geosample.stats.allocation import ALLOCATION_METHODS, allocate, largest_remainder, shares
from geosample.stats.bounds import BOUNDS
from geosample.stats.sizing import sample_size

# CHECKS.md notation: L = 80, d = 15
L, D = 80.0, 15.0


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
    if bound == "betting":
        pytest.skip("betting: sample_size simulates the betting interval; the total over strata keeps Hoeffding's "
                    "form and the plan sizes the field days by simulation (tests/test_design.py)")
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


def test_stratified_t_allocation_meets_the_t_guarantee():
    w, sd_h = (0.4, 0.6), (10.0, 25.0)
    a = allocate(w, tolerance=5, sd=sd_h, method="neyman", bound="t")
    assert a.error_bound <= 0.05 * (1 + 1e-9)
    assert a.achieved_tolerance <= 5
