"""Per-stratum p-values and their adjustment, decisions against the criterion, and the wording.

Every statement is a claim about the procedure ("gives an interval that contains
the true mean at least X% of the time"), never a probability about the mean.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import SettingError
from .betting import betting_pvalue

__all__ = [
    "ADJUST_METHODS",
    "NO_DECISION",
    "BOUND_ASSUMPTIONS",
    "adjust_pvalues",
    "stratum_pvalue",
    "decide",
    "format_estimate",
    "statement",
    "decision_statement",
]

#: The decision when results outside the declared range void the bound's guarantee.
NO_DECISION = "no decision"
#: p-value adjustments for the per-stratum comparisons (``--adjust``).
ADJUST_METHODS = ("holm", "bh", "bonferroni", "none")

BOUND_ASSUMPTIONS = {
    "chebyshev": "Chebyshev's inequality with each stratum's sd bounded by half its declared range "
                 "(Popoviciu), on the field days' contributions to the stratified mean; it needs only that the "
                 "field days, and the sites and times within them, were drawn at random (samples of one day share "
                 "its weather and time of day, so the days are the units) and that no result can differ from "
                 "another by more than the declared range",
    "cantelli": "Cantelli's one-sided inequality with each stratum's sd bounded by half its declared range, on the "
                "field days' contributions; it needs only random field days, sites and times and results that "
                "respect the declared range",
    "hoeffding": "Hoeffding's inequality for the stratified mean as a sum of the field days' contributions, each "
                 "bounded by the declared range; it needs the field days, and the sites and times within them, "
                 "drawn at random and results that respect the declared range",
    "bernstein": "the empirical Bernstein inequality (Maurer & Pontil 2009) on each stratum's field-day means at "
                 "an equal share of the error probability; it needs the field days, and the sites and times within "
                 "them, drawn at random and results that respect the declared range",
    "t": "Student's t with the day-level variance (the field days as units; Welch-Satterthwaite degrees of freedom "
         "when every day has one sample); its confidence is approximate: it assumes the stratified mean is close "
         "to normally distributed, which needs enough field days when the results are skewed or days differ a lot",
    "betting": "a betting confidence sequence (Waudby-Smith & Ramdas 2024) on each stratum's field-day means inside "
               "the declared range; it needs the field days, and the sites and times within them, drawn at random, "
               "and stays valid when the results are looked at after every field day and sampling stops as soon "
               "as the claim is established",
}


# --------------------------------------------------------------------------- multiple comparisons
def adjust_pvalues(p, method: str = "holm") -> np.ndarray:
    """Adjusted p-values for a family of tests.

    ``holm``: Holm (1979) step-down, ``max_{j<=i} min(1, (m - j + 1) p_(j))``;
    ``bh``: Benjamini & Hochberg (1995) step-up, ``min_{j>=i} min(1, m p_(j) / j)``;
    ``bonferroni``: ``min(1, m p)``; ``none``: unchanged. Returned in the input order.

    Examples
    --------
    >>> adjust_pvalues([0.008, 0.03, 0.123, 0.6, 0.2], "bh").round(3).tolist()
    [0.04, 0.075, 0.205, 0.6, 0.25]
    """
    p = np.asarray(p, dtype=float)
    if method not in ADJUST_METHODS:
        raise SettingError("--adjust", method, " | ".join(ADJUST_METHODS))
    m = p.size
    if m == 0 or method == "none":
        return p.copy()
    if method == "bonferroni":
        return np.minimum(1.0, m * p)
    order = np.argsort(p, kind="mergesort")
    ps = p[order]
    rank = np.arange(1, m + 1)
    if method == "holm":
        adj = np.maximum.accumulate(np.minimum(1.0, (m - rank + 1) * ps))
    else:
        adj = np.minimum.accumulate(np.minimum(1.0, m * ps / rank)[::-1])[::-1]
    out = np.empty(m)
    out[order] = adj
    return out


def stratum_pvalue(bound: str, values, criterion: float, *, L: float | None, lower: float,
                   confidence: float, sides: str, direction: str, counts=None, days=None,
                   shares=None) -> float:
    """p-value of one stratum's comparison with the criterion, from the same bound.

    For the range bounds it is the smallest error probability at which the
    stratum's interval excludes the criterion; for ``t`` the t-test; for
    ``betting`` one over the largest capital reached at the criterion. One-sided
    plans test against the planned direction only (p = 1 on the other side).

    ``counts`` (results per field day) make the range bounds count days: n becomes
    ``n^2 / sum_i c_i^2`` (``n`` when every day has one result); ``days`` (the field day
    of each value) give t the day-level variance with ``k - 1`` degrees of freedom.
    Bernstein and betting take day means as ``values`` when days carry several results.
    ``shares`` (each value's share of the mean) replace 1/n for days drawn with unequal
    probabilities; ``counts`` may then be the days' shares.
    """
    v = np.asarray(values, float)
    n = v.size
    a_j = None if shares is None else np.asarray(shares, float)
    n_eff = float(n)
    if counts is not None and n:
        c = np.asarray(counts, float)
        n_eff = float(c.sum() ** 2 / np.sum(c**2))
    if n == 0:
        return 1.0
    mean = float(v.mean()) if a_j is None else float(np.dot(a_j, v))
    diff = criterion - mean if (sides == "one" and direction == "below") else (
        mean - criterion if sides == "one" else abs(mean - criterion))
    if bound == "t":
        from scipy import stats

        if n < 2:
            return 1.0
        if days is not None:
            labels, inv = np.unique(np.asarray(days), return_inverse=True)
            k = labels.size
            if k < 2:
                return 1.0
            u = np.bincount(inv, weights=(v - mean) * (1.0 / n if a_j is None else a_j), minlength=k)
            se, df = math.sqrt(k / (k - 1) * float(np.sum(u**2))), k - 1
        else:
            se, df = float(v.std(ddof=1)) / math.sqrt(n), n - 1
        if se == 0:
            return 0.0 if diff > 0 else 1.0
        tstat = diff / se
        return float(min(1.0, (2 if sides == "two" else 1) * stats.t.sf(tstat, df)))
    if bound == "betting":
        x = np.clip((v - lower) / L, 0, 1)
        m = (criterion - lower) / L
        if m >= 1 or m <= 0:  # the criterion lies outside the declared range: the comparison is settled by it
            beyond_top = m >= 1
            if sides == "one" and (direction == "above") == beyond_top:
                return 1.0
            return 0.0
        return betting_pvalue(x, m, alpha=1 - confidence, sides=sides, direction=direction)
    if diff <= 0:
        return 1.0
    if bound in ("chebyshev", "cantelli"):
        V = (L / 2.0) ** 2 / n_eff
        if bound == "cantelli":
            return float(min(1.0, V / (V + diff**2)))
        return float(min(1.0, V / diff**2))
    if bound == "hoeffding":
        k = 2.0 if sides == "two" else 1.0
        return float(min(1.0, k * math.exp(-2.0 * n_eff * diff**2 / L**2)))
    if bound == "bernstein":
        if n < 2:
            return 1.0
        sd = float(v.std(ddof=1))
        a_ = 7.0 * L / (3.0 * (n - 1))
        b_ = math.sqrt(2.0 * sd**2 / n)
        s = (-b_ + math.sqrt(b_**2 + 4 * a_ * diff)) / (2 * a_)  # half-width = b s + a s^2, s = sqrt(ln(k/p))
        k = 4.0 if sides == "two" else 2.0
        return float(min(1.0, k * math.exp(-(s**2))))
    raise SettingError("size.bound", bound, "chebyshev | cantelli | hoeffding | bernstein | t | betting")


# --------------------------------------------------------------------------- decisions and wording
def decide(low: float, high: float, criterion: float | None, sides: str = "two", direction: str = "below") -> str | None:
    """``"below"`` if the whole interval lies below the criterion, ``"above"`` if above, else ``"not established"``.

    One-sided bounds can only establish the planned direction. None without a criterion.
    """
    if criterion is None:
        return None
    if high < criterion and not (sides == "one" and direction == "above"):
        return "below"
    if low > criterion and not (sides == "one" and direction == "below"):
        return "above"
    return "not established"


def _pct(confidence: float) -> str:
    s = f"{100 * confidence:.4f}".rstrip("0").rstrip(".")
    return f"{s}%"


def _decimals(x: float, sig: int = 2) -> int:
    if not np.isfinite(x) or x == 0:
        return 1
    return max(0, sig - 1 - int(math.floor(math.log10(abs(x)))))


def _num(x: float, decimals: int) -> str:
    return f"{x:,.{decimals}f}"


def format_estimate(estimate: float, low: float | None, high: float | None, *, half_width: float | None,
                    units: str, geomean: bool, sides: str, direction: str) -> str:
    """The figure as it appears in the statement, e.g. ``"95 ± 12 MPN/100 mL"``.

    Rounded so the half-width (or the interval's shorter side) has two significant digits.
    """
    u = f" {units}" if units else ""
    if sides == "one":
        b = high if direction == "below" else low
        d = _decimals(abs(b - estimate)) if b is not None else 1
        word = "at most" if direction == "below" else "at least"
        return f"{word} {_num(b, d)}{u} (estimate {_num(estimate, d)}{u})"
    if geomean:
        factor = high / estimate if (high and estimate) else math.nan
        d = _decimals(min(estimate - low, high - estimate))
        return (f"{_num(estimate, d)}{u} (within a factor of {factor:.3g} either way, "
                f"that is {_num(low, d)} to {_num(high, d)})")
    if half_width is not None:
        d = _decimals(half_width)
        return f"{_num(estimate, d)} ± {_num(half_width, d)}{u}"
    d = _decimals(min(estimate - low, high - estimate))
    return f"{_num(estimate, d)}{u} (interval {_num(low, d)} to {_num(high, d)})"


def statement(*, statistic: str, parameter: str, frame_label: str, season: tuple[str, str], figure: str,
              confidence: float, bound: str, sides: str, direction: str, void: str = "") -> str:
    """The confidence statement: a claim about the procedure, never a probability about the mean.

    With ``void`` (why the bound's guarantee does not hold, e.g. results outside the
    declared range) no confidence is claimed: the figure is labelled approximate and
    no basis for a decision.
    """
    what = "geometric mean" if statistic == "geomean" else "mean"
    param = f" {parameter}" if parameter else ""
    pct = _pct(confidence)
    if void:
        return (f"The {what}{param} over {frame_label} from {season[0]} to {season[1]} is approximately {figure} "
                f"(approximate: {void}, so the guarantee of the {bound} bound named in the plan does not hold; this "
                f"interval is no basis for a decision and no confidence level is claimed for it).")
    if sides == "one":
        kind = "an upper bound that lies above" if direction == "below" else "a lower bound that lies below"
    else:
        kind = "an interval that contains"
    if bound == "t":
        rate = f"about {pct} of the time (approximately: see the assumption)"
    else:
        rate = f"at least {pct} of the time"
    seq = (", even when the results are looked at after every field day and sampling stops when the claim is "
           "established") if bound == "betting" else ""
    return (f"The {what}{param} over {frame_label} from {season[0]} to {season[1]} is {figure} at the {pct} "
            f"confidence level: the procedure used gives {kind} the true {what} {rate}{seq}. "
            f"Bound: {bound}; {BOUND_ASSUMPTIONS[bound]}.")


def decision_statement(decision: str | None, *, criterion: float | None, confidence: float, statistic: str,
                       sides: str, units: str = "", direction: str = "below", void: str = "") -> str:
    """The decision in words, e.g. "the whole interval lies below the criterion 126, so ..."."""
    what = "geometric mean" if statistic == "geomean" else "mean"
    pct = _pct(confidence)
    if criterion is None or decision is None:
        return "No criterion is given in the plan (survey.criterion), so no comparison is made."
    c = f"{criterion:g}"
    if decision == NO_DECISION:
        return (f"No decision: {void or 'the bound named in the plan does not hold'}, which voids the guarantee the "
                f"comparison rests on, so it is claimed neither that the {what} is below nor that it is above the "
                f"criterion {c}. Declare a range the results respect (for example from the method's reporting "
                "limits) and assess a new season's samples.")
    thing = "interval" if sides == "two" else "bound"
    if decision == "below":
        return (f"The whole {thing} lies below the criterion {c}, so the {what} is below the criterion at the "
                f"{pct} confidence level.")
    if decision == "above":
        return (f"The whole {thing} lies above the criterion {c}, so the {what} is above the criterion at the "
                f"{pct} confidence level.")
    if sides == "one":
        side = "below" if direction == "below" else "above"
        return (f"The {thing} does not clear the criterion {c}, so it is not established that the {what} is {side} "
                f"the criterion at the {pct} confidence level.")
    return (f"The {thing} reaches the criterion {c}, so whether the {what} is below or above the criterion is not "
            f"established at the {pct} confidence level.")
