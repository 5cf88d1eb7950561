"""Estimates, intervals, decisions and reallocation after the field work.

Pure functions: they take numbers (or a :class:`geosample.results.Results` and a
manifest dict) and return frozen dataclasses; nothing here reads or writes a file.

The target is the stratified mean over the frame and the season,
``mu = sum_h W_h mu_h`` with the frame's area weights ``W_h``, estimated by
``sum_h W_h ybar_h`` (Cochran, Sampling Techniques, 3rd ed. 1977, ch. 5). For
``statistic = "geomean"`` everything is computed on log10 values and reported
back on the original scale (the interval becomes a factor, x/÷ 10^D).

Intervals follow the plan's bound (``docs/methods.md``, "Estimates, intervals and
decisions", gives every formula with its source):

- ``chebyshev`` / ``cantelli``: sigma_h <= L_h / 2 (Popoviciu), stratified variance
  ``V = sum W_h^2 sigma_h^2 / n_h``; half-width ``sqrt(V / a)`` or, one-sided,
  ``sqrt(V (1 - a) / a)``.
- ``hoeffding``: the stratified mean is a sum of independent terms of range
  ``W_h L_h / n_h``; half-width ``sqrt(S ln(k / a) / 2)``, ``S = sum W_h^2 L_h^2 / n_h``,
  k = 2 two-sided, 1 one-sided.
- ``t``: sample sds, Welch-Satterthwaite degrees of freedom.
- ``bernstein``: the empirical Bernstein bound (Maurer & Pontil 2009), per stratum
  at a / H, combined with the weights (union bound).
- ``betting``: hedged capital with predictable plug-in bets (Waudby-Smith &
  Ramdas 2024, JRSS-B 86(1):1-27), as a confidence sequence (running
  intersection), so the results may be assessed after every field day. With
  several strata: one sequence per stratum at a / H, combined with the weights.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Sequence

import numpy as np

from ..errors import InfeasibleError, ResultsError, SettingError

__all__ = [
    "ADJUST_METHODS",
    "RANGE_BOUNDS",
    "BOUND_ASSUMPTIONS",
    "Interval",
    "CapitalPath",
    "BettingSequence",
    "StratumEstimate",
    "Reallocation",
    "Sequential",
    "Assessment",
    "declared_support",
    "to_analysis_scale",
    "stratified_mean",
    "chebyshev_half_width",
    "cantelli_half_width",
    "hoeffding_half_width",
    "welch_df",
    "t_half_width",
    "bernstein_half_width",
    "capital_process",
    "prpl_bets",
    "betting_log_capital",
    "betting_bounds",
    "betting_sequence",
    "betting_interval",
    "betting_pvalue",
    "stratum_pvalue",
    "adjust_pvalues",
    "decide",
    "format_estimate",
    "statement",
    "decision_statement",
    "reallocate",
    "assess",
]

#: p-value adjustments for the per-stratum comparisons (``--adjust``).
ADJUST_METHODS = ("holm", "bh", "bonferroni", "none")
#: Bounds whose guarantee rests on the declared range.
RANGE_BOUNDS = ("chebyshev", "cantelli", "hoeffding", "bernstein", "betting")
#: Bounds that also need the end points of the range (data rescaled to [0, 1]).
SUPPORT_BOUNDS = ("betting",)

BOUND_ASSUMPTIONS = {
    "chebyshev": "Chebyshev's inequality with each stratum's sd bounded by half its declared range "
                 "(Popoviciu); it needs only that the sites and times were drawn at random (pairwise "
                 "independence) and that no result can differ from another by more than the declared range",
    "cantelli": "Cantelli's one-sided inequality with each stratum's sd bounded by half its declared range; "
                "it needs only random sites and times and results that respect the declared range",
    "hoeffding": "Hoeffding's inequality for the stratified mean; it needs independent random sites and times "
                 "and results that respect the declared range",
    "bernstein": "the empirical Bernstein inequality (Maurer & Pontil 2009) in each stratum at an equal share "
                 "of the error probability; it needs independent random sites and times and results that "
                 "respect the declared range",
    "t": "Student's t with the sample sds and Welch-Satterthwaite degrees of freedom; its confidence is "
         "approximate: it assumes the stratified mean is close to normally distributed, which needs enough "
         "samples per stratum when the results are skewed",
    "betting": "a betting confidence sequence (Waudby-Smith & Ramdas 2024) for results inside the declared "
               "range; it needs independent random sites and times, and stays valid when the results are "
               "looked at after every field day and sampling stops as soon as the claim is established",
}

_GRID = 1001  # grid of candidate means on [0, 1] for the betting sequence path (final ends: bisection)
_CHUNK = 2_000_000  # most cells of an (n, grid) array held at once


# --------------------------------------------------------------------------- records
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


@dataclass(frozen=True)
class CapitalPath:
    """Capital after each observation of the two bettors: ``plus`` bets the mean is above m, ``minus`` below."""

    plus: np.ndarray
    minus: np.ndarray


@dataclass(frozen=True)
class BettingSequence:
    """A betting confidence sequence on the [0, 1] scale, after each of ``n`` observations.

    ``low[k]`` and ``high[k]`` bound the mean after ``k`` observations (``k = 0`` is
    the whole range [0, 1]); they are the running intersection, so they never widen.
    ``low_final`` / ``high_final`` are the end points after all observations found by
    bisection (the path is on a grid and rounded outwards).
    """

    low: np.ndarray
    high: np.ndarray
    low_final: float
    high_final: float
    alpha: float
    sides: str
    direction: str


@dataclass(frozen=True)
class StratumEstimate:
    """One stratum's figures (analysis scale for mean/sd; original scale in ``display``)."""

    name: str
    weight: float
    n: int
    n_planned: int | None
    mean: float
    sd: float | None
    low: float
    high: float
    censored_left: int = 0
    censored_right: int = 0
    p_value: float | None = None
    p_adjusted: float | None = None
    decision: str | None = None


@dataclass(frozen=True)
class Sequential:
    """What the results say as a sequence: when the claim was established, or how far it is."""

    established_after: int | None
    more_needed: int | None
    note: str


@dataclass(frozen=True)
class Reallocation:
    """The allocation suggested for the next round, from the observed sds and the costs."""

    method: str
    strata: tuple[str, ...]
    n: tuple[int, ...]
    total: int
    sd: tuple[float, ...]
    cost: tuple[float, ...] | None
    bound: str
    tolerance: float | None
    achieved_tolerance: float | None
    notes: tuple[str, ...] = ()

    def as_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "bound": self.bound,
            "total": self.total,
            "tolerance": self.tolerance,
            "achieved_tolerance": self.achieved_tolerance,
            "strata": [
                {"name": s, "n": n, "sd": sd, "cost": (None if self.cost is None else self.cost[i])}
                for i, (s, n, sd) in enumerate(zip(self.strata, self.n, self.sd))
            ],
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class Assessment:
    """Everything ``geosample assess`` reports.

    Figures named ``estimate, low, high`` are on the original scale (for a
    geometric mean: back-transformed); ``interval`` holds the analysis scale
    (log10 for ``geomean``). ``decision`` is ``"below"``, ``"above"``,
    ``"not established"`` or None (no criterion).
    """

    statistic: str
    parameter: str
    units: str
    frame_label: str
    season: tuple[str, str]
    estimate: float
    low: float | None
    high: float | None
    interval: Interval
    confidence: float
    bound: str
    planned_bound: str
    sides: str
    direction: str
    criterion: float | None
    n: int
    n_planned: int | None
    decision: str | None
    statement: str
    decision_text: str
    assumption: str
    strata: tuple[StratumEstimate, ...]
    adjust: str
    sequential: Sequential
    next_allocation: Reallocation | None
    flags: tuple[Any, ...] = ()
    notes: tuple[str, ...] = ()
    range_void: bool = False

    def as_dict(self) -> dict[str, Any]:
        """Plain data for ``--json`` and the HTML report."""
        back = self.statistic == "geomean"
        strata = []
        for s in self.strata:
            strata.append({
                "name": s.name, "weight": s.weight, "n": s.n, "n_planned": s.n_planned,
                "mean": _back(s.mean, back), "sd": s.sd, "sd_scale": "log10" if back else "original",
                "low": _back(s.low, back), "high": _back(s.high, back),
                "censored_left": s.censored_left, "censored_right": s.censored_right,
                "p_value": s.p_value, "p_adjusted": s.p_adjusted, "decision": s.decision,
            })
        return {
            "statistic": self.statistic, "parameter": self.parameter, "units": self.units,
            "frame": self.frame_label, "season": list(self.season),
            "estimate": self.estimate, "low": self.low, "high": self.high,
            "half_width": self.interval.half_width if not back else None,
            "factor": (10 ** self.interval.half_width if back and self.interval.half_width is not None else None),
            "analysis_scale": {"estimate": self.interval.estimate, "low": _finite(self.interval.low),
                               "high": _finite(self.interval.high), "scale": "log10" if back else "original"},
            "confidence": self.confidence, "bound": self.bound, "planned_bound": self.planned_bound,
            "sides": self.sides, "direction": self.direction, "criterion": self.criterion,
            "n": self.n, "n_planned": self.n_planned, "decision": self.decision,
            "statement": self.statement, "decision_statement": self.decision_text,
            "assumption": self.assumption, "adjust": self.adjust, "strata": strata,
            "sequential": {"established_after": self.sequential.established_after,
                           "more_needed": self.sequential.more_needed, "note": self.sequential.note},
            "next_allocation": None if self.next_allocation is None else self.next_allocation.as_dict(),
            "flags": [_flag_dict(f) for f in self.flags],
            "notes": list(self.notes), "range_void": self.range_void,
        }


def _flag_dict(f: Any) -> dict:
    if hasattr(f, "as_dict"):
        return f.as_dict()
    return {"kind": getattr(f, "kind", ""), "message": str(getattr(f, "message", f)),
            "rows": list(getattr(f, "rows", ()))}


def _finite(v: float) -> float | None:
    return float(v) if np.isfinite(v) else None


def _back(v: float | None, back: bool) -> float | None:
    if v is None or not np.isfinite(v):
        return None
    return float(10 ** v) if back else float(v)


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


def _range_variance(weights, n_h, ranges) -> float:
    w = np.asarray(weights, float)
    n = np.asarray(n_h, float)
    L = np.broadcast_to(np.asarray(ranges, float), w.shape)
    return float(np.sum(w**2 * (L / 2.0) ** 2 / n))


def chebyshev_half_width(weights, n_h, ranges, confidence: float) -> float:
    """Chebyshev half-width ``sqrt(V / a)``, ``V = sum W_h^2 (L_h / 2)^2 / n_h``.

    Used one-sided it is valid but conservative (Cantelli is the one-sided form).

    Examples
    --------
    >>> round(chebyshev_half_width([1.0], [72], [80], 0.90), 3)   # CHECKS.md row: n = 72 for d = 15
    14.907
    """
    a = _alpha(confidence)
    return math.sqrt(_range_variance(weights, n_h, ranges) / a)


def cantelli_half_width(weights, n_h, ranges, confidence: float) -> float:
    """One-sided Cantelli half-width ``sqrt(V (1 - a) / a)``."""
    a = _alpha(confidence)
    return math.sqrt(_range_variance(weights, n_h, ranges) * (1 - a) / a)


def hoeffding_half_width(weights, n_h, ranges, confidence: float, sides: str = "two") -> float:
    """Hoeffding half-width for the stratified mean: ``sqrt(S ln(k / a) / 2)``, ``S = sum W_h^2 L_h^2 / n_h``.

    Examples
    --------
    >>> round(hoeffding_half_width([1.0], [43], [80], 0.90), 3)   # CHECKS.md row: n = 43 for d = 15
    14.931
    """
    a = _alpha(confidence)
    w = np.asarray(weights, float)
    L = np.broadcast_to(np.asarray(ranges, float), w.shape)
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


def bernstein_half_width(n: int, sd: float, L: float, delta: float) -> float:
    """One-sided empirical Bernstein half-width at error ``delta`` (Maurer & Pontil 2009, Thm 4).

    ``sqrt(2 s^2 ln(2/delta) / n) + 7 L ln(2/delta) / (3 (n - 1))`` for results in a
    range of length ``L`` with sample sd ``s`` (n - 1 denominator).
    """
    if n < 2:
        return math.inf
    u = math.log(2.0 / delta)
    return math.sqrt(2.0 * sd**2 * u / n) + 7.0 * L * u / (3.0 * (n - 1))


# --------------------------------------------------------------------------- betting
def capital_process(x, m: float, lam_plus, lam_minus) -> CapitalPath:
    """The two bettors' capital after each observation (Waudby-Smith & Ramdas 2024).

    ``K+_t = prod_{i<=t} (1 + lam+_i (x_i - m))`` and
    ``K-_t = prod_{i<=t} (1 - lam-_i (x_i - m))``, for data rescaled to [0, 1].

    Examples
    --------
    >>> k = capital_process([1, 1, 1], 0.5, 0.5, 0.5)
    >>> float(k.plus[-1]), float(k.minus[-1])
    (1.953125, 0.421875)
    """
    x = np.asarray(x, float)
    d = x - m
    plus = np.cumprod(1.0 + np.broadcast_to(np.asarray(lam_plus, float), x.shape) * d)
    minus = np.cumprod(1.0 - np.broadcast_to(np.asarray(lam_minus, float), x.shape) * d)
    return CapitalPath(plus=plus, minus=minus)


def prpl_bets(x, alpha: float, sides: str = "two") -> np.ndarray:
    """Predictable plug-in bets for a confidence sequence (before truncation).

    ``lam_t = sqrt(2 ln(k/a) / (sigma2_{t-1} t ln(1 + t)))`` with
    ``mu_t = (1/2 + sum_{i<=t} x_i) / (t + 1)`` and
    ``sigma2_t = (1/4 + sum_{i<=t} (x_i - mu_i)^2) / (t + 1)``, k = 2 two-sided, 1
    one-sided (Waudby-Smith & Ramdas 2024, the PrPl-EB bets). Bet ``t`` uses only
    ``x_1 .. x_{t-1}``.
    """
    x = np.asarray(x, float)
    n = x.size
    t = np.arange(1, n + 1, dtype=float)
    mu = (0.5 + np.cumsum(x)) / (t + 1.0)
    sigma2 = (0.25 + np.cumsum((x - mu) ** 2)) / (t + 1.0)
    prev = np.concatenate(([0.25], sigma2[:-1]))
    k = 2.0 if sides == "two" else 1.0
    return np.sqrt(2.0 * math.log(k / alpha) / (prev * t * np.log1p(t)))


def _theta(sides: str, direction: str) -> float:
    """Weight of the upward bettor K+ in the hedged capital."""
    if sides == "two":
        return 0.5
    return 0.0 if direction == "below" else 1.0


def _log_k(x: np.ndarray, m: np.ndarray, lam: np.ndarray, c: float, sign: int) -> np.ndarray:
    """log K+ (sign = +1) or log K- (sign = -1) after each observation: (n, G) for x (n,), m (G,)."""
    x = x[:, None]
    m = m[None, :]
    with np.errstate(divide="ignore"):
        cap = c / m if sign > 0 else c / (1.0 - m)
    bet = np.minimum(lam[:, None], cap)
    return np.cumsum(np.log1p(sign * bet * (x - m)), axis=0)


def betting_log_capital(x, m, lam, *, theta: float = 0.5, c: float = 0.5) -> np.ndarray:
    """log of the hedged capital ``max(theta K+, (1 - theta) K-)`` after each observation, for each m.

    ``x``: (n,) data in [0, 1]; ``m``: (G,) candidate means; ``lam``: (n,) bets
    before truncation. Bets are truncated at ``c/m`` (K+) and ``c/(1 - m)`` (K-), so
    the capital never reaches 0. Returns an (n, G) array.
    """
    x = np.asarray(x, float)
    m = np.atleast_1d(np.asarray(m, float))
    lam = np.asarray(lam, float)
    out = np.full((x.size, m.size), -np.inf)
    if theta > 0:
        out = math.log(theta) + _log_k(x, m, lam, c, +1)
    if theta < 1:
        out = np.maximum(out, math.log(1.0 - theta) + _log_k(x, m, lam, c, -1))
    return out


def _side_excluded(x, m: float, lam, c: float, sign: int, log_weight: float, thresh: float) -> bool:
    """Whether one bettor's weighted capital reached ``1/alpha`` at some time, at candidate mean ``m``."""
    return bool(log_weight + _log_k(x, np.array([m]), lam, c, sign)[:, 0].max() >= thresh)


def _side_end(x, lam, c: float, sign: int, log_weight: float, thresh: float, iters: int = 52) -> float:
    """End point of the confidence set on one side, by bisection (rounded outwards).

    K+ is nonincreasing in m and K- nondecreasing (every factor is), so the means
    K+ rejects form [0, l) and those K- rejects (u, 1]: the set is an interval.
    """
    excl, incl = (0.0, 1.0) if sign > 0 else (1.0, 0.0)
    if not _side_excluded(x, excl, lam, c, sign, log_weight, thresh):
        return excl
    for _ in range(iters):
        mid = 0.5 * (excl + incl)
        if _side_excluded(x, mid, lam, c, sign, log_weight, thresh):
            excl = mid
        else:
            incl = mid
    return excl  # a rejected point: the reported interval can only be wider than the exact one


def betting_bounds(x, *, alpha: float, sides: str = "two", direction: str = "below", c: float = 0.5
                   ) -> tuple[float, float]:
    """End points (on [0, 1]) of the betting confidence sequence after all of ``x`` (running intersection).

    Exact up to bisection (52 halvings), no grid; see :func:`betting_sequence`.
    """
    x = np.asarray(x, float)
    if x.size == 0:
        return 0.0, 1.0
    theta = _theta(sides, direction)
    lam = prpl_bets(x, alpha, sides)
    thresh = math.log(1.0 / alpha)
    low = _side_end(x, lam, c, +1, math.log(theta), thresh) if theta > 0 else 0.0
    high = _side_end(x, lam, c, -1, math.log(1 - theta), thresh) if theta < 1 else 1.0
    if low > high:  # every mean rejected (probability at most alpha): report the point it closed on
        low = high = 0.5 * (low + high)
    return low, high


def betting_sequence(x, *, alpha: float, sides: str = "two", direction: str = "below", c: float = 0.5,
                     grid: int = _GRID) -> BettingSequence:
    """Betting confidence sequence (running intersection) for data already in [0, 1].

    The set after ``t`` observations is ``{m : max(theta K+_s(m), (1 - theta) K-_s(m)) < 1/alpha
    for every s <= t}`` with ``theta = 1/2`` (two-sided). One-sided upper bounds
    (``direction = "below"``) use only K- (theta = 0), lower bounds only K+. Each
    bettor's capital is monotone in m, so the set is an interval. The path (after
    each observation) is computed on a grid of ``grid`` candidate means, vectorised,
    with end points rounded outwards to the next grid point; the final end points
    by bisection (:func:`betting_bounds`). n = 1,000 takes well under a second.
    """
    x = np.asarray(x, float)
    if x.size and (x.min() < 0 or x.max() > 1):
        raise ValueError("betting_sequence needs data rescaled to [0, 1]")
    n = x.size
    theta = _theta(sides, direction)
    low, high = np.zeros(n + 1), np.ones(n + 1)
    low_f, high_f = betting_bounds(x, alpha=alpha, sides=sides, direction=direction, c=c)
    if n == 0:
        return BettingSequence(low, high, low_f, high_f, alpha, sides, direction)
    lam = prpl_bets(x, alpha, sides)
    thresh = math.log(1.0 / alpha)
    m = np.linspace(0.0, 1.0, grid)
    step = max(1, _CHUNK // n)
    # first time each grid mean is rejected by each bettor (n when never)
    t_plus = np.full(grid, n)
    t_minus = np.full(grid, n)
    for i in range(0, grid, step):
        mm = m[i : i + step]
        for sign, w, out in ((+1, theta, t_plus), (-1, 1 - theta, t_minus)):
            if w <= 0:
                continue
            hit = (math.log(w) + _log_k(x, mm, lam, c, sign)) >= thresh
            out[i : i + step] = np.where(hit.any(axis=0), np.argmax(hit, axis=0), n)
    # K+ rejects a prefix of the grid, K- a suffix: after t + 1 observations the first grid mean K+ has not
    # rejected is the count of grid means rejected by then
    t = np.arange(n)
    k_lo = np.searchsorted(np.sort(t_plus), t, side="right")
    k_hi = grid - 1 - np.searchsorted(np.sort(t_minus), t, side="right")
    low[1:] = np.where(k_lo == 0, 0.0, m[np.clip(k_lo - 1, 0, grid - 1)])
    high[1:] = np.where(k_hi == grid - 1, 1.0, m[np.clip(k_hi + 1, 0, grid - 1)])
    crossed = low > high
    if crossed.any():
        mid = 0.5 * (low + high)
        low, high = np.where(crossed, mid, low), np.where(crossed, mid, high)
    low[-1], high[-1] = min(low[-1], low_f), max(high[-1], high_f)
    return BettingSequence(low, high, low_f, high_f, alpha, sides, direction)


def betting_interval(values, *, lower: float, range: float, confidence: float = 0.95, sides: str = "two",
                     direction: str = "below", c: float = 0.5) -> Interval:
    """Betting confidence interval for the mean of results in ``[lower, lower + range]``.

    The data are rescaled to [0, 1] by the declared range, the confidence
    sequence of :func:`betting_sequence` is run in the order given (the order the
    samples were taken), and its final set is returned in the original units.
    Valid at every sample size at once, so it may be computed after every field day.

    Examples
    --------
    >>> iv = betting_interval([40, 42, 38, 45, 41] * 20, lower=0, range=80)
    >>> bool(iv.low < 41.2 < iv.high)
    True
    """
    a = _alpha(confidence)
    v = np.asarray(values, float)
    x = (v - lower) / range
    if x.size == 0:
        raise ValueError("betting_interval needs at least one value")
    if x.min() < 0 or x.max() > 1:
        raise ValueError(f"values outside the declared range [{lower}, {lower + range}]")
    lo01, hi01 = betting_bounds(x, alpha=a, sides=sides, direction=direction, c=c)
    lo = lower + range * lo01
    hi = lower + range * hi01
    if sides == "one":
        lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
    return Interval(float(v.mean()), lo, hi, confidence, "betting", sides)


def betting_pvalue(x, m: float, *, alpha: float, sides: str = "two", direction: str = "below",
                   c: float = 0.5) -> float:
    """Anytime-valid p-value for ``mean = m`` (two-sided) or against the direction (one-sided): 1 / max capital.

    ``x`` in [0, 1]. The capital is a nonnegative supermartingale under the null,
    so by Ville's inequality ``P(max capital >= 1/a) <= a``.
    """
    x = np.asarray(x, float)
    if x.size == 0:
        return 1.0
    lam = prpl_bets(x, alpha, sides)
    lc = betting_log_capital(x, np.array([m]), lam, theta=_theta(sides, direction), c=c)[:, 0]
    return float(min(1.0, math.exp(-float(np.max(lc)))))


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
                   confidence: float, sides: str, direction: str) -> float:
    """p-value of one stratum's comparison with the criterion, from the same bound.

    For the range bounds it is the smallest error probability at which the
    stratum's interval excludes the criterion; for ``t`` the t-test; for
    ``betting`` one over the largest capital reached at the criterion. One-sided
    plans test against the planned direction only (p = 1 on the other side).
    """
    v = np.asarray(values, float)
    n = v.size
    if n == 0:
        return 1.0
    mean = float(v.mean())
    diff = criterion - mean if (sides == "one" and direction == "below") else (
        mean - criterion if sides == "one" else abs(mean - criterion))
    if bound == "t":
        from scipy import stats

        if n < 2:
            return 1.0
        sd = float(v.std(ddof=1))
        if sd == 0:
            return 0.0 if diff > 0 else 1.0
        tstat = diff / (sd / math.sqrt(n))
        return float(min(1.0, (2 if sides == "two" else 1) * stats.t.sf(tstat, n - 1)))
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
        V = (L / 2.0) ** 2 / n
        if bound == "cantelli":
            return float(min(1.0, V / (V + diff**2)))
        return float(min(1.0, V / diff**2))
    if bound == "hoeffding":
        k = 2.0 if sides == "two" else 1.0
        return float(min(1.0, k * math.exp(-2.0 * n * diff**2 / L**2)))
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
              confidence: float, bound: str, sides: str, direction: str) -> str:
    """The confidence statement: a claim about the procedure, never a probability about the mean."""
    what = "geometric mean" if statistic == "geomean" else "mean"
    param = f" {parameter}" if parameter else ""
    pct = _pct(confidence)
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
                       sides: str, units: str = "", direction: str = "below") -> str:
    """The decision in words, e.g. "the whole interval lies below the criterion 126, so ..."."""
    what = "geometric mean" if statistic == "geomean" else "mean"
    pct = _pct(confidence)
    if criterion is None or decision is None:
        return "No criterion is given in the plan (survey.criterion), so no comparison is made."
    c = f"{criterion:g}"
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


# --------------------------------------------------------------------------- reallocation
def _costs(names, settings: dict, manifest: dict) -> tuple[tuple[float, ...] | None, str]:
    travel = ((manifest.get("itinerary") or {}).get("travel_minutes_per_site") or {})
    on_site = float((settings.get("time") or {}).get("minutes_on_site") or 0.0)
    per = (settings.get("size") or {}).get("strata") or {}
    if travel:
        known = [float(v) for v in travel.values() if v is not None]
        fill = float(np.mean(known)) if known else 0.0
        costs = tuple(float(travel.get(n, fill) if travel.get(n) is not None else fill) + on_site for n in names)
        src = ("travel minutes per site from the itinerary plus minutes_on_site"
               + ("" if all(n in travel for n in names) else " (strata without a route take the mean travel time)"))
        if all(c > 0 for c in costs):
            return costs, src
    if per and all((per.get(n) or {}).get("cost") for n in names):
        return tuple(float(per[n]["cost"]) for n in names), "size.strata.<name>.cost from the plan"
    return None, "no costs known: equal cost per sample"


def reallocate(names: Sequence[str], weights: Sequence[float], sds: Sequence[float | None], *, settings: dict,
               manifest: dict | None = None, bound: str | None = None) -> Reallocation:
    """Allocation for the next round from the observed sds (Neyman) and the costs (cost-optimal).

    Costs are the itinerary's travel minutes per site plus ``minutes_on_site``
    (``manifest["itinerary"]["travel_minutes_per_site"]``), else the plan's
    ``size.strata.<name>.cost``; with costs the allocation is cost-optimal
    (n_h proportional to W_h s_h / sqrt(c_h)), without them Neyman (W_h s_h).
    For chebyshev, cantelli, hoeffding and betting the shares come from the observed
    sds (:func:`geosample.stats.sizing.shares`) and the total is the smallest whose
    rounded allocation meets the tolerance by
    :func:`geosample.stats.sizing.stratified_error_bound` with the declared ranges only:
    the observed sds move effort between strata but never stand in for the bound. For
    t and bernstein the total comes from :func:`geosample.stats.sizing.allocate` with
    the observed sds (taken as known, capped at range/2).
    """
    from . import sizing

    manifest = manifest or {}
    size = settings.get("size", {})
    bound = bound or size.get("bound", "chebyshev")
    notes: list[str] = []
    known = [s for s in sds if s is not None and np.isfinite(s)]
    fill = max(known) if known else (size.get("sd") or 1.0)
    sd_list: list[float] = []
    per = size.get("strata") or {}
    for name, s in zip(names, sds):
        if s is None or not np.isfinite(s):
            plan_sd = (per.get(name) or {}).get("sd") or size.get("sd")
            sd_list.append(float(plan_sd or fill))
            notes.append(f"{name}: fewer than 2 results, so its sd is taken from "
                         + ("the plan" if plan_sd else "the largest sd observed in another stratum"))
        else:
            sd_list.append(float(s))
    if all(s == 0 for s in sd_list):
        sd_list = [1.0] * len(sd_list)
        notes.append("every stratum's results were identical (sd 0): effort is split as if the sds were equal")
    costs, cost_src = _costs(names, settings, manifest)
    method = "optimal" if costs is not None and len(set(costs)) > 1 else "neyman"
    notes.append(f"costs: {cost_src}")
    ranges = [declared_support(settings, name)[1] for name in names]
    have_ranges = all(r is not None for r in ranges)
    tol = size.get("tolerance")
    fixed_n = None if tol else size.get("n")
    minimum = int(size.get("min_per_stratum") or 2)
    confidence = float(size.get("confidence", 0.95))
    sides = size.get("sides", "two")
    w = tuple(float(x) for x in weights)
    if bound in ("chebyshev", "cantelli", "hoeffding", "betting") and have_ranges:
        # shares from the observed sds (and costs); the guarantee from the declared ranges only, so an sd
        # estimated from a few results never stands in for a bound on the spread
        p = sizing.shares(w, method=method, sd=tuple(sd_list), cost=costs)
        n_h, total, raised = _range_total(sizing, w, p, tol, fixed_n, ranges, bound, sides, confidence, minimum,
                                          names)
        achieved_tol = sizing.stratified_half_width(w, n_h, confidence, range=tuple(ranges), bound=bound,
                                                    sides=sides)
        notes += list(raised)
        notes.append(f"the {bound} bound: the total follows from the declared range, not from the observed sds; "
                     "the sds only move effort between strata" + (" (sized as hoeffding)" if bound == "betting"
                                                                   else ""))
    else:
        alloc = sizing.allocate(
            w, strata=tuple(names), n=fixed_n, tolerance=tol, method=method, sd=tuple(sd_list),
            range=tuple(ranges) if have_ranges else None, cost=costs, min_per_stratum=minimum, bound=bound,
            confidence=confidence, sides=sides, statistic=settings.get("survey", {}).get("statistic", "mean"))
        n_h, total, achieved_tol = tuple(int(v) for v in alloc.n), int(alloc.total), alloc.achieved_tolerance
        notes.append(f"the {bound} bound: the total follows from the observed sds, taken as known"
                     + (" (capped at range/2)" if have_ranges else ""))
        notes += list(alloc.notes)
    return Reallocation(
        method=method, strata=tuple(names), n=tuple(n_h), total=int(total), sd=tuple(sd_list), cost=costs,
        bound=bound, tolerance=tol, achieved_tolerance=achieved_tol, notes=tuple(notes),
    )


def _range_total(sizing: Any, w, p, tol, fixed_n, ranges, bound, sides, confidence, minimum, names):
    """Rounded allocation with shares ``p``: for a fixed total, or the smallest total meeting the tolerance.

    The error bound is :func:`geosample.stats.sizing.stratified_error_bound` (declared
    ranges only); the total is found by doubling, then halving, then checked again.
    """
    if fixed_n:
        n_h, raised = sizing.largest_remainder(p, int(fixed_n), minimum=minimum, labels=names)
        return tuple(n_h), int(fixed_n), raised
    a = 1.0 - confidence

    def fit(total: int):
        n_h, raised = sizing.largest_remainder(p, total, minimum=minimum, labels=names)
        ok = sizing.stratified_error_bound(w, n_h, tol, range=tuple(ranges), bound=bound, sides=sides) <= a
        return ok, n_h, raised

    lo = minimum * len(w)
    hi = lo
    while not fit(hi)[0]:
        lo, hi = hi + 1, hi * 2
        if hi > 10**9:
            raise InfeasibleError(f"the tolerance {tol!r} needs more than 10^9 samples with the {bound} bound")
    while lo < hi:
        mid = (lo + hi) // 2
        if fit(mid)[0]:
            hi = mid
        else:
            lo = mid + 1
    total = hi
    ok, n_h, raised = fit(total)
    while not ok:  # rounding can make the bound non-monotone in the total: step up until it holds
        total += 1
        ok, n_h, raised = fit(total)
    return tuple(n_h), total, raised


# --------------------------------------------------------------------------- assess
@dataclass(frozen=True)
class _Stratum:
    name: str
    weight: float
    y: np.ndarray  # analysis scale, time order
    lower: float
    L: float | None
    n_planned: int | None
    censored_left: int
    censored_right: int


def _stratum_inputs(results: Any, manifest: dict) -> list[_Stratum]:
    settings = manifest.get("settings", {})
    statistic = settings.get("survey", {}).get("statistic", "mean")
    frame = manifest.get("frame", {}).get("strata", [])
    alloc = manifest.get("allocation", {}) or {}
    planned = dict(zip(alloc.get("strata", ()), alloc.get("n", ())))
    by_name = {s.name: s for s in results.strata}
    out = []
    for fs in frame:
        name = fs["name"]
        sr = by_name.get(name)
        y = to_analysis_scale(np.asarray(sr.values if sr else (), float), statistic)
        lower, L = declared_support(settings, name)
        cl = sum(1 for c in (sr.censored if sr else ()) if c == "left")
        cr = sum(1 for c in (sr.censored if sr else ()) if c == "right")
        out.append(_Stratum(name, float(fs["weight"]), y, lower, L, planned.get(name), cl, cr))
    return out


def _interval(bound: str, strata: list[_Stratum], confidence: float, sides: str, direction: str,
              path: bool = False) -> tuple[
        Interval, BettingSequence | None, list[BettingSequence]]:
    w = np.array([s.weight for s in strata])
    n_h = np.array([s.y.size for s in strata])
    means = np.array([s.y.mean() for s in strata])
    est = float(stratified_mean(w, means))
    H = len(strata)
    a = 1 - confidence
    notes: list[str] = []
    seqs: list[BettingSequence] = []
    if bound in ("chebyshev", "cantelli", "hoeffding"):
        L = np.array([s.L for s in strata], float)
        if bound == "chebyshev":
            d = chebyshev_half_width(w, n_h, L, confidence)
            if sides == "one":
                notes.append("Chebyshev used one-sided: valid, conservative (Cantelli is the one-sided form)")
        elif bound == "cantelli":
            d = cantelli_half_width(w, n_h, L, confidence)
        else:
            d = hoeffding_half_width(w, n_h, L, confidence, sides)
        df = None
    elif bound == "t":
        sds = np.array([s.y.std(ddof=1) for s in strata])
        d_arr, df_arr = t_half_width(w, n_h, sds, confidence, sides)
        d, df = float(d_arr), float(df_arr)
    elif bound == "bernstein":
        k = 1 if sides == "one" else 2
        parts = [bernstein_half_width(s.y.size, float(s.y.std(ddof=1)) if s.y.size > 1 else 0.0, s.L, a / (k * H))
                 for s in strata]
        d, df = float(np.dot(w, parts)), None
        if H > 1:
            notes.append(f"empirical Bernstein bound in each of the {H} strata at error {a / H:.4g} "
                         "(union bound), combined with the area weights")
    elif bound == "betting":
        lo = hi = 0.0
        for s in strata:
            x = (s.y - s.lower) / s.L
            if path:
                seq = betting_sequence(x, alpha=a / H, sides=sides, direction=direction)
                seqs.append(seq)
                l01, h01 = seq.low_final, seq.high_final
            else:
                l01, h01 = betting_bounds(x, alpha=a / H, sides=sides, direction=direction)
            lo += s.weight * (s.lower + s.L * l01)
            hi += s.weight * (s.lower + s.L * h01)
        if H > 1:
            notes.append(f"betting confidence sequence in each of the {H} strata at error {a / H:.4g} (union bound "
                         "over strata), end points combined with the area weights: valid, but wider than a "
                         "single-stratum sequence would be")
        if sides == "one":
            lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
        return Interval(est, lo, hi, confidence, "betting", sides, None, None, tuple(notes)), None, seqs
    else:
        raise SettingError("size.bound", bound, "chebyshev | cantelli | hoeffding | bernstein | t | betting")
    lo, hi = est - d, est + d
    if sides == "one":
        lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
    return Interval(est, lo, hi, confidence, bound, sides, float(d), df, tuple(notes)), None, seqs


def _established_after(strata: list[_Stratum], seqs: list[BettingSequence], order: list[tuple[int, int]],
                       criterion: float, direction: str, sides: str, confidence: float) -> int | None:
    """The first k (samples in the order taken) at which the running betting set excludes the criterion."""
    want_below = not (sides == "one" and direction == "above")
    want_above = not (sides == "one" and direction == "below")
    if len(strata) == 1:
        s = strata[0]
        m = (criterion - s.lower) / s.L
        if 0 < m < 1:  # exactly, at the criterion: rejected by K- means every mean >= criterion is rejected
            x = (s.y - s.lower) / s.L
            a = 1 - confidence
            lam = prpl_bets(x, a, sides)
            theta = _theta(sides, direction)
            hit = np.zeros(x.size, dtype=bool)
            if want_below and theta < 1:
                hit |= math.log(1 - theta) + _log_k(x, np.array([m]), lam, 0.5, -1)[:, 0] >= math.log(1 / a)
            if want_above and theta > 0:
                hit |= math.log(theta) + _log_k(x, np.array([m]), lam, 0.5, +1)[:, 0] >= math.log(1 / a)
            return int(np.argmax(hit)) + 1 if hit.any() else None
    # combined running interval after each sample (union bound over strata), on the sequences' grids
    H = len(strata)
    idx = np.array([h for h, _ in order], dtype=int)
    counts = np.cumsum(np.eye(H, dtype=int)[idx], axis=0)  # (n, H): samples of each stratum so far
    lo = np.zeros(len(idx))
    hi = np.zeros(len(idx))
    for h, (s, q) in enumerate(zip(strata, seqs)):
        lo += s.weight * (s.lower + s.L * q.low[counts[:, h]])
        hi += s.weight * (s.lower + s.L * q.high[counts[:, h]])
    hit = np.zeros(len(idx), dtype=bool)
    if want_below:
        hit |= hi < criterion
    if want_above:
        hit |= lo > criterion
    return int(np.argmax(hit)) + 1 if hit.any() else None


def _sequential(bound: str, iv: Interval, strata: list[_Stratum], seqs: list[BettingSequence],
                order: list[tuple[int, int]], criterion: float | None, decision: str | None,
                direction: str, sides: str) -> Sequential:
    n = sum(s.y.size for s in strata)
    if criterion is None:
        return Sequential(None, None, "no criterion: nothing to establish")
    established = None
    if bound == "betting" and seqs:
        established = _established_after(strata, seqs, order, criterion, direction, sides, iv.confidence)
    if decision in ("below", "above"):
        if established is None:
            established = n
        note = (f"established after {established} samples" + (
            " (the betting sequence is valid at every sample size, so this may be checked after every field day)"
            if bound == "betting" else
            f" (the {bound} interval holds at a sample size fixed in advance; checking after every field day and "
            "stopping when it clears the criterion is covered only by the betting bound)"))
        return Sequential(established, 0, note)
    est = iv.estimate
    if sides == "one" and direction == "below":
        width, dist = iv.high - est, criterion - est
    elif sides == "one":
        width, dist = est - iv.low, est - criterion
    else:
        width = (iv.high - est) if est < criterion else (est - iv.low)
        dist = abs(criterion - est)
    if not (dist > 0 and np.isfinite(width)):
        return Sequential(None, None, "not established, and the estimate lies on the criterion or on the wrong side "
                          "of it: more samples cannot be projected to establish the claim")
    need = n * (width / dist) ** 2
    more = max(1, int(math.ceil(need - n)))
    return Sequential(None, more, f"about {more} more samples needed (an estimate: it assumes the mean and spread stay "
                      "as observed so far, the interval narrows like 1/sqrt(n) and the new samples are spread over "
                      "the strata like these)")


def _clip(iv: Interval, lo: float, hi: float) -> Interval:
    """The interval cut to ``[lo, hi]`` on its finite sides (the same object when nothing changes)."""
    low = max(iv.low, lo) if np.isfinite(iv.low) else iv.low
    high = min(iv.high, hi) if np.isfinite(iv.high) else iv.high
    if low == iv.low and high == iv.high:
        return iv
    return replace(iv, low=low, high=high, half_width=None)


def _frame_label(manifest: dict) -> str:
    settings = manifest.get("settings", {})
    title = settings.get("survey", {}).get("title") or "the survey"
    area = (manifest.get("frame") or {}).get("area_m2")
    H = len((manifest.get("frame") or {}).get("strata") or [])
    size = f"{area / 1e6:.3g} km² " if area else ""
    return f"the {size}sampling frame of \u201c{title}\u201d ({H} strat{'um' if H == 1 else 'a'})"


def assess(results: Any, manifest: dict, *, adjust: str = "holm") -> Assessment:
    """The estimate, interval, decision, statement, per-stratum comparisons and next allocation.

    Parameters
    ----------
    results : geosample.results.Results
        What :func:`geosample.results.read_results` returned.
    manifest : dict
        The design folder's ``manifest.json``.
    adjust : {"holm", "bh", "bonferroni", "none"}
        Adjustment of the per-stratum p-values.

    Raises
    ------
    ResultsError
        A stratum has no usable result, or the t interval needs a second result in a stratum.
    """
    if adjust not in ADJUST_METHODS:
        raise SettingError("--adjust", adjust, " | ".join(ADJUST_METHODS))
    settings = manifest.get("settings", {})
    survey, size = settings.get("survey", {}), settings.get("size", {})
    statistic = survey.get("statistic", "mean")
    criterion = survey.get("criterion")
    direction = survey.get("direction", "below") or "below"
    confidence = float(size.get("confidence", 0.95))
    sides = size.get("sides", "two")
    planned = size.get("bound", "chebyshev")
    strata = _stratum_inputs(results, manifest)
    notes: list[str] = list(getattr(results, "notes", ()))
    empty = [s.name for s in strata if s.y.size == 0]
    if empty:
        raise ResultsError(
            f"stratum {', '.join(repr(e) for e in empty)} has no usable result, so the stratified mean over the "
            "frame cannot be estimated. Sample its primary sites (or its reserves, in reserve_rank order) and "
            "add the results.")
    if criterion is not None and statistic == "geomean" and criterion <= 0:
        raise SettingError("survey.criterion", criterion, "a number above 0 for a geometric mean (its log10 is taken)")
    a_crit = None if criterion is None else (math.log10(criterion) if statistic == "geomean" else float(criterion))
    # which bound can be used
    bound = planned
    range_void = False
    void_strata = set(getattr(results, "range_exceeded", ()))
    if planned in SUPPORT_BOUNDS:
        void_strata |= set(getattr(results, "outside_support", ()))
    if planned in RANGE_BOUNDS and (void_strata or any(s.L is None for s in strata)):
        range_void = True
        bound = "t"
        why = (f"results in {', '.join(sorted(void_strata))} lie outside the plan's declared range"
               if void_strata else "the plan declares no range for some strata")
        notes.append(f"The {planned} bound does not hold: {why}, and its guarantee rests on that range. "
                     "The interval is a Student t interval instead, whose confidence is approximate (see its "
                     "assumption). Fix the range in the plan for the next season.")
    if bound == "bernstein" and any(s.y.size < 2 for s in strata):
        bound = "chebyshev"
        notes.append("The empirical Bernstein bound needs at least 2 results per stratum to estimate the spread; "
                     "the Chebyshev bound (which needs only the declared range) is used instead.")
    if bound == "t":
        short = [s.name for s in strata if s.y.size < 2]
        if short:
            raise ResultsError(
                f"stratum {', '.join(repr(x) for x in short)} has only 1 usable result; the t interval"
                + (f" (used because the {planned} bound is void)" if range_void else "")
                + " needs at least 2 per stratum to estimate the spread. Sample a reserve there (in reserve_rank "
                "order), or declare a range that the results respect.")
    iv, _, seqs = _interval(bound, strata, confidence, sides, direction, path=a_crit is not None)
    # a mean of concentrations or counts is not negative: the interval's lower end is cut at the weighted lower
    # end of the range (0 unless size.lower says otherwise); the upper end is left alone, since the plan
    # declares the range's length, not where it ends (betting works inside the range by construction)
    clip = (bound in RANGE_BOUNDS and bound != "betting" and statistic == "mean"
            and not set(getattr(results, "outside_support", ())))
    if clip:
        floor = float(np.dot([s.weight for s in strata], [s.lower for s in strata]))
        clipped = _clip(iv, floor, math.inf)
        if clipped is not iv:
            notes.append(f"the interval's lower end is cut at {floor:g}: the mean cannot be lower (results are not "
                         "below the lower end of the declared range)")
        iv = clipped
    notes += list(iv.notes)
    decision = decide(iv.low, iv.high, a_crit, sides, direction)
    # per-stratum figures and comparisons
    per: list[StratumEstimate] = []
    pvals: list[float] = []
    for s in strata:
        sd = float(s.y.std(ddof=1)) if s.y.size > 1 else None
        one = _interval(bound if not (bound == "t" and s.y.size < 2) else "chebyshev", [
            _Stratum(s.name, 1.0, s.y, s.lower, s.L, s.n_planned, 0, 0)], confidence, sides, direction)[0]
        if clip:
            one = _clip(one, s.lower, math.inf)
        p = None
        if a_crit is not None:
            p = stratum_pvalue(bound, s.y, a_crit, L=s.L, lower=s.lower, confidence=confidence, sides=sides,
                               direction=direction)
            pvals.append(p)
        per.append(StratumEstimate(s.name, s.weight, int(s.y.size), s.n_planned, float(s.y.mean()), sd, one.low,
                                   one.high, s.censored_left, s.censored_right, p))
    if a_crit is not None:
        adj = adjust_pvalues(pvals, adjust)
        alpha = 1 - confidence
        new = []
        for s, pa in zip(per, adj):
            if pa <= alpha:
                d = direction if sides == "one" else ("below" if s.mean < a_crit else "above")
            else:
                d = "not established"
            new.append(replace(s, p_adjusted=float(pa), decision=d))
        per = new
    # sequence
    order = list(getattr(results, "order", ()) or [])
    name_index = {s.name: i for i, s in enumerate(strata)}
    order_idx = [(name_index[nm], k) for nm, k in order if nm in name_index] if order else [
        (h, k) for h, s in enumerate(strata) for k in range(s.y.size)]
    seq = _sequential(bound, iv, strata, seqs, order_idx, a_crit, decision, direction, sides)
    # back to the original scale and wording
    geo = statistic == "geomean"
    est = 10 ** iv.estimate if geo else iv.estimate
    low = (10 ** iv.low if geo else iv.low) if np.isfinite(iv.low) else None
    high = (10 ** iv.high if geo else iv.high) if np.isfinite(iv.high) else None
    units = survey.get("units", "")
    figure = format_estimate(est, low, high, half_width=iv.half_width, units=units, geomean=geo, sides=sides,
                             direction=direction)
    time = settings.get("time", {})
    season = (str(time.get("start", "")), str(time.get("end", "")))
    label = _frame_label(manifest)
    text = statement(statistic=statistic, parameter=survey.get("parameter", ""), frame_label=label, season=season,
                     figure=figure, confidence=confidence, bound=bound, sides=sides, direction=direction)
    dtext = decision_statement(decision, criterion=criterion, confidence=confidence, statistic=statistic,
                               sides=sides, units=units, direction=direction)
    cens = sum(s.censored_left for s in strata), sum(s.censored_right for s in strata)
    if cens[0]:
        notes.append(f"{cens[0]} result(s) below a detection limit enter at the limit, which can only raise the "
                     "estimate: a 'below' decision stays sound, an 'above' decision may be an artefact of the limit")
    if cens[1]:
        notes.append(f"{cens[1]} result(s) above the method's upper limit enter at the limit, which can only lower "
                     "the estimate: an 'above' decision stays sound, a 'below' decision may be an artefact of the limit")
    if geo:
        notes.append("the geometric mean is computed on log10 values; tolerance, range and sds are in log10 units")
    # next round
    realloc = None
    try:
        realloc = reallocate([s.name for s in strata], [s.weight for s in strata], [p.sd for p in per],
                             settings=settings, manifest=manifest, bound=bound)
    except ImportError:
        notes.append("reallocation unavailable: geosample.stats.sizing is not installed")
    alloc = manifest.get("allocation") or {}
    return Assessment(
        statistic=statistic, parameter=survey.get("parameter", ""), units=units, frame_label=label, season=season,
        estimate=float(est), low=None if low is None else float(low), high=None if high is None else float(high),
        interval=iv, confidence=confidence, bound=bound, planned_bound=planned, sides=sides, direction=direction,
        criterion=criterion, n=int(sum(s.y.size for s in strata)), n_planned=alloc.get("total"),
        decision=decision, statement=text, decision_text=dtext, assumption=BOUND_ASSUMPTIONS[bound],
        strata=tuple(per), adjust=adjust, sequential=seq, next_allocation=realloc,
        flags=tuple(getattr(results, "flags", ())), notes=tuple(notes), range_void=range_void,
    )
