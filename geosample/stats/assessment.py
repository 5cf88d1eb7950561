"""``assess``: the estimate, interval, decision, statement, per-stratum figures and next allocation.

Takes a :class:`geosample.results.Results` and a manifest dict and returns a frozen
:class:`Assessment`; nothing here reads or writes a file. The bound is the plan's
(``size.bound``); the formulas are in :mod:`geosample.stats.intervals` and
:mod:`geosample.stats.betting`, decisions and wording in
:mod:`geosample.stats.decisions`, the next round's allocation in
:mod:`geosample.stats.reallocation`. With several strata the betting bound runs
one sequence per stratum at a / H, combined with the weights.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Sequence

import numpy as np

from ..errors import ResultsError, SettingError
from .betting import BettingSequence, _log_k, _theta, betting_bounds, betting_sequence, prpl_bets
from .decisions import (
    ADJUST_METHODS,
    BOUND_ASSUMPTIONS,
    NO_DECISION,
    adjust_pvalues,
    decide,
    decision_statement,
    format_estimate,
    statement,
    stratum_pvalue,
)
from .intervals import (
    RANGE_BOUNDS,
    SUPPORT_BOUNDS,
    Interval,
    bernstein_half_width,
    cantelli_half_width,
    chebyshev_half_width,
    cluster_t_half_width,
    declared_support,
    hoeffding_half_width,
    stratified_mean,
    t_half_width,
    to_analysis_scale,
)
from .reallocation import Reallocation, reallocate

__all__ = ["StratumEstimate", "Sequential", "Assessment", "assess", "stratified_interval", "variance_components"]


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
class Assessment:
    """Everything ``geosample assess`` reports.

    Figures named ``estimate, low, high`` are on the original scale (for a
    geometric mean: back-transformed); ``interval`` holds the analysis scale
    (log10 for ``geomean``). ``decision`` is ``"below"``, ``"above"``,
    ``"not established"``, ``"no decision"`` (results outside the declared range void the
    bound's guarantee) or None (no criterion). ``approximate`` is True when no theorem
    backs the stated confidence (the t bound, or a void range).
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
    substitutions: tuple[Any, ...] = ()  # results.Results.substitutions: which reserve replaced which primary, why
    sd_between_days: float | None = None
    sd_within_day: float | None = None

    @property
    def approximate(self) -> bool:
        return self.range_void or self.bound == "t"

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
            "notes": list(self.notes), "range_void": self.range_void, "approximate": self.approximate,
            "substitutions": [s.as_dict() if hasattr(s, "as_dict") else dict(s) for s in self.substitutions],
            "variance_components": {"sd_between_days": self.sd_between_days, "sd_within_day": self.sd_within_day,
                                    "scale": "log10" if back else "original"},
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
    day: np.ndarray | None = None  # field day of each value: an index into the season's used days, in date order
    inv_p: np.ndarray | None = None  # 1 / the inclusion probability of each value's field day
    tstrat: np.ndarray | None = None  # temporal stratum (index into tweights) of each value's field day
    tweights: tuple[float, ...] = ()  # temporal strata's shares of the season's allowed days, K_s / K
    y_low: np.ndarray | None = None  # censored values: each value's lowest possible value (else y)
    y_high: np.ndarray | None = None  # and its highest (+inf above an undeclared range)


def _shares(s: _Stratum) -> np.ndarray:
    """Each value's share of its stratum mean: 1/n, or (1/p_j) / sum(1/p) with unequal day probabilities (Hajek)."""
    if s.inv_p is None or s.y.size == 0:
        return np.full(s.y.size, 1.0 / max(s.y.size, 1))
    return s.inv_p / s.inv_p.sum()


def _mean(s: _Stratum) -> float:
    return float(np.dot(_shares(s), s.y)) if s.y.size else math.nan


def _unequal(strata: Sequence[_Stratum]) -> bool:
    """Whether the field days carry unequal inclusion probabilities (temporal strata sampled at different rates)."""
    ps = [s.inv_p for s in strata if s.inv_p is not None and s.inv_p.size]
    if not ps:
        return False
    allp = np.concatenate(ps)
    return bool(np.ptp(allp) > 1e-9 * allp.max())


def _share_matrix(strata: Sequence[_Stratum]) -> np.ndarray | None:
    """Each field day's share of each stratum mean (rows: days with results; columns: strata)."""
    if any(s.day is None for s in strata):
        return None
    k = max((int(s.day.max()) for s in strata if s.day.size), default=-1) + 1
    A = np.zeros((k, len(strata)))
    for h, s in enumerate(strata):
        np.add.at(A[:, h], s.day.astype(int), _shares(s))
    used = np.zeros(k, bool)
    for s in strata:
        used[s.day.astype(int)] = True
    return A[used]


def _composition_bias(s: _Stratum) -> float:
    """Largest gap between the mean over this stratum's day units and the season mean it stands for.

    The day units are weighted equally, so their mean stands for sum_s (k_s / k) mu_s instead of
    sum_s (K_s / K) mu_s; with every mu_s inside the declared range the gap is at most
    (L / 2) sum_s |k_s / k - K_s / K| (both weight vectors add up to 1).
    """
    if s.tstrat is None or not s.tweights or s.y.size == 0 or s.L is None:
        return 0.0
    V = np.asarray(s.tweights, float)
    k_s = np.bincount(s.tstrat.astype(int), minlength=V.size)[: V.size]
    return float(s.L / 2.0 * np.abs(k_s / k_s.sum() - V).sum())


def _day_key(label: str) -> tuple:
    return (0, int(label), "") if label.isdigit() else (1, 0, label)


def _day_labels(results: Any, schedule_rows: Sequence[dict] | None
                ) -> dict[str, list[tuple[str, str, float | None]]] | None:
    """Per stratum, the field day of each used value, or None when nothing says which day a value is from.

    A primary takes its schedule row's ``day``; a reserve (no day in the schedule) the drawn
    field day whose ``visit_date`` is the date it was sampled, else a day of its own.
    Results objects may carry the labels themselves (``StratumResults.days``).
    """
    given = {s.name: getattr(s, "days", None) for s in results.strata}
    if given and all(v is not None for v in given.values()):
        out0 = {}
        for sr in results.strata:
            ps = getattr(sr, "day_p", None) or (None,) * len(sr.days)
            dates = getattr(sr, "day_dates", None) or ("",) * len(sr.days)
            out0[sr.name] = [(str(d), str(t), p) for d, t, p in zip(sr.days, dates, ps)]
        return out0
    if not schedule_rows:
        return None
    sched = {str(r.get("site_id") or "").strip(): r for r in schedule_rows}
    date_day: dict[str, str] = {}
    day_p: dict[str, float | None] = {}
    day_date: dict[str, str] = {}
    for r in schedule_rows:
        d, date = str(r.get("day") or "").strip(), str(r.get("visit_date") or "").strip()
        if d and date:
            date_day.setdefault(date, d)
            day_date.setdefault(d, date)
            try:
                day_p.setdefault(d, float(r.get("day_inclusion_p") or "nan"))
            except ValueError:
                day_p.setdefault(d, math.nan)
    recs = {r.row: r for r in getattr(results, "records", ())}
    out: dict[str, list[str]] = {}
    for sr in results.strata:
        labels = []
        for row in getattr(sr, "rows", ()):
            rec = recs.get(row)
            d = str((sched.get(rec.site_id) or {}).get("day") or "").strip() if rec is not None else ""
            if not d and rec is not None and rec.sampled_at is not None:
                d = date_day.get(rec.sampled_at.date().isoformat(), "")
            if d:
                p = day_p.get(d)
                labels.append((d, day_date.get(d, ""), None if p is None or not math.isfinite(p) else p))
            else:
                labels.append((f"unscheduled {rec.site_id if rec is not None else row}",
                               rec.sampled_at.date().isoformat() if rec is not None and rec.sampled_at else "", None))
        out[sr.name] = labels
    return out


def _counts(strata: Sequence[_Stratum]) -> np.ndarray | None:
    """Results per field day (rows, days with results only) and stratum (columns); None without day labels."""
    if any(s.day is None for s in strata):
        return None
    k = max((int(s.day.max()) for s in strata if s.day.size), default=-1) + 1
    c = np.zeros((k, len(strata)), int)
    for h, s in enumerate(strata):
        np.add.at(c[:, h], s.day.astype(int), 1)
    return c[c.sum(axis=1) > 0]


def _clustered(strata: Sequence[_Stratum]) -> bool:
    """Whether some field day carries more than one result (then days, not results, are the units)."""
    c = _counts(strata)
    return c is not None and bool((c.sum(axis=1) > 1).any())


def _unit_strata(strata: Sequence[_Stratum]) -> list[_Stratum]:
    """Each stratum's field-day means, in date order, as its units (for bernstein and betting)."""
    out = []
    for s in strata:
        if s.day is None or s.y.size == 0:
            out.append(s)
            continue
        u, first, inv = np.unique(s.day, return_index=True, return_inverse=True)
        means = np.bincount(inv, weights=s.y) / np.bincount(inv)
        cnt = np.bincount(inv)
        out.append(replace(s, y=means, day=u, inv_p=None if s.inv_p is None else s.inv_p[first],
                           tstrat=None if s.tstrat is None else s.tstrat[first],
                           y_low=None if s.y_low is None else np.bincount(inv, weights=s.y_low) / cnt,
                           y_high=None if s.y_high is None else np.bincount(inv, weights=s.y_high) / cnt))
    return out


def _stratum_inputs(results: Any, manifest: dict, schedule_rows: Sequence[dict] | None = None
                    ) -> tuple[list[_Stratum], bool]:
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
        st = _Stratum(name, float(fs["weight"]), y, lower, L, planned.get(name), cl, cr)
        if cl or cr:
            cens = np.array([{"left": -1, "right": 1}.get(c, 0) for c in sr.censored], dtype=int)
            upper = lower + L if L is not None else math.inf
            st = replace(st, y_low=np.where(cens < 0, np.minimum(lower, y), y),
                         y_high=np.where(cens > 0, np.maximum(upper, y), y))
        out.append(st)
    labels = _day_labels(results, schedule_rows)
    if labels is None:
        return out, False
    every = sorted({d for v in labels.values() for d, _, _ in v}, key=_day_key)
    index = {d: i for i, d in enumerate(every)}
    # temporal strata of the season (manifest "days"): each allowed date's stratum and the strata's shares K_s / K
    md = manifest.get("days") if isinstance(manifest.get("days"), dict) else {}
    tnames = [t.get("name") for t in (md.get("strata") or [])]
    allowed = np.array([float(t.get("allowed") or 0) for t in (md.get("strata") or [])])
    tweights = tuple(allowed / allowed.sum()) if allowed.size and allowed.sum() > 0 else ()
    date_t = {str(d.get("date")): d.get("temporal_stratum") for d in (md.get("days") or [])}
    tindex = {n: i for i, n in enumerate(tnames)}
    done = []
    for s in out:
        lab = labels.get(s.name, [])
        if len(lab) != s.y.size:
            done.append(s)
            continue
        day = np.array([index[d] for d, _, _ in lab], dtype=int)
        ps = [p for _, _, p in lab]
        inv_p = None if any(p is None or p <= 0 for p in ps) else 1.0 / np.array(ps, float)
        ts = [tindex.get(date_t.get(t)) for _, t, _ in lab]
        tstrat = None if (not tweights or any(t is None for t in ts)) else np.array(ts, dtype=int)
        done.append(replace(s, day=day, inv_p=inv_p, tstrat=tstrat, tweights=tweights if tstrat is not None else ()))
    return done, True


def _interval(bound: str, strata: list[_Stratum], confidence: float, sides: str, direction: str,
              path: bool = False) -> tuple[
        Interval, BettingSequence | None, list[BettingSequence]]:
    w = np.array([s.weight for s in strata])
    n_h = np.array([s.y.size for s in strata])
    means = np.array([_mean(s) for s in strata])
    est = float(stratified_mean(w, means))
    H = len(strata)
    a = 1 - confidence
    notes: list[str] = []
    seqs: list[BettingSequence] = []
    if bound in ("chebyshev", "cantelli", "hoeffding"):
        L = np.array([s.L for s in strata], float)
        counts = _share_matrix(strata)  # each day's share of each stratum mean (c_hi / n_h with equal days)
        if bound == "chebyshev":
            d = chebyshev_half_width(w, n_h, L, confidence, counts=counts)
            if sides == "one":
                notes.append("Chebyshev used one-sided: valid, conservative (Cantelli is the one-sided form)")
        elif bound == "cantelli":
            d = cantelli_half_width(w, n_h, L, confidence, counts=counts)
        else:
            d = hoeffding_half_width(w, n_h, L, confidence, sides, counts=counts)
        df = None
    elif bound == "t" and (_clustered(strata) or _unequal(strata)):
        d, df = cluster_t_half_width(w, [s.y for s in strata], [s.day for s in strata], confidence, sides,
                                     shares=[_shares(s) for s in strata])
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
        b = 0.0
        if _unequal(strata):
            est = float(stratified_mean(w, [float(s.y.mean()) for s in strata]))
            b = sum(s.weight * _composition_bias(s) for s in strata)
            d += b
            notes.append(f"the field days were drawn with unequal probabilities (temporal strata); the day means are "
                         f"weighted equally, so the interval is widened by {b:.3g} on each side, the most the "
                         "temporal strata's shares among the drawn days can move their mean")
        short = [s for s in strata if s.y.size < 2]
        if short:
            # no switch to another bound: a stratum whose spread cannot be estimated contributes its whole
            # declared range (the mean lies there with certainty when the results respect the range)
            lo = sum(s.weight * ((s.lower if s.y.size < 2 else float(s.y.mean()) - p)) for s, p in zip(strata, parts))
            hi = sum(s.weight * ((s.lower + s.L if s.y.size < 2 else float(s.y.mean()) + p))
                     for s, p in zip(strata, parts))
            lo, hi = lo - b, hi + b
            notes.append("the empirical Bernstein bound needs at least 2 results in a stratum to estimate its spread: "
                         f"{', '.join(s.name for s in short)} contribute{'s' if len(short) == 1 else ''} "
                         "the whole declared range")
            if sides == "one":
                lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
            return Interval(est, lo, hi, confidence, bound, sides, None, None, tuple(notes)), None, seqs
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
        if _unequal(strata):
            b = sum(s.weight * _composition_bias(s) for s in strata)
            lo, hi = lo - b, hi + b
            est = float(stratified_mean(w, [float(s.y.mean()) for s in strata]))
            notes.append(f"the field days were drawn with unequal probabilities (temporal strata); the day means are "
                         f"weighted equally, so the interval is widened by {b:.3g} on each side, the most the "
                         "temporal strata's shares among the drawn days can move their mean (half the range times "
                         "the total share gap)")
        if sides == "one":
            lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
        return Interval(est, lo, hi, confidence, "betting", sides, None, None, tuple(notes)), None, seqs
    else:
        raise SettingError("size.bound", bound, "chebyshev | cantelli | hoeffding | bernstein | t | betting")
    lo, hi = est - d, est + d
    if sides == "one":
        lo, hi = (-math.inf, hi) if direction == "below" else (lo, math.inf)
    return Interval(est, lo, hi, confidence, bound, sides, float(d), df, tuple(notes)), None, seqs


def stratified_interval(bound: str, values: Sequence[Sequence[float]], weights: Sequence[float],
                        lowers: Sequence[float], ranges: Sequence[float], confidence: float, *, sides: str = "two",
                        direction: str = "below", days: Sequence[Sequence[int]] | None = None,
                        day_p: Sequence[Sequence[float]] | None = None,
                        temporal: Sequence[Sequence[int]] | None = None,
                        temporal_weights: Sequence[float] = ()) -> Interval:
    """The plan's interval for a stratified mean from numbers alone (no files, no wording).

    ``values[h]``: stratum h's results on the analysis scale; ``days[h]``: the field
    day (an integer, comparable across strata, in date order) of each. With days,
    the field days are the independent units, as in :func:`assess`: Chebyshev,
    Cantelli and Hoeffding on the days' contributions, t on the day-level variance,
    empirical Bernstein and betting on each stratum's day means. ``day_p[h]``: the
    inclusion probability of each value's field day (Hajek weights 1/p when they
    differ); ``temporal[h]``: its temporal stratum, an index into ``temporal_weights``
    (K_s / K), used to bound how far equally weighted day means can be off.
    """
    strata = [_Stratum(f"s{h}", float(w), np.asarray(v, float), float(lo), float(L), None, 0, 0,
                       None if days is None else np.asarray(days[h], int),
                       None if day_p is None else 1.0 / np.asarray(day_p[h], float),
                       None if temporal is None else np.asarray(temporal[h], int),
                       tuple(temporal_weights) if temporal is not None else ())
              for h, (v, w, lo, L) in enumerate(zip(values, weights, lowers, ranges))]
    if bound in ("bernstein", "betting") and _clustered(strata):
        strata = _unit_strata(strata)
    return _interval(bound, strata, confidence, sides, direction)[0]


def variance_components(strata: Sequence[_Stratum]) -> tuple[float | None, float | None]:
    """Observed between-day and within-day sds (analysis scale) from results with their field days.

    Within day: the pooled sd of results around their day's mean in the same stratum,
    ``S_w^2 = sum (y - ybar_hi)^2 / sum (m_hi - 1)``. Between days: from the day means of
    the results' deviations from their stratum means, ``s_1^2`` (n - 1 denominator),
    ``S_b^2 = max(0, s_1^2 - S_w^2 / mbar)`` with ``mbar`` results per day (Cochran 1977,
    ch. 10: the variance of day means holds ``S_w^2 / m`` of within-day variation).
    None where the results cannot show it (no day with two results of a stratum; one day).
    """
    if not strata or any(s.day is None for s in strata):
        return None, None
    ss_w, df_w = 0.0, 0
    dev, day = [], []
    for s in strata:
        if s.y.size == 0:
            continue
        for d in np.unique(s.day):
            yi = s.y[s.day == d]
            ss_w += float(np.sum((yi - yi.mean()) ** 2))
            df_w += yi.size - 1
        dev.append(s.y - s.y.mean())
        day.append(s.day)
    s_w = math.sqrt(ss_w / df_w) if df_w > 0 else None
    if not dev:
        return None, s_w
    dev_a, day_a = np.concatenate(dev), np.concatenate(day)
    labels, inv = np.unique(day_a, return_inverse=True)
    if labels.size < 2:
        return None, s_w
    means = np.bincount(inv, weights=dev_a) / np.bincount(inv)
    s1 = float(np.var(means, ddof=1))
    mbar = dev_a.size / labels.size
    s_b = math.sqrt(max(0.0, s1 - (s_w**2 / mbar if s_w is not None else 0.0)))
    return s_b, s_w


def _ends(strata: Sequence[_Stratum], side: str) -> list[_Stratum]:
    """The strata with every censored value at its lowest (side = "low") or highest possible value."""
    out = []
    for s in strata:
        e = s.y_low if side == "low" else s.y_high
        out.append(s if e is None else replace(s, y=e, y_low=None, y_high=None))
    return out


def _spread_max(s: _Stratum) -> float:
    """An upper bound on the sample sd over every value the censored results may take.

    sum (y - ybar)^2 = min_c sum (y - c)^2 <= sum_j max((lo_j - c)^2, (hi_j - c)^2) for any c
    (here the mean of the midpoints), so the bound holds for the true values.
    """
    if s.y.size < 2:
        return 0.0
    lo = s.y if s.y_low is None else s.y_low
    hi = s.y if s.y_high is None else s.y_high
    if not np.all(np.isfinite(hi)):
        return math.inf
    c = float(np.mean((lo + hi) / 2))
    return math.sqrt(float(np.sum(np.maximum((lo - c) ** 2, (hi - c) ** 2))) / (s.y.size - 1))


def _censored_interval(bound: str, strata: list[_Stratum], confidence: float, sides: str, direction: str
                       ) -> Interval:
    """The plan's bound with censored results entered as intervals, each end least favourable to the claim.

    Chebyshev, Cantelli, Hoeffding: the low end from every value at its lowest, the high end
    from every value at its highest (the end points move with each value). Empirical
    Bernstein and t: the same means with the half-width at an upper bound on the sd over
    every possible value (:func:`_spread_max`; for t an approximation). Betting: K+ on the
    lowest values, K- on the highest (:func:`betting.betting_bounds`). Never narrower than
    the bound on all values at their least favourable end.
    """
    low_s, high_s = _ends(strata, "low"), _ends(strata, "high")
    a_lo = _interval(bound, low_s, confidence, sides, direction)[0]
    a_hi = _interval(bound, high_s, confidence, sides, direction)[0]
    low, high = a_lo.low, a_hi.high
    w = np.array([s.weight for s in strata])
    a = 1 - confidence
    H = len(strata)
    if bound == "bernstein":
        k = 1 if sides == "one" else 2
        d = sum(s.weight * bernstein_half_width(s.y.size, _spread_max(s), s.L, a / (k * H)) for s in strata)
        low = min(low, float(stratified_mean(w, [_mean(s) for s in low_s])) - d)
        high = max(high, float(stratified_mean(w, [_mean(s) for s in high_s])) + d)
    elif bound == "t":
        sds = [_spread_max(s) for s in strata]
        worst = [replace(s, y=(s.y - s.y.mean()) * (sd / s.y.std(ddof=1)) + s.y.mean())
                 if s.y.size > 1 and s.y.std(ddof=1) > 0 and math.isfinite(sd) else s for s, sd in zip(strata, sds)]
        d = _interval("t", worst, confidence, sides, direction)[0]
        if d.half_width is not None:
            low = min(low, float(stratified_mean(w, [_mean(s) for s in low_s])) - d.half_width)
            high = max(high, float(stratified_mean(w, [_mean(s) for s in high_s])) + d.half_width)
        if any(not math.isfinite(sd) for sd in sds):
            high = math.inf
    elif bound == "betting":
        lo = hi = 0.0
        for s in strata:
            x = (s.y - s.lower) / s.L
            xl = (s.y if s.y_low is None else s.y_low) - s.lower
            xh = (s.y if s.y_high is None else s.y_high) - s.lower
            l01, h01 = betting_bounds(x, alpha=a / H, sides=sides, direction=direction, x_low=xl / s.L,
                                      x_high=xh / s.L)
            lo += s.weight * (s.lower + s.L * l01)
            hi += s.weight * (s.lower + s.L * h01)
        if _unequal(strata):
            b = sum(s.weight * _composition_bias(s) for s in strata)
            lo, hi = lo - b, hi + b
        low, high = min(low, lo), max(high, hi)
    if sides == "one":
        low, high = (-math.inf, high) if direction == "below" else (low, math.inf)
    est = float(stratified_mean(w, [_mean(s) for s in strata]))
    return Interval(est, min(low, est), max(high, est), confidence, bound, sides, None, None, ())


def _void_interval(bound: str, strata: list[_Stratum], confidence: float, sides: str, direction: str
                   ) -> tuple[Interval, None, list]:
    """The interval shown when results lie outside the declared range: approximate, no basis for a decision.

    The hull of the plan's bound on the results brought into the declared range
    (what the plan would have given) and the plan's bound with the range stretched
    to cover the results, so it is never narrower than the planned interval.
    """
    inside = [replace(s, y=np.clip(s.y, s.lower, s.lower + s.L)) for s in strata]
    stretched = []
    for s in strata:
        lo = min(s.lower, float(s.y.min()))
        hi = max(s.lower + s.L, float(s.y.max()))
        stretched.append(replace(s, lower=lo, L=hi - lo))
    a = _interval(bound, inside, confidence, sides, direction)[0]
    b = _interval(bound, stretched, confidence, sides, direction)[0]
    est = float(stratified_mean([s.weight for s in strata], [_mean(s) for s in strata]))
    low, high = min(a.low, b.low, est), max(a.high, b.high, est)
    if sides == "one":
        low, high = (-math.inf, high) if direction == "below" else (low, math.inf)
    return Interval(est, low, high, confidence, bound, sides, None, None, ()), None, []


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
                direction: str, sides: str, unit: str = "samples") -> Sequential:
    n = sum(s.y.size for s in strata)
    if criterion is None:
        return Sequential(None, None, "no criterion: nothing to establish")
    established = None
    if bound == "betting" and seqs:
        established = _established_after(strata, seqs, order, criterion, direction, sides, iv.confidence)
    if decision in ("below", "above"):
        if established is None:
            established = n
        note = (f"established after {established} {unit}" + (
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


def assess(results: Any, manifest: dict, *, adjust: str = "holm", schedule_rows: Sequence[dict] | None = None
           ) -> Assessment:
    """The estimate, interval, decision, statement, per-stratum comparisons and next allocation.

    Parameters
    ----------
    results : geosample.results.Results
        What :func:`geosample.results.read_results` returned.
    manifest : dict
        The design folder's ``manifest.json``.
    adjust : {"holm", "bh", "bonferroni", "none"}
        Adjustment of the per-stratum p-values.
    schedule_rows : list of dict, optional
        The design's ``schedule.csv`` rows: their ``day`` column says which field day
        each result is from. Field days are the independent units of every bound.

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
    strata, have_days = _stratum_inputs(results, manifest, schedule_rows)
    notes: list[str] = list(getattr(results, "notes", ()))
    if not have_days:
        notes.append("no field-day information (the schedule's day column): each result is taken as a field day "
                     "of its own; if several samples were taken on one day, the stated confidence may not hold")
    empty = [s.name for s in strata if s.y.size == 0]
    if empty:
        raise ResultsError(
            f"stratum {', '.join(repr(e) for e in empty)} has no usable result, so the stratified mean over the "
            "frame cannot be estimated. Sample its primary sites (or its reserves, in reserve_rank order) and "
            "add the results.")
    if criterion is not None and statistic == "geomean" and criterion <= 0:
        raise SettingError("survey.criterion", criterion, "a number above 0 for a geometric mean (its log10 is taken)")
    a_crit = None if criterion is None else (math.log10(criterion) if statistic == "geomean" else float(criterion))
    # the bound named in the plan is the bound used; results outside the declared range void its guarantee
    bound = planned
    void_strata = set(getattr(results, "range_exceeded", ()))
    if planned in SUPPORT_BOUNDS:
        void_strata |= set(getattr(results, "outside_support", ()))
    no_range = [s.name for s in strata if s.L is None]
    range_void = planned in RANGE_BOUNDS and bool(void_strata or no_range)
    void_reason = ""
    if range_void:
        void_reason = (f"results in {', '.join(sorted(void_strata))} lie outside the plan's declared range"
                       if void_strata else f"the plan declares no range for {', '.join(no_range)}")
        notes.append(f"The {planned} bound's guarantee does not hold: {void_reason}, and its guarantee rests on that "
                     "range. No decision is made. The interval shown is approximate and no basis for a decision"
                     + ("" if no_range else ": it is the wider of the bound with the range stretched to the observed "
                        "results and the bound on the results brought into the declared range")
                     + ". Fix the range in the plan (from the method's reporting limits) for the next season.")
    if no_range and planned in RANGE_BOUNDS:
        bound = "t"  # the plan's bound cannot be computed at all without a range: an approximate figure only
    if bound == "t":
        short = [s.name for s in strata if s.y.size < 2]
        if short:
            raise ResultsError(
                f"stratum {', '.join(repr(x) for x in short)} has only 1 usable result; the t interval"
                + (" (shown because the plan declares no range)" if range_void else "")
                + " needs at least 2 per stratum to estimate the spread. Sample a reserve there (in reserve_rank "
                "order), or declare a range that the results respect.")

    clustered = _clustered(strata)
    raw = strata
    if clustered:
        k_days = int(_counts(strata).shape[0])
        if bound == "t" and k_days < 2:
            raise ResultsError("every result is from one field day; the t interval needs results from at least 2 "
                               "days to estimate how much days differ. Sample on further drawn days.")
        notes.append(f"the {k_days} field days are the independent units of the {planned} bound "
                     f"({sum(s.y.size for s in strata)} results): samples of one day share its weather and time of "
                     "day, so the guarantee counts days, not samples"
                     + ("; each stratum's day means are its units" if bound in ("bernstein", "betting") else ""))
        if bound in ("bernstein", "betting"):
            strata = _unit_strata(strata)

    def shown(group: list[_Stratum], path: bool = False):
        if range_void and bound != "t":
            return _void_interval(bound, group, confidence, sides, direction)
        return _interval(bound, group, confidence, sides, direction, path=path)

    iv, _, seqs = shown(strata, path=a_crit is not None)
    censored = any(s.y_low is not None for s in strata) and not (range_void and bound != "t")
    if censored:
        at_limits = iv
        iv = _censored_interval(bound, strata, confidence, sides, direction)
        seqs = []
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
    if censored:
        if clip:
            at_limits = _clip(at_limits, floor, math.inf)
        n_l, n_r = sum(s.censored_left for s in raw), sum(s.censored_right for s in raw)

        def width(x: Interval) -> float:
            if sides == "two":
                return x.high - x.low
            return (x.high - x.estimate) if direction == "below" else (x.estimate - x.low)

        cost = width(iv) - width(at_limits)
        what = ", ".join(t for t in (f"{n_l} below a detection limit" if n_l else "",
                                     f"{n_r} above an upper reporting limit" if n_r else "") if t)
        censor_text = (f"{n_l + n_r} censored result(s) ({what}) enter each bound as an interval of the values they "
                       "may have, the end least favourable to the claim taken (Helsel 2006): the "
                       + ("interval" if sides == "two" else "bound") + f" is {cost:.3g} "
                       + ("units " if statistic == "mean" else "log10 units ")
                       + ("wider" if sides == "two" else "further from the estimate")
                       + " than with the results entered at their limits.")
        notes.append(censor_text)
    notes += list(iv.notes)
    decision = decide(iv.low, iv.high, a_crit, sides, direction)
    if range_void and decision is not None:
        decision = NO_DECISION
    # per-stratum figures and comparisons
    per: list[StratumEstimate] = []
    pvals: list[float] = []
    for s, r in zip(strata, raw):
        sd = float(r.y.std(ddof=1)) if r.y.size > 1 else None
        one = shown([replace(s, weight=1.0, censored_left=0, censored_right=0)])[0]
        if censored and s.y_low is not None:
            one = _censored_interval(bound, [replace(s, weight=1.0)], confidence, sides, direction)
        if clip:
            one = _clip(one, s.lower, math.inf)
        p = None
        if a_crit is not None and not (range_void and (s.name in void_strata or no_range)):
            c1 = _share_matrix([s])

            def pv(values: np.ndarray) -> float:
                return stratum_pvalue(bound, values, a_crit, L=s.L, lower=s.lower, confidence=confidence, sides=sides,
                                      direction=direction, counts=None if c1 is None else c1[:, 0],
                                      days=s.day if (_clustered([s]) or _unequal([s])) else None,
                                      shares=_shares(s) if (_unequal([s]) and bound not in ("bernstein", "betting"))
                                      else None)
            if censored and s.y_low is not None:
                # censored results: the largest p-value over the values they may take (1 when the criterion lies
                # between the stratum's lowest and highest possible means; approximate for t, bernstein, betting)
                lo_m, hi_m = _mean(replace(s, y=s.y_low)), _mean(replace(s, y=s.y_high))
                p = 1.0 if lo_m <= a_crit <= hi_m else max(pv(s.y_low), pv(np.minimum(s.y_high, s.lower + (s.L or 0))
                                                                         if s.L else s.y_high))
            else:
                p = pv(s.y)
            pvals.append(p)
        per.append(StratumEstimate(s.name, s.weight, int(r.y.size), s.n_planned, _mean(s), sd, one.low,
                                   one.high, s.censored_left, s.censored_right, p))
    if a_crit is not None:
        adj = iter(adjust_pvalues(pvals, adjust))
        alpha = 1 - confidence
        new = []
        for s in per:
            if s.p_value is None:
                new.append(replace(s, decision=NO_DECISION))
                continue
            pa = next(adj)
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
    if strata is not raw:  # day means as units: taken in date order
        order_idx = [(h, j) for _, h, j in sorted((int(dy), h, j) for h, s in enumerate(strata)
                                                 for j, dy in enumerate(s.day))]
    if range_void and a_crit is not None:
        seq = Sequential(None, None, f"no decision: {void_reason}, which voids the {planned} bound's guarantee")
    else:
        seq = _sequential(bound, iv, strata, seqs, order_idx, a_crit, decision, direction, sides,
                          unit="field days" if strata is not raw else "samples")
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
                     figure=figure, confidence=confidence, bound=bound, sides=sides, direction=direction,
                     void=void_reason)
    if censored:
        text += " " + censor_text[0].upper() + censor_text[1:]
    dtext = decision_statement(decision, criterion=criterion, confidence=confidence, statistic=statistic,
                               sides=sides, units=units, direction=direction, void=void_reason)
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
    components = variance_components(raw)
    return Assessment(
        statistic=statistic, parameter=survey.get("parameter", ""), units=units, frame_label=label, season=season,
        estimate=float(est), low=None if low is None else float(low), high=None if high is None else float(high),
        interval=iv, confidence=confidence, bound=bound, planned_bound=planned, sides=sides, direction=direction,
        criterion=criterion, n=int(sum(s.y.size for s in raw)), n_planned=alloc.get("total"),
        decision=decision, statement=text, decision_text=dtext, assumption=BOUND_ASSUMPTIONS[bound],
        strata=tuple(per), adjust=adjust, sequential=seq, next_allocation=realloc,
        flags=tuple(getattr(results, "flags", ())), notes=tuple(notes), range_void=range_void,
        substitutions=tuple(getattr(results, "substitutions", ())),
        sd_between_days=components[0], sd_within_day=components[1],
    )
