"""Intervals, p-values, decisions and wording (geosample/stats/estimate.py).

External checks: the sizing rows and the betting and multiple-testing rows of ../shared/CHECKS.md,
scipy.stats (t intervals, t-tests, Welch degrees of freedom) and statsmodels' multipletests as
reference libraries, and simulated coverage on bounded populations (fixed seeds; each coverage
check allows 3 Monte Carlo standard errors, a false-alarm rate of about 0.1% per check).
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from geosample.stats.estimate import (
    ADJUST_METHODS,
    adjust_pvalues,
    betting_interval,
    betting_log_capital,
    betting_pvalue,
    betting_sequence,
    bernstein_half_width,
    cantelli_half_width,
    capital_process,
    chebyshev_half_width,
    decide,
    decision_statement,
    format_estimate,
    hoeffding_half_width,
    prpl_bets,
    statement,
    stratified_mean,
    stratum_pvalue,
    t_half_width,
    welch_df,
)

sys.path.insert(0, str(Path(__file__).parent))


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
    from geosample.stats.estimate import betting_bounds

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


# --------------------------------------------------------------------------- coverage simulations
POPULATIONS = {
    # bounded populations on [0, 1] (rescaled by L in the tests): name -> (sampler, true mean)
    "uniform": (lambda rng, size: rng.uniform(size=size), 0.5),
    "two-point at the ends": (lambda rng, size: (rng.uniform(size=size) < 0.3).astype(float), 0.3),
    "skewed beta(1, 6)": (lambda rng, size: rng.beta(1, 6, size=size), 1 / 7),
}


def _at_least_nominal(cover: float, nominal: float, reps: int) -> bool:
    return cover >= nominal - 3 * math.sqrt(nominal * (1 - nominal) / reps)


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


def test_betting_is_narrower_than_hoeffding_on_low_variance_data():
    rng = np.random.default_rng(8)
    L, n = 400.0, 500
    v = L * rng.beta(2, 30, size=n)  # counts well inside a generous declared range
    bet = betting_interval(v, lower=0, range=L, confidence=0.95)
    hoef = 2 * hoeffding_half_width([1.0], [n], [L], 0.95)
    ratio = (bet.high - bet.low) / hoef
    print(f"betting / hoeffding width ratio: {ratio:.3f}")
    assert ratio < 1, f"betting width / hoeffding width = {ratio:.3f}"


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


def test_t_pvalue_matches_scipy():
    rng = np.random.default_rng(12)
    y = rng.normal(100, 20, size=12)
    p1 = stratum_pvalue("t", y, 126, L=None, lower=0, confidence=0.95, sides="one", direction="below")
    p2 = stratum_pvalue("t", y, 126, L=None, lower=0, confidence=0.95, sides="two", direction="below")
    assert p1 == pytest.approx(stats.ttest_1samp(y, 126, alternative="less").pvalue)
    assert p2 == pytest.approx(stats.ttest_1samp(y, 126).pvalue)


@pytest.mark.parametrize("bound, sides", [("chebyshev", "two"), ("hoeffding", "two"), ("hoeffding", "one"),
                                          ("cantelli", "one"), ("bernstein", "two")])
def test_range_pvalue_is_the_smallest_alpha_excluding_the_criterion(bound, sides):
    y = np.array([40.0, 55, 62, 38, 71, 49, 52, 44, 60, 58] * 3)
    L, c = 100.0, 80.0
    p = stratum_pvalue(bound, y, c, L=L, lower=0, confidence=0.95, sides=sides, direction="below")
    assert 0 < p < 1

    def upper(conf):
        if bound == "chebyshev":
            return y.mean() + chebyshev_half_width([1], [y.size], [L], conf)
        if bound == "cantelli":
            return y.mean() + cantelli_half_width([1], [y.size], [L], conf)
        if bound == "hoeffding":
            return y.mean() + hoeffding_half_width([1], [y.size], [L], conf, sides)
        k = 2 if sides == "two" else 1
        return y.mean() + bernstein_half_width(y.size, y.std(ddof=1), L, (1 - conf) / k)

    assert upper(1 - p * 1.001) < c < upper(1 - p * 0.999)


def test_betting_pvalue_is_one_over_the_largest_capital():
    rng = np.random.default_rng(13)
    x = rng.beta(2, 8, size=80)
    p = betting_pvalue(x, 0.5, alpha=0.05)
    lc = betting_log_capital(x, np.array([0.5]), prpl_bets(x, 0.05), theta=0.5, c=0.5)
    assert p == pytest.approx(min(1.0, float(np.exp(-lc.max()))))
    assert p < 0.05 and betting_pvalue(x, float(x.mean()), alpha=0.05) > 0.05


# --------------------------------------------------------------------------- multiple testing
def test_adjusted_pvalues_match_checks_md():
    # CHECKS.md (Holm 1979; Benjamini & Hochberg 1995)
    p = [0.008, 0.03, 0.123, 0.6, 0.2]
    assert np.allclose(adjust_pvalues(p, "bh"), [0.04, 0.075, 0.205, 0.6, 0.25])
    assert np.allclose(adjust_pvalues(p, "holm"), [0.04, 0.12, 0.369, 0.6, 0.4])
    assert np.array_equal(adjust_pvalues(p, "none"), p)


def test_benjamini_hochberg_example_rejections():
    # CHECKS.md: the fifteen p-values of Benjamini & Hochberg (1995) at q = 0.05: BH rejects 4,
    # Holm and Bonferroni 3 (memory + computed)
    p = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262, 0.5719,
         0.6528, 0.7590, 1.000]
    assert (adjust_pvalues(p, "bh") <= 0.05).sum() == 4
    assert (adjust_pvalues(p, "holm") <= 0.05).sum() == 3
    assert (adjust_pvalues(p, "bonferroni") <= 0.05).sum() == 3


@pytest.mark.parametrize("seed", range(5))
@pytest.mark.parametrize("ours, theirs", [("holm", "holm"), ("bh", "fdr_bh"), ("bonferroni", "bonferroni")])
def test_adjusted_pvalues_match_statsmodels(seed, ours, theirs):
    from statsmodels.stats.multitest import multipletests  # reference library

    rng = np.random.default_rng(seed)
    p = rng.uniform(size=12) ** 3
    p[3] = p[7]  # a tie
    assert np.allclose(adjust_pvalues(p, ours), multipletests(p, alpha=0.05, method=theirs)[1])


def test_unknown_adjustment_is_refused():
    from geosample.errors import SettingError

    with pytest.raises(SettingError, match="--adjust"):
        adjust_pvalues([0.1], "sidak-ish")
    assert "holm" in ADJUST_METHODS and "bh" in ADJUST_METHODS


# --------------------------------------------------------------------------- decisions and wording
@pytest.mark.parametrize("low, high, sides, direction, expected", [
    (80, 110, "two", "below", "below"),
    (130, 150, "two", "below", "above"),
    (100, 130, "two", "below", "not established"),
    (-math.inf, 120, "one", "below", "below"),
    (130, math.inf, "one", "below", "not established"),  # a one-sided upper bound cannot establish "above"
    (130, math.inf, "one", "above", "above"),
])
def test_decide(low, high, sides, direction, expected):
    assert decide(low, high, 126, sides, direction) == expected
    assert decide(low, high, None, sides, direction) is None


def test_statement_wording():
    fig = format_estimate(95.2, 83.1, 107.3, half_width=12.1, units="MPN/100 mL", geomean=False, sides="two",
                          direction="below")
    assert fig == "95 ± 12 MPN/100 mL"
    text = statement(statistic="mean", parameter="E. coli", frame_label="Lake Mirrow", season=("2027-06-01",
                     "2027-08-31"), figure=fig, confidence=0.95, bound="chebyshev", sides="two", direction="below")
    assert text.startswith("The mean E. coli over Lake Mirrow from 2027-06-01 to 2027-08-31 is 95 ± 12 MPN/100 mL "
                           "at the 95% confidence level: the procedure used gives an interval that contains the "
                           "true mean at least 95% of the time")
    assert "Chebyshev" in text
    dec = decision_statement("below", criterion=126, confidence=0.95, statistic="mean", sides="two")
    assert dec == ("The whole interval lies below the criterion 126, so the mean is below the criterion at the 95% "
                   "confidence level.")
    assert "probability" not in (text + dec).lower()


def test_one_sided_decision_wording():
    dec = decision_statement("not established", criterion=126, confidence=0.9, statistic="mean", sides="one")
    assert dec == ("The bound does not clear the criterion 126, so it is not established that the mean is below the "
                   "criterion at the 90% confidence level.")


def test_t_statement_says_approximately():
    text = statement(statistic="mean", parameter="", frame_label="F", season=("a", "b"), figure="1 ± 1",
                     confidence=0.9, bound="t", sides="two", direction="below")
    assert "about 90% of the time" in text and "approximate" in text


def test_geomean_figure_is_a_factor():
    fig = format_estimate(100.0, 50.0, 200.0, half_width=None, units="cfu/100 mL", geomean=True, sides="two",
                          direction="below")
    assert "factor of 2" in fig and "50 to 200" in fig


# --------------------------------------------------------------------------- assess() on fake results
from types import SimpleNamespace  # noqa: E402

from geosample.errors import ResultsError  # noqa: E402
from geosample.stats.estimate import assess  # noqa: E402


def fake_manifest(strata=(("North basin", 0.5), ("South basin", 0.3), ("Reed bay", 0.2)), **kw) -> dict:
    from test_results import resolved_settings

    settings = resolved_settings(**kw)
    return {"settings": settings,
            "frame": {"area_m2": 2.4e6, "strata": [{"name": n, "code": n[:2].upper(), "area_m2": w * 2.4e6,
                                                     "weight": w} for n, w in strata]},
            "allocation": {"strata": [n for n, _ in strata], "n": [5] * len(strata), "total": 5 * len(strata)},
            "itinerary": {}}


def fake_results(values: dict[str, list[float]], **kw) -> SimpleNamespace:
    strata = [SimpleNamespace(name=k, values=tuple(v), censored=("",) * len(v)) for k, v in values.items()]
    base = dict(strata=strata, flags=(), notes=(), order=(), range_exceeded=(), outside_support=())
    base.update(kw)
    return SimpleNamespace(**base)


def test_assess_stratified_chebyshev_by_hand():
    vals = {"North basin": [40, 55, 62, 38, 71, 49], "South basin": [88, 95, 102, 79], "Reed bay": [120, 131, 115]}
    a = assess(fake_results(vals), fake_manifest(range=200, criterion=126))
    est = 0.5 * np.mean(vals["North basin"]) + 0.3 * np.mean(vals["South basin"]) + 0.2 * np.mean(vals["Reed bay"])
    d = math.sqrt((0.25 * 100**2 / 6 + 0.09 * 100**2 / 4 + 0.04 * 100**2 / 3) / 0.05)  # Cochran ch. 5, by hand
    assert a.estimate == pytest.approx(est)
    # the lower end is cut at 0 (a mean of counts is not negative); the upper end is not cut
    assert (a.low, a.high) == (pytest.approx(max(0, est - d)), pytest.approx(est + d))
    assert [s.name for s in a.strata] == list(vals)  # every stratum listed
    assert a.decision == "not established"
    assert a.strata[0].sd == pytest.approx(np.std(vals["North basin"], ddof=1))


def test_assess_geomean_reports_back_on_the_original_scale():
    vals = {"North basin": [10, 100, 1000, 100], "South basin": [50, 20, 80, 40]}
    m = fake_manifest(strata=(("North basin", 0.6), ("South basin", 0.4)), statistic="geomean", range=4,
                      tolerance=0.3, bound="t", extra_size="sd = 0.5")
    a = assess(fake_results(vals), m)
    logm = 0.6 * np.mean(np.log10(vals["North basin"])) + 0.4 * np.mean(np.log10(vals["South basin"]))
    assert a.estimate == pytest.approx(10**logm)
    assert a.low * a.high == pytest.approx(a.estimate**2)  # symmetric on log10: a factor either way
    assert "geometric mean" in a.statement and "factor" in a.statement


def test_results_outside_the_range_fall_back_to_t_and_say_so():
    vals = {"North basin": [40, 55, 620, 38], "South basin": [88, 95, 102, 79], "Reed bay": [120, 131, 115]}
    a = assess(fake_results(vals, range_exceeded=("North basin",)), fake_manifest(range=400, bound="hoeffding"))
    assert a.bound == "t" and a.planned_bound == "hoeffding" and a.range_void
    assert any("does not hold" in n for n in a.notes)
    assert "approximate" in a.statement


def test_stratum_without_results_is_an_error():
    with pytest.raises(ResultsError, match="Reed bay"):
        assess(fake_results({"North basin": [1, 2], "South basin": [3, 4], "Reed bay": []}), fake_manifest())


def test_t_needs_two_results_per_stratum():
    with pytest.raises(ResultsError, match="only 1 usable result"):
        assess(fake_results({"North basin": [1, 2], "South basin": [3, 4], "Reed bay": [5]}),
               fake_manifest(bound="t", extra_size="sd = 10"))


def test_established_after_k_samples_with_betting():
    rng = np.random.default_rng(14)
    v = list(30 + 20 * rng.beta(2, 5, size=120))
    m = fake_manifest(strata=(("Whole lake", 1.0),), range=200, bound="betting", criterion=126)
    a = assess(fake_results({"Whole lake": v}), m)
    assert a.decision == "below"
    k = a.sequential.established_after
    # independently, from the paper's definitions written out here: predictable plug-in bets
    # lam_t = sqrt(2 ln(2/a) / (sigma2_{t-1} t ln(1+t))), truncated at c/(1-m), c = 1/2; the K- bettor's
    # capital (weight 1/2) at m = criterion/L reaching 1/a rejects every mean >= the criterion
    x, c01, alpha = np.array(v) / 200, 126 / 200, 0.05
    t = np.arange(1, x.size + 1)
    mu = (0.5 + np.cumsum(x)) / (t + 1)
    sig2 = np.concatenate(([0.25], ((0.25 + np.cumsum((x - mu) ** 2)) / (t + 1))[:-1]))
    lam = np.minimum(np.sqrt(2 * np.log(2 / alpha) / (sig2 * t * np.log(1 + t))), 0.5 / (1 - c01))
    capital = 0.5 * np.cumprod(1 - lam * (x - c01))
    assert k == int(np.argmax(capital >= 1 / alpha)) + 1
    short = assess(fake_results({"Whole lake": v[: max(1, k - 1)]}), m)
    assert short.decision == "not established" and short.sequential.more_needed >= 1
    assert "estimate" in short.sequential.note


def test_stratified_betting_covers_at_least_nominally():
    # union bound over strata at a / H (docs/methods.md); 200 replicates, 3 standard errors
    rng = np.random.default_rng(15)
    m = fake_manifest(range=100, bound="betting")
    w = np.array([0.5, 0.3, 0.2])
    mus = np.array([0.2, 0.5, 0.7])  # beta means on [0, 1]
    true = float(w @ (100 * mus))
    hits, reps = 0, 200
    for _ in range(reps):
        vals = {name: list(100 * rng.beta(4 * mu, 4 * (1 - mu), size=n))
                for name, mu, n in zip(("North basin", "South basin", "Reed bay"), mus, (12, 8, 6))}
        a = assess(fake_results(vals), m)
        hits += a.low <= true <= a.high
    assert _at_least_nominal(hits / reps, 0.95, reps), f"stratified betting coverage {hits / reps:.3f}"


def test_per_stratum_pvalues_are_adjusted_and_all_listed():
    vals = {"North basin": [20, 25, 22, 24, 21, 23] * 6, "South basin": [120, 125, 130, 128] * 3,
            "Reed bay": [190, 180, 185] * 12}
    m = fake_manifest(range=200, bound="hoeffding")
    a = assess(fake_results(vals), m, adjust="holm")
    raw = [s.p_value for s in a.strata]
    assert [s.p_adjusted for s in a.strata] == pytest.approx(list(adjust_pvalues(raw, "holm")))
    assert len(a.strata) == 3
    assert [s.decision for s in a.strata] == ["below", "not established", "above"]
    bh = assess(fake_results(vals), m, adjust="bh")
    assert [s.p_adjusted for s in bh.strata] == pytest.approx(list(adjust_pvalues(raw, "bh")))


# --------------------------------------------------------------------------- reallocation
def _with_sd(sd: float, n: int = 10, centre: float = 100.0) -> list[float]:
    z = np.linspace(-1, 1, n)
    z = (z - z.mean()) / z.std(ddof=1)
    return list(centre + sd * z)


def _cochran_manifest(bound: str, **kw) -> dict:
    m = fake_manifest(strata=(("Deep", 1 / 6), ("Shallow", 5 / 6)), range=200, bound=bound,
                      extra_size="sd = 10" if bound == "t" else "", **kw)
    m["settings"]["size"]["tolerance"] = None
    m["settings"]["size"]["n"] = 100
    return m


@pytest.mark.parametrize("bound", ["t", "chebyshev", "hoeffding"])
def test_neyman_reallocation_from_observed_sds(bound):
    # Cochran 1977 ch. 5 worked exercise (CHECKS.md): N = (100000, 500000), sd = (20, 12), n = 100 -> (25, 75)
    pytest.importorskip("geosample.stats.sizing")
    res = fake_results({"Deep": _with_sd(20), "Shallow": _with_sd(12)})
    a = assess(res, _cochran_manifest(bound))
    r = a.next_allocation
    assert r.method == "neyman" and r.sd == pytest.approx((20, 12))
    assert r.n == (25, 75) and r.total == 100


def test_cost_optimal_reallocation_from_travel_minutes():
    # CHECKS.md: costs (4, 1) -> (14.29, 85.71) -> integers (14, 86) by largest remainder
    pytest.importorskip("geosample.stats.sizing")
    m = _cochran_manifest("t")
    m["itinerary"] = {"travel_minutes_per_site": {"Deep": 4.0, "Shallow": 1.0}}
    m["settings"]["time"]["minutes_on_site"] = 0
    a = assess(fake_results({"Deep": _with_sd(20), "Shallow": _with_sd(12)}), m)
    r = a.next_allocation
    assert r.method == "optimal" and r.cost == (4.0, 1.0)
    assert r.n == (14, 86)


def test_range_bound_total_meets_the_tolerance_by_the_declared_range():
    pytest.importorskip("geosample.stats.sizing")
    vals = {"North basin": _with_sd(30, 8), "South basin": _with_sd(10, 6), "Reed bay": _with_sd(5, 4)}
    a = assess(fake_results(vals), fake_manifest(range=200, tolerance=25, bound="chebyshev"))
    r = a.next_allocation
    w = np.array([0.5, 0.3, 0.2])
    # Chebyshev guarantee by hand (Cochran ch. 5 with sigma_h = L/2): V <= a d^2 at the suggested n_h
    V = float(np.sum(w**2 * 100.0**2 / np.array(r.n)))
    assert V <= 0.05 * 25**2
    # the shares follow the observed sds (Neyman: W_h s_h), not the common range
    share = w * np.array([30, 10, 5]) / np.sum(w * np.array([30, 10, 5]))
    assert np.allclose(np.array(r.n) / r.total, share, atol=0.02 + 2 / r.total)
    assert any("declared range" in n for n in r.notes)


def test_bernstein_with_a_single_result_falls_back_to_chebyshev_and_says_so():
    vals = {"North basin": [40, 55, 62], "South basin": [88, 95], "Reed bay": [120]}
    a = assess(fake_results(vals), fake_manifest(range=200, bound="bernstein", extra_size="sd = 30"))
    assert a.bound == "chebyshev" and any("Bernstein" in n for n in a.notes)
