"""Fixed-sample-size intervals for a stratified mean, and the helpers every bound shares.

Pure functions on numbers; nothing here reads or writes a file.

The target is the stratified mean over the frame and the season,
``mu = sum_h W_h mu_h`` with the frame's area weights ``W_h``, estimated by
``sum_h W_h ybar_h`` (Cochran, Sampling Techniques, 3rd ed. 1977, ch. 5). For
``statistic = "geomean"`` everything is computed on log10 values and reported
back on the original scale.

- ``chebyshev`` / ``cantelli``: sigma_h <= L_h / 2 (Popoviciu), stratified variance
  ``V = sum W_h^2 sigma_h^2 / n_h``; half-width ``sqrt(V / a)`` or, one-sided,
  ``sqrt(V (1 - a) / a)``.
- ``hoeffding``: the stratified mean is a sum of independent terms of range
  ``W_h L_h / n_h``; half-width ``sqrt(S ln(k / a) / 2)``, ``S = sum W_h^2 L_h^2 / n_h``,
  k = 2 two-sided, 1 one-sided.
- ``t``: sample sds, Welch-Satterthwaite degrees of freedom.
- ``bernstein``: the empirical Bernstein bound (Maurer & Pontil 2009).

The betting bound is in :mod:`geosample.stats.betting`; ``docs/methods.md``,
"Estimates, intervals and decisions", gives every formula with its source.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..errors import SettingError

__all__ = [
    "RANGE_BOUNDS",
    "SUPPORT_BOUNDS",
    "Interval",
    "declared_support",
    "to_analysis_scale",
    "stratified_mean",
    "chebyshev_half_width",
    "cantelli_half_width",
    "hoeffding_half_width",
    "welch_df",
    "t_half_width",
    "day_ranges",
    "cluster_t_half_width",
    "bernstein_half_width",
]

#: Bounds whose guarantee rests on the declared range.
RANGE_BOUNDS = ("chebyshev", "cantelli", "hoeffding", "bernstein", "betting")
#: Bounds that also need the end points of the range (data rescaled to [0, 1]).
SUPPORT_BOUNDS = ("betting",)


@dataclass(frozen=True)
class Interval:
    """A confidence interval (or one-sided bound) for a mean, on the analysis scale.

    ``low`` is ``-inf`` for a one-sided upper bound, ``high`` is ``+inf`` for a
    one-sided lower bound. ``half_width`` is set for the symmetric bounds.
    """

    estimate: float
    low: float
    high: float
    confidence: float
    bound: str
    sides: str
    half_width: float | None = None
    df: float | None = None
    notes: tuple[str, ...] = ()


# --------------------------------------------------------------------------- settings helpers
def declared_support(settings: dict, stratum: str) -> tuple[float, float | None]:
    """The declared range of one stratum as ``(lower, L)`` on the analysis scale.

    ``L`` is ``size.strata.<stratum>.range`` or ``size.range`` (None when the plan
    gives none). The lower end is ``size.lower`` when the plan has it, else 0:
    results are concentrations or counts, never negative (for ``geomean``: log10
    values of counts of at least 1). Only the betting bound uses the lower end;
    the other range bounds need only ``L``.
    """
    size = settings.get("size", {})
    per = (size.get("strata") or {}).get(stratum) or {}
    L = per.get("range") or size.get("range")
    lower = size.get("lower", 0.0) or 0.0
    return float(lower), (float(L) if L else None)


def to_analysis_scale(values: np.ndarray, statistic: str) -> np.ndarray:
    """Values on the scale the mean is taken on: log10 for ``geomean``, unchanged for ``mean``."""
    values = np.asarray(values, dtype=float)
    if statistic == "geomean":
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log10(values)
    return values


def _alpha(confidence: float) -> float:
    if not (0 < confidence < 1):
        raise SettingError("size.confidence", confidence, "a number strictly between 0 and 1")
    return 1.0 - float(confidence)


# --------------------------------------------------------------------------- fixed-n bounds
def stratified_mean(weights: Sequence[float], means: np.ndarray) -> np.ndarray:
    """``sum_h W_h ybar_h`` (Cochran 1977, eq. 5.1); ``means`` may carry leading replicate axes."""
    return np.asarray(means, dtype=float) @ np.asarray(weights, dtype=float)


def day_ranges(weights, ranges, counts) -> np.ndarray:
    """The range of each field day's contribution to the stratified mean: ``R_i = sum_h W_h L_h c_hi / n_h``.

    ``counts`` is a (k, H) array: results of stratum h taken on day i (``n_h`` its
    column sums). The stratified mean ``sum_h W_h ybar_h`` is the sum over days of
    ``Z_i = sum_{j on day i} W_h(j) y_j / n_h(j)``, and Z_i lies in a range of length R_i.
    With one result per day this is ``W_h L_h / n_h`` for each result.
    """
    c = np.asarray(counts, float)
    w = np.asarray(weights, float)
    L = np.broadcast_to(np.asarray(ranges, float), w.shape)
    n = c.sum(axis=0)
    return c @ np.where(n > 0, w * L / np.where(n > 0, n, 1.0), 0.0)


def _range_variance(weights, n_h, ranges, counts=None) -> float:
    if counts is not None:
        return float(np.sum((day_ranges(weights, ranges, counts) / 2.0) ** 2))
    w = np.asarray(weights, float)
    n = np.asarray(n_h, float)
    L = np.broadcast_to(np.asarray(ranges, float), w.shape)
    return float(np.sum(w**2 * (L / 2.0) ** 2 / n))


def chebyshev_half_width(weights, n_h, ranges, confidence: float, *, counts=None) -> float:
    """Chebyshev half-width ``sqrt(V / a)``, ``V = sum W_h^2 (L_h / 2)^2 / n_h``.

    With ``counts`` (results per field day and stratum, (k, H)) the days are the
    independent units: ``V = sum_i (R_i / 2)^2`` with :func:`day_ranges`, which is the
    formula above when every day has one result.

    Used one-sided it is valid but conservative (Cantelli is the one-sided form).

    Examples
    --------
    >>> round(chebyshev_half_width([1.0], [72], [80], 0.90), 3)   # CHECKS.md row: n = 72 for d = 15
    14.907
    """
    a = _alpha(confidence)
    return math.sqrt(_range_variance(weights, n_h, ranges, counts) / a)


def cantelli_half_width(weights, n_h, ranges, confidence: float, *, counts=None) -> float:
    """One-sided Cantelli half-width ``sqrt(V (1 - a) / a)`` (``counts``: as for Chebyshev)."""
    a = _alpha(confidence)
    return math.sqrt(_range_variance(weights, n_h, ranges, counts) * (1 - a) / a)


def hoeffding_half_width(weights, n_h, ranges, confidence: float, sides: str = "two", *,
                         counts=None) -> float:
    """Hoeffding half-width for the stratified mean: ``sqrt(S ln(k / a) / 2)``, ``S = sum W_h^2 L_h^2 / n_h``.

    With ``counts`` (results per field day and stratum) the days are the independent
    terms: ``S = sum_i R_i^2`` with :func:`day_ranges`.

    Examples
    --------
    >>> round(hoeffding_half_width([1.0], [43], [80], 0.90), 3)   # CHECKS.md row: n = 43 for d = 15
    14.931
    """
    a = _alpha(confidence)
    w = np.asarray(weights, float)
    L = np.broadcast_to(np.asarray(ranges, float), w.shape)
    if counts is not None:
        S = float(np.sum(day_ranges(w, L, counts) ** 2))
    else:
        S = float(np.sum(w**2 * L**2 / np.asarray(n_h, float)))
    k = 2.0 if sides == "two" else 1.0
    return math.sqrt(S * math.log(k / a) / 2.0)


def welch_df(weights, n_h, sds) -> np.ndarray:
    """Welch-Satterthwaite degrees of freedom of ``sum W_h ybar_h`` (Cochran 1977, eq. 5.16).

    ``sds`` may carry leading replicate axes (last axis = strata).
    """
    w = np.asarray(weights, float)
    n = np.asarray(n_h, float)
    v = w**2 * np.asarray(sds, float) ** 2 / n
    num = np.sum(v, axis=-1) ** 2
    den = np.sum(v**2 / (n - 1.0), axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.inf)


def t_half_width(weights, n_h, sds, confidence: float, sides: str = "two") -> tuple[np.ndarray, np.ndarray]:
    """Student-t half-width and degrees of freedom for the stratified mean.

    ``t_{1 - a/2, df} sqrt(sum W_h^2 s_h^2 / n_h)`` (two-sided; ``1 - a`` one-sided)
    with Welch-Satterthwaite ``df``. Vectorised over leading axes of ``sds``.
    """
    from scipy import stats

    a = _alpha(confidence)
    w = np.asarray(weights, float)
    n = np.asarray(n_h, float)
    if np.any(n < 2):
        raise ValueError("the t interval needs at least 2 results in every stratum")
    se = np.sqrt(np.sum(w**2 * np.asarray(sds, float) ** 2 / n, axis=-1))
    df = welch_df(w, n, sds)
    q = 1 - a / 2 if sides == "two" else 1 - a
    return stats.t.ppf(q, df) * se, df


def cluster_t_half_width(weights, values, days, confidence: float, sides: str = "two", *,
                         shares=None) -> tuple[float, float]:
    """Student-t half-width with the day-level (ultimate cluster) variance of the stratified mean.

    ``values[h]`` are stratum h's results and ``days[h]`` the field day (an integer
    label) of each. The stratified mean's residual is split by day,
    ``u_i = sum_h (W_h / n_h) sum_{j in h on day i} (y_j - ybar_h)``, and
    ``v = k / (k - 1) sum_i u_i^2`` with ``k`` days, ``df = k - 1`` (Taylor
    linearisation with days as primary units; Cochran 1977 ch. 10 and 11; approximate).
    With equal visits per day and one stratum it is the t interval on the day means.
    ``shares[h]`` (each value's share of its stratum mean, adding up to 1) replace
    ``1 / n_h`` when the days were drawn with unequal probabilities (Hajek weights).
    """
    from scipy import stats

    a = _alpha(confidence)
    labels = np.unique(np.concatenate([np.asarray(d) for d in days]))
    k = labels.size
    if k < 2:
        raise ValueError("the t interval on field days needs results from at least 2 days")
    u = np.zeros(k)
    for h, (w, y, d) in enumerate(zip(weights, values, days)):
        y = np.asarray(y, float)
        if y.size == 0:
            continue
        a_j = np.full(y.size, 1.0 / y.size) if shares is None else np.asarray(shares[h], float)
        idx = np.searchsorted(labels, np.asarray(d))
        np.add.at(u, idx, w * a_j * (y - float(np.dot(a_j, y))))
    v = k / (k - 1) * float(np.sum(u**2))
    q = 1 - a / 2 if sides == "two" else 1 - a
    df = float(k - 1)
    return float(stats.t.ppf(q, df) * math.sqrt(v)), df


def bernstein_half_width(n: int, sd: float, L: float, delta: float) -> float:
    """One-sided empirical Bernstein half-width at error ``delta`` (Maurer & Pontil 2009, Thm 4).

    ``sqrt(2 s^2 ln(2/delta) / n) + 7 L ln(2/delta) / (3 (n - 1))`` for results in a
    range of length ``L`` with sample sd ``s`` (n - 1 denominator).
    """
    if n < 2:
        return math.inf
    u = math.log(2.0 / delta)
    return math.sqrt(2.0 * sd**2 * u / n) + 7.0 * L * u / (3.0 * (n - 1))
