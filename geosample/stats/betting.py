"""The betting bound: capital processes, bets, betting confidence sequences and intervals.

Hedged capital with predictable plug-in bets (Waudby-Smith & Ramdas 2024, JRSS-B
86(1):1-27), as a confidence sequence (running intersection), so the results may
be assessed after every field day. Data are rescaled to [0, 1] by the declared
range. Pure functions on numbers.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .intervals import Interval, _alpha

__all__ = [
    "CapitalPath",
    "BettingSequence",
    "capital_process",
    "prpl_bets",
    "betting_log_capital",
    "betting_bounds",
    "betting_sequence",
    "betting_interval",
    "betting_pvalue",
]

_GRID = 1001  # grid of candidate means on [0, 1] for the betting sequence path (final ends: bisection)
_CHUNK = 2_000_000  # most cells of an (n, grid) array held at once

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


def betting_bounds(x, *, alpha: float, sides: str = "two", direction: str = "below", c: float = 0.5,
                   x_low=None, x_high=None) -> tuple[float, float]:
    """End points (on [0, 1]) of the betting confidence sequence after all of ``x`` (running intersection).

    Exact up to bisection (52 halvings), no grid; see :func:`betting_sequence`.

    Censored values: ``x_low`` / ``x_high`` hold each value's lowest / highest possible
    value (equal to ``x`` where it is known exactly). The bets come from ``x`` (what was
    reported, so they stay predictable); the upward bettor K+ is evaluated on ``x_low``
    and K- on ``x_high``. Every factor of K+ grows with the value and every factor of K-
    falls, so these are lower bounds on the capital the true values would give: a mean
    rejected here is rejected by the true values, and the interval is valid.
    """
    x = np.asarray(x, float)
    if x.size == 0:
        return 0.0, 1.0
    xl = x if x_low is None else np.asarray(x_low, float)
    xh = x if x_high is None else np.asarray(x_high, float)
    theta = _theta(sides, direction)
    lam = prpl_bets(x, alpha, sides)
    thresh = math.log(1.0 / alpha)
    low = _side_end(xl, lam, c, +1, math.log(theta), thresh) if theta > 0 else 0.0
    high = _side_end(xh, lam, c, -1, math.log(1 - theta), thresh) if theta < 1 else 1.0
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
