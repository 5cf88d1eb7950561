"""p-values, their adjustment, decisions and wording (geosample/stats/decisions.py).

External checks: the multiple-testing rows of ../shared/CHECKS.md (Holm 1979; Benjamini & Hochberg
1995), statsmodels' multipletests and scipy's t-test as reference libraries, and the half-width
functions read backwards (the p-value is the smallest error probability excluding the criterion).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from geosample.stats.decisions import (
    ADJUST_METHODS,
    adjust_pvalues,
    decide,
    decision_statement,
    format_estimate,
    statement,
    stratum_pvalue,
)
from geosample.stats.intervals import (
    bernstein_half_width,
    cantelli_half_width,
    chebyshev_half_width,
    hoeffding_half_width,
)


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
