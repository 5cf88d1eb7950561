"""The allocation suggested for the next round, from the observed sds and the costs."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from ..errors import InfeasibleError
from .intervals import declared_support

__all__ = ["Reallocation", "reallocate"]


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
    elif any(s == 0 for s in sd_list):
        # an sd of 0 from a few equal results (a clean bay where every sample reads "<10") is no reason to stop
        # sampling there: the stratum keeps the plan's sd, else the smallest sd observed elsewhere
        smallest = min(s for s in sd_list if s > 0)
        for i, (name, s) in enumerate(zip(names, sd_list)):
            if s == 0:
                plan_sd = (per.get(name) or {}).get("sd") or size.get("sd")
                sd_list[i] = float(plan_sd or smallest)
                notes.append(f"{name}: every result was the same (sd 0); its sd is taken from "
                             + ("the plan" if plan_sd else "the smallest sd observed in another stratum"))
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
