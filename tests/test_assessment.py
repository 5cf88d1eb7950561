"""``assess`` on fake results (geosample/stats/assessment.py).

External checks: Cochran 1977 ch. 5 by hand, the betting bets written out from the paper's
definitions, adjusted p-values against the decisions module, simulated coverage (3 Monte Carlo
standard errors).
"""
from __future__ import annotations

import math
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from geosample.errors import ResultsError
from geosample.stats.assessment import assess
from geosample.stats.decisions import adjust_pvalues

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import at_least_nominal  # noqa: E402
from fixtures_assess import at_least_nominal as _at_least_nominal  # noqa: E402
from fixtures_assess import fake_manifest, fake_results  # noqa: E402


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


# --------------------------------------------------------------------------- no switching after the data
# Issue 10: "One result outside the declared range makes assess drop the planned bound for a Student t
# interval: 17.1 ± 3.4 ... below the criterion where the same data without it gave not established."
IN_RANGE = {"North basin": [40, 55, 62, 38, 71, 49], "South basin": [88, 95, 102, 79], "Reed bay": [120, 131, 115]}
PLANS = {  # bound -> extra plan settings
    "chebyshev": dict(), "cantelli": dict(sides="one"), "hoeffding": dict(), "bernstein": dict(extra_size="sd = 30"),
    "betting": dict(),
}


def _void(vals: dict, stratum: str = "North basin") -> SimpleNamespace:
    return fake_results(vals, range_exceeded=(stratum,), outside_support=(stratum,))


@pytest.mark.parametrize("bound", list(PLANS))
@pytest.mark.parametrize("outlier", [260.0, 900.0, 17.1e3])
def test_one_result_outside_the_range_never_gives_a_decision(bound, outlier):
    m = fake_manifest(range=200, bound=bound, criterion=126, **PLANS[bound])
    vals = {k: list(v) for k, v in IN_RANGE.items()}
    vals["North basin"][-1] = outlier
    a = assess(_void(vals), m)
    assert a.range_void and a.bound == bound and a.planned_bound == bound  # the bound named in the plan
    assert a.decision == "no decision"
    assert "no basis for a decision" in a.statement and "approximate" in a.statement
    assert "no decision" in a.decision_text.lower() and "below the criterion at" not in a.decision_text
    assert a.strata[0].decision == "no decision" and a.strata[0].p_value is None
    assert a.sequential.established_after is None


@pytest.mark.parametrize("bound", list(PLANS))
def test_the_interval_shown_for_out_of_range_data_is_never_narrower_than_the_planned_one(bound):
    # the planned bound on the same data brought into the declared range (what the plan would have given)
    m = fake_manifest(range=200, bound=bound, criterion=126, **PLANS[bound])
    vals = {k: list(v) for k, v in IN_RANGE.items()}
    vals["North basin"][-1] = 260.0
    clipped = {k: list(np.clip(v, 0, 200)) for k, v in vals.items()}
    a, planned = assess(_void(vals), m), assess(fake_results(clipped), m)
    assert a.interval.low <= planned.interval.low and a.interval.high >= planned.interval.high


def test_the_approximate_interval_is_not_below_the_lower_end_when_no_result_is():
    # results spread more than the range but none below 0: a mean of counts is still not negative
    vals = {k: list(v) for k, v in IN_RANGE.items()}
    vals["North basin"][-1] = 260.0
    a = assess(fake_results(vals, range_exceeded=("North basin",)), fake_manifest(range=200, bound="chebyshev"))
    assert a.decision == "no decision" and a.interval.low >= 0.0


def test_no_range_for_a_range_bound_gives_no_decision():
    m = fake_manifest(range=200, bound="hoeffding")
    m["settings"]["size"]["range"] = None
    a = assess(fake_results(IN_RANGE), m)
    assert a.range_void and a.decision == "no decision" and "no basis for a decision" in a.statement


def test_in_range_data_still_decides():
    vals = {"North basin": [20, 25, 22, 24] * 9, "South basin": [30, 35, 32] * 10, "Reed bay": [28, 26] * 10}
    a = assess(fake_results(vals), fake_manifest(range=100, bound="hoeffding", criterion=126))
    assert a.decision == "below" and not a.range_void


# --------------------------------------------------------------------------- all-equal strata, size.lower
@pytest.mark.parametrize("bound", ["chebyshev", "cantelli", "hoeffding", "bernstein", "betting", "t"])
def test_a_stratum_whose_results_are_all_equal_is_assessed(bound):
    # a clean bay where every sample reads the same value (issue 10: exit 2 "size.sd = 0.0 is not accepted")
    vals = {"North basin": [10.0] * 6, "South basin": [88, 95, 102, 79], "Reed bay": [120, 131, 115]}
    kw = dict(PLANS.get(bound, {}))
    if bound == "t":
        kw["extra_size"] = "sd = 30"
    a = assess(fake_results(vals), fake_manifest(range=200, bound=bound, **kw))
    assert a.strata[0].sd == 0.0 and a.strata[0].mean == 10.0
    assert a.next_allocation is not None and all(n >= 2 for n in a.next_allocation.n)
    every = assess(fake_results({k: [10.0] * 4 for k in vals}), fake_manifest(range=200, bound=bound, **kw))
    assert every.estimate == pytest.approx(10.0)


def test_size_lower_moves_the_floor_and_the_betting_support():
    # size.lower = 50: results run from 50 to 250; the interval's lower end is cut at 50, not 0
    vals = {"North basin": [52, 55, 51, 53], "South basin": [60, 58, 57], "Reed bay": [70, 66, 64]}
    a0 = assess(fake_results(vals), fake_manifest(range=200, bound="chebyshev"))
    m50 = fake_manifest(range=200, bound="chebyshev")
    m50["settings"]["size"]["lower"] = 50.0  # the plan key size.lower (its loader check is stats-size's)
    a50 = assess(fake_results(vals), m50)
    assert a0.low == pytest.approx(0.0) and a50.low == pytest.approx(50.0)
    b0 = assess(fake_results(vals), fake_manifest(range=200, bound="betting"))
    mb = fake_manifest(range=200, bound="betting")
    mb["settings"]["size"]["lower"] = 50.0
    b50 = assess(fake_results(vals), mb)
    assert b50.low >= 50 and b50.low > b0.low


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


def test_bernstein_with_a_single_result_is_never_narrower_than_the_declared_range():
    # no switch to another bound: a stratum with one result contributes its whole declared range
    vals = {"North basin": [40, 55, 62], "South basin": [88, 95], "Reed bay": [120]}
    a = assess(fake_results(vals), fake_manifest(range=200, bound="bernstein", extra_size="sd = 30"))
    assert a.bound == "bernstein" and any("Bernstein" in n and "Reed bay" in n for n in a.notes)
    assert a.interval.high - a.interval.low >= 0.2 * 200  # Reed bay (weight 0.2) spans its range


# --------------------------------------------------------------------------- censored values as intervals
# ../shared/CHECKS.md "Censored values" (Helsel 2005, 2006): "<10" lies in [lower end of the range, 10] and ">150"
# in [150, upper end]; for a bound on the mean each takes the end least favourable to the claim being made.
CENS_VALS = {"North basin": [10, 10, 25, 40, 10, 33], "South basin": [88, 95, 150, 79], "Reed bay": [120, 131, 115]}
CENS = {"North basin": ("left", "left", "", "", "left", ""), "South basin": ("", "", "right", ""),
        "Reed bay": ("", "", "")}


def _at(end: str) -> dict:
    """The same samples with every censored value at one end of its interval (range 0..200)."""
    out = {}
    for k, v in CENS_VALS.items():
        out[k] = [(0.0 if end == "low" else x) if c == "left" else ((x if end == "low" else 200.0) if c == "right"
                  else x) for x, c in zip(v, CENS[k])]
    return out


@pytest.mark.parametrize("bound", ["chebyshev", "cantelli", "hoeffding", "bernstein", "betting", "t"])
@pytest.mark.parametrize("with_days", [False, True])
def test_censored_values_never_give_a_narrower_interval(bound, with_days):
    kw = dict(PLANS.get(bound, {}))
    if bound == "t":
        kw["extra_size"] = "sd = 30"
    m = fake_manifest(range=200, bound=bound, criterion=126, **kw)
    days = {k: tuple(f"d{i % 3}" for i in range(len(v))) for k, v in CENS_VALS.items()} if with_days else None
    a = assess(fake_results(CENS_VALS, censored=CENS, days=days), m)
    lo = assess(fake_results(_at("low"), days=days), m)
    hi = assess(fake_results(_at("high"), days=days), m)
    limits = assess(fake_results(CENS_VALS, days=days), m)
    assert a.interval.low <= lo.interval.low + 1e-9 and a.interval.high >= hi.interval.high - 1e-9
    assert a.interval.low <= limits.interval.low + 1e-9 and a.interval.high >= limits.interval.high - 1e-9
    assert "censored" in a.statement and "Helsel" in a.statement


def test_censoring_width_cost_is_stated():
    m = fake_manifest(range=200, bound="hoeffding", criterion=126)
    a = assess(fake_results(CENS_VALS, censored=CENS), m)
    limits = assess(fake_results(CENS_VALS), m)
    cost = (a.interval.high - a.interval.low) - (limits.interval.high - limits.interval.low)
    assert cost > 0 and f"{cost:.3g} units wider" in a.statement


@pytest.mark.parametrize("bound", ["betting", "bernstein", "hoeffding"])
def test_censored_intervals_cover_at_least_nominally(bound):
    # results below a detection limit of 30 reported as "<30" (a third of a skewed population), range 0..200
    rng = np.random.default_rng(41)
    m = fake_manifest(strata=(("Whole lake", 1.0),), range=200, bound=bound, criterion=126,
                      extra_size="sd = 40" if bound == "bernstein" else "")
    reps, hits = 200, 0
    for _ in range(reps):
        y = 200 * rng.beta(1.5, 4, size=25)
        cens = tuple("left" if v < 30 else "" for v in y)
        rep = [30.0 if c else v for v, c in zip(y, cens)]
        a = assess(fake_results({"Whole lake": rep}, censored={"Whole lake": cens}), m)
        hits += a.interval.low <= 200 * 1.5 / 5.5 <= a.interval.high
    assert at_least_nominal(hits / reps, 0.95, reps), f"{bound}: {hits / reps:.3f}"
