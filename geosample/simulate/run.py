"""One simulated season (a replicate) and batches of them, as ``geosample simulate`` runs them.

A replicate draws the sites (:func:`geosample.randomizer.space.draw_sites`), the field
days and planned times (:func:`geosample.randomizer.time.schedule_visits`) exactly as
:func:`geosample.design.make_design` does with the same allocation, allowed days and
field-day count (:func:`geosample.design.plan_stages`); makes each primary's result
from the population at its site, day and planned time; and assesses them with
:func:`geosample.stats.assessment.assess`, given the schedule rows and a manifest whose
``days`` entry is the replicate's own day draw, as ``geosample assess`` would be.

The day routes (``itinerary.build_itinerary``) are NOT rebuilt per replicate: routing
changes only the planned times within a day, which stay uniform over the day's window
(the itinerary's documented property), and the results here depend on a visit's time
only through the time-of-day term, whose distribution is then the same. So the sampled
time is the one ``schedule_visits`` draws. Profiling one demo replicate: routing took
most of a design's time (see docs/performance.md).

Replicate ``i`` of a run with root seed ``s`` uses ``numpy.random.SeedSequence(s).spawn(N)[i]``
(equal to ``SeedSequence(s, spawn_key=(i,))``) as its seed: the site and time streams are
keyed by name under it as in a design, and the population by the name
``"simulate/population"``. Results do not depend on batching or on the workers.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Sequence

import numpy as np

from .population import Population, SeasonTruth, draw_values, frame_grid, season_effects, structural, true_mean

__all__ = ["Setup", "make_setup", "replicate", "run_batch", "child_seed"]


@dataclass(frozen=True)
class Setup:
    """Everything a replicate needs, built once and shipped to the workers."""

    settings: dict
    template: Any  # a Design (frame without router): draw and schedule are replaced per replicate
    allocation: Any
    days: tuple
    field_days: int | None
    manifest: dict
    truth: SeasonTruth


def make_setup(plan: Any, layers: Any = None, *, progress: Any = None) -> Setup:
    """Build the frame once and everything the replicates share (the plan's own design is the template)."""
    from pathlib import Path

    from ..audit import manifest_data
    from ..design import load_layers, make_design, plan_stages

    if layers is None:
        layers = load_layers(plan)
    design = make_design(plan, layers=layers, progress=progress)
    stages = plan_stages(plan, design.frame, design.settings)
    manifest = manifest_data(design, Path("."))
    frame = replace(design.frame, router=None)  # the draw does not route; keeps what is shipped small
    template = replace(design, frame=frame)
    return Setup(design.settings, template, stages.allocation, stages.days, stages.field_days, manifest,
                 frame_grid(frame, design.settings))


def child_seed(seed: int, i: int) -> np.random.SeedSequence:
    """Replicate ``i``'s seed: ``SeedSequence(seed).spawn(N)[i]`` for any N > i."""
    return np.random.SeedSequence(int(seed), spawn_key=(int(i),))


def _fraction(visit: Any, day: Any) -> float:
    span = (day.window_end - day.window_start).total_seconds()
    return 0.0 if span <= 0 else float((visit.planned_time - day.window_start).total_seconds() / span)


def _fmt(v: float) -> str:
    return repr(float(v))


def replicate(setup: Setup, pop: Population, seed: np.random.SeedSequence) -> dict:
    """One simulated season: its true mean, and what ``assess`` says of its results (analysis scale)."""
    from ..audit import _jsonable
    from ..export.table import schedule_rows
    from ..randomizer.space import draw_sites
    from ..randomizer.time import schedule_visits
    from ..results import Record, results_from_records
    from ..rng import stream
    from ..stats.assessment import assess

    s = setup.settings
    d, t = s["draw"], s["time"]
    frame = setup.template.frame
    draw = draw_sites(frame, setup.allocation, method=d["method"], reserve=d["reserve"],
                      spacing_m=d.get("spacing_m"), seed=seed)
    schedule = schedule_visits(draw, setup.days, per_day=t["per_day"], seed=seed,
                               minutes_on_site=t["minutes_on_site"], field_days=setup.field_days)
    design = replace(setup.template, draw=draw, schedule=schedule)
    rows = schedule_rows(design)
    manifest = dict(setup.manifest, days=_jsonable(dict(schedule.day_draw, times=setup.manifest["days"].get("times"))))

    rng = stream(seed, "simulate/population")
    effects = season_effects(pop, len(schedule.days), rng)
    truth = true_mean(pop, setup.truth, effects)
    primaries = [v for v in schedule.visits if v.role == "primary" and v.visit_date is not None]
    grid = {g.name: g for g in setup.truth.strata}
    m = np.array([structural(pop, pop.offset(v.stratum), np.array(v.x), np.array(v.y), setup.truth.origin,
                             np.array(effects[v.day_index]), np.array(_fraction(v, schedule.days[v.day_index])))
                  for v in primaries], float)
    raw = draw_values(m, pop, rng)
    y = np.array([min(max(val, grid[v.stratum].lower), grid[v.stratum].upper) for val, v in zip(raw, primaries)])
    geo = s["survey"]["statistic"] == "geomean"
    reported = 10 ** y if geo else y
    by_site = {v.site_id: (v, val) for v, val in zip(primaries, reported)}
    records = []
    for i, row in enumerate(rows):
        if row["site_id"] not in by_site:
            continue
        v, val = by_site[row["site_id"]]
        cens = ""
        if pop.below is not None and val < pop.below:
            val, cens = pop.below, "left"
        elif pop.above is not None and val > pop.above:
            val, cens = pop.above, "right"
        raw_text = ("<" if cens == "left" else ">" if cens == "right" else "") + _fmt(val)
        records.append(Record(row=i + 2, site_id=v.site_id, stratum=v.stratum, role="primary",
                              reserve_rank=int(v.reserve_rank), raw=raw_text, value=float(val), censored=cens,
                              status="value", used=True, qualifier="", sampled_at=v.planned_time, attempted=True))
    results = results_from_records(records, manifest)
    a = assess(results, manifest, schedule_rows=rows)
    iv = a.interval
    covered = bool(iv.low <= truth <= iv.high)
    hw = iv.half_width  # None when assess cut the interval at the range's lower end: then half its length
    if hw is None and math.isfinite(iv.low) and math.isfinite(iv.high):
        hw = (iv.high - iv.low) / 2
    return {"true_mean": truth, "estimate": float(iv.estimate), "low": _finite(iv.low), "high": _finite(iv.high),
            "half_width": None if hw is None else float(hw), "covered": covered, "decision": a.decision or "none",
            "approximate": bool(a.range_void), "days": len({v.visit_date for v in primaries}),
            "n": len(primaries), "censored": sum(1 for r in records if r.censored)}


def _finite(v: float) -> float | None:
    return float(v) if math.isfinite(v) else None


def run_batch(setup: Setup, pop: Population, seed: int, indices: Sequence[int]) -> list[dict]:
    """Replicates ``indices`` (each on its own spawned seed), in order."""
    return [dict(replicate(setup, pop, child_seed(seed, i)), replicate=int(i)) for i in indices]
