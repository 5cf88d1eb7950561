"""Assessment on field days, the units drawn independently (geosample/stats/assessment.py, intervals.py).

Field days are the primary units: each day's visits share its weather and time of day, so the
guarantees count days, not visits (RULES.md shared model; ../shared/CHECKS.md "Two-stage designs",
Cochran 1977 ch. 10, Brus 2022 ch. 7 and 15). External checks: the CHECKS.md worked example (range 80,
d = 16, 16 days: Chebyshev's error bound 0.39, not 0.099), scipy's t interval on day means (equal
visits per day: the ultimate-cluster variance is the variance of the day means), the visit formulas
when every day has one visit, and simulated coverage on space-time populations with day effects.
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from geosample.stats.assessment import assess, stratified_interval
from geosample.stats.intervals import chebyshev_half_width, cluster_t_half_width, hoeffding_half_width

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import at_least_nominal, fake_manifest, fake_results  # noqa: E402

VALS = {"North basin": [40, 55, 62, 38, 71, 49], "South basin": [88, 95, 102, 79], "Reed bay": [120, 131, 115]}


def test_checks_md_example_sixteen_days_not_sixty_four_visits():
    # CHECKS.md "Two-stage designs": range 80, d = 16, 16 days: (80/2)^2 / (16 * 16^2) = 0.39; 64 independent
    # visits would give 0.0977. Chebyshev's error bound at d is V / d^2, so d = 16 at a = V / 256.
    counts = np.full((16, 1), 4)  # 16 days of 4 visits, one stratum
    a_days = 1600 / (16 * 256)
    assert a_days == pytest.approx(0.390625)
    assert chebyshev_half_width([1.0], [64], [80], 1 - a_days, counts=counts) == pytest.approx(16.0)
    assert chebyshev_half_width([1.0], [64], [80], 1 - 1600 / (64 * 256)) == pytest.approx(16.0)
    # Hoeffding on days: S = sum_i R_i^2 with R_i = m_i L / n = 4 * 80 / 64 = 5: the visit formula with n = 16
    assert hoeffding_half_width([1.0], [64], [80], 0.95, counts=counts) == pytest.approx(
        math.sqrt(16 * 5**2 * math.log(2 / 0.05) / 2))
    assert hoeffding_half_width([1.0], [64], [80], 0.95, counts=counts) == pytest.approx(
        hoeffding_half_width([1.0], [16], [80], 0.95))


def test_one_visit_per_day_gives_the_visit_formulas():
    # every day one visit: the day counts are an identity and each formula is Cochran's ch. 5 one
    w, n, L = [0.5, 0.3, 0.2], [6, 4, 3], [200, 100, 150]
    counts = np.zeros((13, 3), int)
    counts[np.arange(13), np.repeat([0, 1, 2], n)] = 1
    for fn in (chebyshev_half_width, hoeffding_half_width):
        assert fn(w, n, L, 0.9, counts=counts) == pytest.approx(fn(w, n, L, 0.9))


@pytest.mark.parametrize("bound", ["chebyshev", "cantelli", "hoeffding", "bernstein", "betting", "t"])
def test_assess_with_one_visit_per_day_is_unchanged(bound):
    kw = {"cantelli": dict(sides="one"), "bernstein": dict(extra_size="sd = 30"), "t": dict(extra_size="sd = 30")}
    m = fake_manifest(range=200, bound=bound, criterion=126, **kw.get(bound, {}))
    days = {k: tuple(f"{k}-{i}" for i in range(len(v))) for k, v in VALS.items()}
    a = assess(fake_results(VALS), m)
    b = assess(fake_results(VALS, days=days), m)
    assert (b.interval.low, b.interval.high) == pytest.approx((a.interval.low, a.interval.high))


def test_cluster_t_equals_scipy_t_on_day_means_with_equal_visits_per_day():
    rng = np.random.default_rng(31)
    day_means = rng.normal(50, 10, size=12)
    y = np.repeat(day_means, 3) + rng.normal(0, 4, size=36)
    day = np.repeat(np.arange(12), 3)
    d, df = cluster_t_half_width([1.0], [y], [day], 0.95)
    means = y.reshape(12, 3).mean(axis=1)
    ci = stats.ttest_1samp(means, 0).confidence_interval(0.95)  # reference library
    assert df == 11 and d == pytest.approx((ci.high - ci.low) / 2)


def test_visits_sharing_a_day_widen_the_interval():
    same = {k: tuple("d1" if i % 2 else "d2" for i in range(len(v))) for k, v in VALS.items()}
    m = fake_manifest(range=200, bound="hoeffding", criterion=126)
    a = assess(fake_results(VALS), m)
    b = assess(fake_results(VALS, days=same), m)
    assert b.interval.high - b.estimate > 2 * (a.interval.high - a.estimate)  # the low ends are cut at 0
    assert any("field day" in n for n in b.notes)


# --------------------------------------------------------------------------- coverage on space-time populations
# A space-time population: K allowed days, two strata of N sites each; the value of site j on day d is
# clip(base_h + day_effect_d + site_effect_j + noise, 0, L). A season draws k days without replacement and,
# on each, m visits per stratum without replacement; the true mean is the weighted mean over all days and
# sites. Scenarios (issue 10): no day effect, moderate, dominant, and a stress case with wet days near the
# top of the range and dry days near 0.
K, N, L_RANGE = 65, 40, 80.0
WEIGHTS = (0.6, 0.4)
K_DAYS, M_PER_STRATUM = 6, 3  # 36 visits on 6 field days (issue 10's small lake)
CONFIDENCE = 0.90
REPS = 300


def _population(kind: str, rng: np.random.Generator) -> list[np.ndarray]:
    base = (30.0, 45.0)
    if kind == "none":
        day = np.zeros(K)
    elif kind == "moderate":
        day = rng.normal(0, 8, size=K)
    elif kind == "dominant":
        day = rng.normal(0, 20, size=K)
    else:  # stress: wet days near the top of the range, dry days near 0
        wet = rng.uniform(size=K) < 0.25
        day = np.where(wet, 60.0, -40.0)
    pops = []
    for h in range(2):
        site = rng.normal(0, 5, size=N)
        noise = rng.normal(0, 4 if kind != "stress" else 1, size=(K, N))
        pops.append(np.clip(base[h] + day[:, None] + site[None, :] + noise, 0, L_RANGE))
    return pops


def _season(pops, rng):
    days = np.sort(rng.choice(K, size=K_DAYS, replace=False))
    values, day_idx = [], []
    for pop in pops:
        sites = np.concatenate([rng.choice(N, size=M_PER_STRATUM, replace=False) for _ in days])
        d = np.repeat(days, M_PER_STRATUM)
        values.append(pop[d, sites])
        day_idx.append(np.repeat(np.arange(K_DAYS), M_PER_STRATUM))
    return values, day_idx


SCENARIOS = ("none", "moderate", "dominant", "stress")
BOUNDS = ("chebyshev", "cantelli", "hoeffding", "bernstein", "betting", "t")


@pytest.fixture(scope="module")
def coverage_table():
    rng = np.random.default_rng(20270601)
    table = {}
    for kind in SCENARIOS:
        pops = _population(kind, rng)
        true = float(sum(w * p.mean() for w, p in zip(WEIGHTS, pops)))
        hits = dict.fromkeys(BOUNDS, 0)
        naive = dict.fromkeys(("hoeffding", "t"), 0)
        for _ in range(REPS):
            values, day_idx = _season(pops, rng)
            for bound in BOUNDS:
                sides = "one" if bound == "cantelli" else "two"
                iv = stratified_interval(bound, values, WEIGHTS, [0.0, 0.0], [L_RANGE, L_RANGE], CONFIDENCE,
                                         sides=sides, direction="below", days=day_idx)
                hits[bound] += iv.low <= true <= iv.high
            for bound in naive:  # the same seasons with each visit taken as independent (the old formulas)
                iv = stratified_interval(bound, values, WEIGHTS, [0.0, 0.0], [L_RANGE, L_RANGE], CONFIDENCE)
                naive[bound] += iv.low <= true <= iv.high
        table[kind] = {b: h / REPS for b, h in hits.items()} | {f"{b} on visits": c / REPS for b, c in naive.items()}
    print("\ncoverage at 90% (300 seasons each):")
    for kind, row in table.items():
        print(f"  {kind:9s} " + "  ".join(f"{b} {c:.3f}" for b, c in row.items()))
    return table


@pytest.mark.slow
@pytest.mark.parametrize("kind", SCENARIOS)
@pytest.mark.parametrize("bound", [b for b in BOUNDS if b != "t"])
def test_day_level_bounds_cover_at_least_nominally(coverage_table, kind, bound):
    cover = coverage_table[kind][bound]
    assert at_least_nominal(cover, CONFIDENCE, REPS), f"{bound} on {kind}: {cover:.3f}"


@pytest.mark.slow
def test_t_on_days_is_approximate_and_its_figure_is_shown(coverage_table):
    # t may be labelled approximate (issue 10); its coverage is reported (docs/methods.md), checked only loosely
    for kind in SCENARIOS:
        assert coverage_table[kind]["t"] > 0.8, coverage_table[kind]


@pytest.mark.slow
def test_the_populations_break_the_visit_formulas(coverage_table):
    # the scenarios are hard enough to matter: with every visit taken as independent, t misses badly when days
    # dominate, and Hoeffding falls below nominal in the stress case (issue 10 measured 76-87%)
    assert coverage_table["dominant"]["t on visits"] < 0.8
    assert coverage_table["stress"]["hoeffding on visits"] < CONFIDENCE


# --------------------------------------------------------------------------- unequal day probabilities
# The field days are a stratified sample over temporal strata (weeks): k_s of K_s days, so a day of a short week
# is drawn with a higher probability. Each day is weighted by 1 / p (Hajek; randomizer/days.py docstring,
# Horvitz-Thompson): est = sum_h W_h sum_j y_j / p_j / sum_j 1 / p_j.
def test_estimate_weights_days_by_their_inclusion_probabilities():
    vals = {"North basin": [10.0, 20.0, 30.0, 40.0], "South basin": [50.0, 70.0]}
    days = {"North basin": ("1", "1", "2", "3"), "South basin": ("2", "3")}
    day_p = {"North basin": (0.5, 0.5, 0.2, 0.2), "South basin": (0.2, 0.2)}
    m = fake_manifest(strata=(("North basin", 0.6), ("South basin", 0.4)), range=200, bound="hoeffding")
    res = fake_results(vals, days=days)
    for st in res.strata:
        st.day_p = day_p[st.name]
    a = assess(res, m)
    north = (10 / 0.5 + 20 / 0.5 + 30 / 0.2 + 40 / 0.2) / (2 / 0.5 + 2 / 0.2)  # by hand
    assert a.estimate == pytest.approx(0.6 * north + 0.4 * 60.0)
    assert a.strata[0].mean == pytest.approx(north)


T_ALLOWED, T_DRAWN = (4, 10), (2, 2)  # a short week and a long one: p = 0.5 and 0.2


def _temporal_season(pop, rng):
    """pop: (14 days, N sites) for one stratum; 2 days drawn in each week, 3 sites per day."""
    starts = np.cumsum((0,) + T_ALLOWED[:-1])
    days = np.concatenate([st + rng.choice(K_s, size=k_s, replace=False)
                           for st, K_s, k_s in zip(starts, T_ALLOWED, T_DRAWN)])
    p = np.repeat([k / K for k, K in zip(T_DRAWN, T_ALLOWED)], T_DRAWN)
    t = np.repeat(np.arange(2), T_DRAWN)
    sites = np.concatenate([rng.choice(pop.shape[1], size=3, replace=False) for _ in days])
    return (pop[np.repeat(days, 3), sites], np.repeat(np.arange(days.size), 3), np.repeat(p, 3), np.repeat(t, 3))


def test_weighted_estimate_is_unbiased_and_the_bounds_cover_with_unequal_day_probabilities():
    # the short week is wet (values near the top), the long one dry: equal weights would over-weight the wet days
    rng = np.random.default_rng(7)
    pop = np.clip(np.concatenate([rng.normal(65, 5, size=(4, 30)), rng.normal(15, 5, size=(10, 30))]), 0, 80)
    true = float(pop.mean())
    tw = (4 / 14, 10 / 14)
    reps, est_w, est_u = 400, [], []
    hits = dict.fromkeys(("chebyshev", "hoeffding", "t", "bernstein", "betting"), 0)
    for _ in range(reps):
        y, day, p, t = _temporal_season(pop, rng)
        est_w.append(float(np.sum(y / p) / np.sum(1 / p)))
        est_u.append(float(y.mean()))
        for bound in hits:
            iv = stratified_interval(bound, [y], [1.0], [0.0], [80.0], 0.9, days=[day], day_p=[p], temporal=[t],
                                     temporal_weights=tw)
            hits[bound] += iv.low <= true <= iv.high
    se = np.std(est_w) / math.sqrt(reps)
    assert abs(np.mean(est_w) - true) < 4 * se, (np.mean(est_w), true)
    assert np.mean(est_u) - true > 10  # what equal weights would do here
    print("\nunequal day probabilities, coverage at 90%:", {b: h / reps for b, h in hits.items()})
    for bound, h in hits.items():
        if bound != "t":
            assert at_least_nominal(h / reps, 0.9, reps), (bound, h / reps)


def test_variance_components_by_hand():
    # one stratum, 3 days of 2: day means 10, 20, 30; within-day deviations +-1 (Cochran 1977 ch. 10)
    vals = {"Whole lake": [9, 11, 19, 21, 29, 31]}
    days = {"Whole lake": ("1", "1", "2", "2", "3", "3")}
    a = assess(fake_results(vals, days=days), fake_manifest(strata=(("Whole lake", 1.0),), range=200,
                                                            bound="hoeffding"))
    s_w = math.sqrt(6 * 1.0 / 3)  # sum of squares 6, 3 degrees of freedom
    s_b = math.sqrt(100.0 - s_w**2 / 2)  # variance of the day means 100, minus S_w^2 / m
    assert a.sd_within_day == pytest.approx(s_w) and a.sd_between_days == pytest.approx(s_b)
    assert a.as_dict()["variance_components"]["sd_within_day"] == pytest.approx(s_w)
