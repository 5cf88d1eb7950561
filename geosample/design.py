"""The whole design from a plan: frame -> sizing -> sites -> days and times -> routes.

:func:`make_design` is the pure heart of ``geosample plan`` and ``geosample
verify``: given the same plan, the same layers and the same seed it returns the
same :class:`~geosample.model.Design`, to the last digit. It reads the layers
through :func:`geosample.plan.load_layers` and writes nothing.
"""
from __future__ import annotations

import logging
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from .errors import GeosampleError, SettingError
from .model import Design, Frame
from .plan import GENERATED_STRATA, Plan
from .rng import fresh_seed, seed_from_text

__all__ = ["make_design", "resolve_seed", "build_frame_from_plan", "allocation_from_plan", "Layers", "load_layers", "plan_stages", "Stages"]

log = logging.getLogger(__name__)

Progress = Callable[[str], None]

_ABSENT = object()


@dataclass(frozen=True)
class Layers:
    """The plan's input layers, as read from disk (GeoDataFrames)."""

    water: Any
    exclude: tuple[tuple[str, Any], ...]
    access: Any
    strata: Any  # GeoDataFrame, a generated-strata keyword, or None


def load_layers(plan: Plan, paths: dict[str, Path] | None = None) -> Layers:
    """Read every layer the plan names (the file edge of the design).

    ``paths`` maps input labels (``water``, ``exclude[0]``, ``access``, ``strata``)
    to the files to read; by default the plan's own paths. ``verify`` passes the
    locations the manifest recorded.
    """
    from .layers import read_layer

    area = plan.settings["area"]
    crs = area.get("crs")
    where = dict(plan.input_paths())
    where.update(paths or {})
    water = read_layer(where["water"], layer=area.get("water_layer"), what="area.water", kind="polygon", crs=crs)
    exclude = tuple(
        (Path(p).name, read_layer(where[f"exclude[{i}]"], what=f"area.exclude[{i}]", kind="polygon", crs=crs))
        for i, p in enumerate(area["exclude"])
    )
    access = None
    if area.get("access"):
        access = read_layer(where["access"], what="area.access", kind="point", crs=crs)
    strata: Any = area.get("strata")
    if strata and strata not in GENERATED_STRATA:
        strata = read_layer(where["strata"], layer=area.get("strata_layer"), what="area.strata",
                            kind="polygon", crs=crs)
    return Layers(water, exclude, access, strata)


def resolve_seed(settings: dict) -> tuple[int, str]:
    """The root seed and where it came from: the plan's seed, its seed_text, or the OS."""
    draw = settings["draw"]
    if draw.get("seed") is not None:
        return int(draw["seed"]), "plan"
    if draw.get("seed_text"):
        return seed_from_text(draw["seed_text"]), "text"
    return fresh_seed(), "os"


def build_frame_from_plan(plan: Plan, layers: Layers, *, progress: Progress | None = None) -> Frame:
    from .geometry import build_frame

    area = plan.settings["area"]
    return build_frame(
        layers.water,
        exclude=layers.exclude,
        access=layers.access,
        reach_m=area.get("reach_m"),
        shore_m=tuple(area["shore_m"]) if area.get("shore_m") else None,
        strata=layers.strata,
        strata_field=area.get("strata_field"),
        bands_m=area.get("bands_m"),
        zones=area.get("zones"),
        remainder=area.get("remainder"),
        access_snap_m=area.get("access_snap_m", 200.0),
        name_field=area.get("name_field"),
        progress=progress,
    )


def _per_stratum(size: dict, names: list[str], key: str) -> list[float | None] | None:
    """Per-stratum values from [size.strata.NAME], falling back to the plan-wide value."""
    tables = size.get("strata") or {}
    unknown = sorted(set(tables) - set(names))
    if unknown:
        raise SettingError(f"size.strata.{unknown[0]}", unknown[0], "the name of a stratum of the frame: "
                           + ", ".join(repr(n) for n in names),
                           fix="rename the [size.strata.NAME] table to match the strata layer")
    default = size.get(key)
    values = [tables.get(n, {}).get(key, default) for n in names]
    if all(v is None for v in values):
        return None
    if key == "cost":
        return [1.0 if v is None else float(v) for v in values]
    # sd or range missing for some strata: the sizing engine uses what is known per stratum
    # (an sd, else range/2) and says what it needs when something is missing.
    return [None if v is None else float(v) for v in values]


def _check_water_body_minimum(size: dict, k: int) -> None:
    """With one stratum per water body, refuse a minimum per stratum that alone would set the total.

    The bound is the frame-wide sample size for the plan's tolerance (one stratum);
    with a fixed total ``n`` it is ``n``. ``k * min_per_stratum`` above it would
    multiply the effort just to put samples in every lake.
    """
    from .errors import InfeasibleError
    from .stats.sizing import sample_size

    need = k * size["min_per_stratum"]
    if size.get("n") is not None:
        total, what = int(size["n"]), f"the fixed total size.n = {size['n']}"
    elif size.get("tolerance") is not None and any(isinstance(size.get(key), (int, float)) and not
                                                   isinstance(size.get(key), bool) for key in ("range", "sd")):
        total = sample_size(size["tolerance"], range=size.get("range"), sd=size.get("sd"),
                            confidence=size["confidence"], bound=size["bound"], sides=size["sides"]).n
        what = f"the {total} samples the {size['bound']} bound needs for the whole frame as one stratum"
    else:
        return
    if need > total:
        raise InfeasibleError(
            f'area.strata = "water-bodies" makes {k} strata, and size.min_per_stratum = {size["min_per_stratum"]} '
            f"in each needs {need} primary samples, more than {what}. Remove strata = \"water-bodies\" (the draw "
            "over the whole region already gives each water body a share in proportion to its area), group the "
            f"water bodies with a strata layer, or set size.n to at least {need}.")


def allocation_from_plan(plan: Plan, frame: Frame, *, n: int | None = None):
    """Size and allocate the primary samples over the frame's strata (``n``: a total that overrides the plan's)."""
    from .stats.sizing import allocate

    size = plan.settings["size"]
    names = [s.name for s in frame.strata]
    if plan.settings["area"].get("strata") == "water-bodies":
        _check_water_body_minimum(size, len(names))
    sd = _per_stratum(size, names, "sd")
    if sd is None and size.get("sd_between_days") is not None:
        # the sd of one visit from the stated components (for the split over strata; the days are sized apart)
        sd = [(size["sd_between_days"] ** 2 + size["sd_within_day"] ** 2) ** 0.5] * len(names)
    return allocate(
        [s.weight for s in frame.strata],
        strata=names,
        n=n if n is not None else size.get("n"),
        tolerance=size.get("tolerance"),
        method=size["allocation"],
        sd=sd,
        range=_per_stratum(size, names, "range"),
        cost=_per_stratum(size, names, "cost"),
        min_per_stratum=size["min_per_stratum"],
        bound=size["bound"],
        confidence=size["confidence"],
        sides=size["sides"],
    )


#: Plan keys named in messages when the plan sizes field days (stats.twostage.plan_days).
DAY_NAMES = {"tolerance": "size.tolerance", "range": "size.range", "lower": "size.lower", "sd": "size.sd",
             "sd_between": "size.sd_between_days", "sd_within": "size.sd_within_day", "per_day": "time.per_day",
             "days": "time.field_days", "cost_day": "size.cost_day", "cost_visit": "size.cost_visit",
             "confidence": "size.confidence", "bound": "size.bound", "sides": "size.sides",
             "max_per_day": "time.per_day", "max_days": "time.field_days", "n": "time.field_days"}


def _largest(size: dict, key: str) -> float | None:
    """The plan's ``size.KEY``, else the largest per-stratum value (a day mixes strata: the widest one bounds it)."""
    if size.get(key) is not None:
        return float(size[key])
    vals = [t.get(key) for t in (size.get("strata") or {}).values() if isinstance(t, dict) and t.get(key)]
    return float(max(vals)) if vals else None


def days_plan_from_plan(plan: Plan, *, days: int | None = None, per_day: int | None = None, tolerance=_ABSENT,
                        strata: int = 1):
    """The plan's sizing in field days and visits per day (:func:`geosample.stats.twostage.plan_days`).

    The range of a day's contribution is ``size.range`` (or the widest stratum range);
    the stated spread is ``size.sd_between_days`` and ``size.sd_within_day`` (or
    ``size.sd``, taken as the sd of a whole day); ``time.per_day`` caps the visits per day.
    ``strata`` is the number of spatial strata: ``assess`` runs the bernstein and betting
    intervals in each stratum at error ``a / strata`` (a union bound), so the promise does too.
    """
    from .stats.twostage import plan_days

    size = plan.settings["size"]
    t = plan.settings["time"]
    return plan_days(
        size.get("tolerance") if tolerance is _ABSENT else tolerance,
        range=_largest(size, "range"), lower=size.get("lower"), sd=_largest(size, "sd"),
        sd_between=size.get("sd_between_days"), sd_within=size.get("sd_within_day"),
        cost_day=size.get("cost_day"), cost_visit=size.get("cost_visit"),
        per_day=per_day, days=days, max_per_day=None if per_day is not None else t["per_day"],
        confidence=size["confidence"], bound=size["bound"], sides=size["sides"], strata=strata, names=DAY_NAMES)


def _days_for_units(days, units: int) -> int:
    """Field days to draw so that, weighted by temporal stratum, they count as at least ``units`` equal days.

    The days per temporal stratum are known before the draw
    (:func:`geosample.randomizer.days.allocate_days`); ``k_eff = 1 / sum_s W_s^2 / k_s`` with
    ``W_s = K_s / K`` is below ``k`` when the strata's shares are not met exactly, so ``k`` is
    raised until ``k_eff >= units`` (at most every allowed day).
    """
    from collections import Counter

    from .randomizer.days import allocate_days

    K = len(days)
    if not K or not all(getattr(d, "temporal_stratum", "") for d in days):
        return units
    sizes = list(Counter(d.temporal_stratum for d in days).values())
    k = max(units, len(sizes))
    while k < K:
        ks = allocate_days(sizes, k)
        if 1.0 / sum((Ks / K) ** 2 / kk for Ks, kk in zip(sizes, ks)) + 1e-9 >= units:
            break
        k += 1
    return min(k, K)


def _temporal_units(schedule, visits) -> tuple[float, float, int]:
    """``(k_eff, gap, k)`` of the field days carrying ``visits``, over the temporal strata of the season.

    ``W_s = K_s / K`` (allowed days of temporal stratum s over all), ``k_s`` the drawn days of s
    with one of the visits: ``k_eff = 1 / sum_s W_s^2 / k_s`` (the number of equal days with the
    same variance, Cochran 1977 ch. 5 applied to days) and ``gap = sum_s |k_s / k - W_s|`` (how
    far the days' make-up is from the season's). Without temporal strata on the days: ``(k, 0, k)``.
    """
    from collections import Counter

    dates = {v.visit_date for v in visits}
    k = len(dates)
    days = tuple(getattr(schedule, "days", ()) or ())
    if not k or not days or any(v.day_index is None or v.day_index >= len(days) for v in visits) \
            or not all(d.temporal_stratum for d in days):
        return float(k), 0.0, k
    allowed = Counter(d.temporal_stratum for d in days)
    K = sum(allowed.values())
    drawn: dict[str, set] = {}
    for v in visits:
        drawn.setdefault(days[v.day_index].temporal_stratum, set()).add(v.visit_date)
    k_s = {s: len(drawn.get(s, ())) for s in allowed}
    gap = sum(abs(k_s[s] / k - allowed[s] / K) for s in allowed)
    if any(n == 0 for n in k_s.values()):
        return 0.0, gap, k
    return 1.0 / sum((allowed[s] / K) ** 2 / k_s[s] for s in allowed), gap, k


def _day_promise(plan: Plan, schedule, strata: int = 1) -> dict:
    """What the design as drawn promises: the bound on the field days that carry primary visits.

    bernstein and betting run in each stratum on its own day units (as ``assess`` does), so their
    promise uses the fewest days any stratum has (the widest of the strata's intervals).
    """
    from collections import Counter

    primaries = [v for v in schedule.visits if v.role == "primary" and v.visit_date is not None]
    per = Counter(v.visit_date for v in primaries)
    k, m_min = len(per), min(per.values(), default=0)
    bound = plan.settings["size"]["bound"]
    extra_notes: list[str] = []
    widen = 0.0
    if bound in ("bernstein", "betting"):
        names = sorted({v.stratum for v in primaries})
        parts = [_temporal_units(schedule, [v for v in primaries if v.stratum == name]) for name in names]
        units = min((p[2] for p in parts), default=0)
        L = _largest(plan.settings["size"], "range") or 0.0
        widen = max((L / 2.0 * p[1] for p in parts), default=0.0)
        if units < k and strata > 1:
            extra_notes.append(f"{bound} runs in each of the {strata} strata on its own field days (as the "
                               f"assessment does); the promise uses the fewest, {units} days")
        if widen > 0:
            extra_notes.append(f"the drawn days' make-up over the temporal strata differs from their shares of the "
                               f"season: the assessment widens the {bound} interval by (L/2) sum_s |k_s/k - K_s/K|, "
                               f"here {widen:.4g}, and so does this promise")
    else:
        eff, _, _ = _temporal_units(schedule, primaries)
        units = int(math.floor(eff + 1e-9))
        if units < k:
            extra_notes.append(f"the temporal strata are weighted by their shares of the season (K_s/K), as in the "
                               f"assessment: the {k} days count as {eff:.4g} equal days (1 / sum_s W_s^2 / k_s); the "
                               f"promise uses {units}")
    out = {"days": k, "visits": sum(per.values()), "per_day_min": m_min, "per_day_max": max(per.values(), default=0)}
    size = plan.settings["size"]
    if units < 2:
        out.update(sentence=f"{units} field day{'s' if k != 1 else ''} with primary visits: no guarantee rests on fewer "
                            "than 2 days.", half_width=None, error_bound=1.0, basis="range", assumption="", notes=[])
        return out
    try:
        p = days_plan_from_plan(plan, days=units, per_day=m_min, strata=strata)
    except GeosampleError as e:  # e.g. a fixed total with a bound that needs what the plan does not give
        out.update(sentence=f"No promise on the {k} field days: {e}", half_width=None, error_bound=1.0,
                   basis="range", assumption="", notes=[])
        return out
    from dataclasses import replace

    p = replace(p, visits=out["visits"], days=k, half_width=p.half_width + widen, notes=p.notes + tuple(extra_notes))
    out.update(sentence=p.sentence(), half_width=p.half_width, error_bound=p.error_bound, basis=p.basis,
               assumption=p.assumption, notes=list(p.notes), bound=p.bound, day_sd=p.day_sd,
               reached=size.get("tolerance") is None or p.half_width <= size["tolerance"] * (1 + 1e-9))
    return out


def _sizing_summary(plan: Plan, frame: Frame, allocation, schedule=None, days_plan=None) -> dict:
    """What the report needs to explain the total (formula, inputs, guarantee)."""
    from .stats import sizing

    size = plan.settings["size"]
    survey = plan.settings["survey"]
    names = [s.name for s in frame.strata]
    sd = _per_stratum(size, names, "sd")
    rng_ = _per_stratum(size, names, "range")
    cost = _per_stratum(size, names, "cost")
    per = []
    for i, s in enumerate(frame.strata):
        per.append({
            "name": s.name, "code": s.code, "weight": s.weight, "area_m2": s.area_m2, "n": allocation.n[i],
            "sd": None if sd is None else sd[i], "range": None if rng_ is None else rng_[i],
            "cost": None if cost is None else cost[i],
        })
    assumption = sizing.ASSUMPTIONS.get(size["bound"], "")
    conf = allocation.confidence
    tol = allocation.achieved_tolerance
    units = survey.get("units") or ""
    scale = " (log10 units)" if survey["statistic"] == "geomean" else ""
    if tol is not None:
        guarantee = (
            f"With {allocation.total} primary samples allocated as shown, the {size['bound']} bound guarantees that "
            f"the procedure gives an interval of half-width at most {tol:.3g} {units}{scale} that contains the true "
            f"{'geometric ' if survey['statistic'] == 'geomean' else ''}mean at least {conf * 100:g}% of the time "
            f"(the bound puts the error probability at most {allocation.error_bound:.4f})."
        )
    else:
        guarantee = f"{allocation.total} primary samples; error probability at most {allocation.error_bound:.4f}."
    formula = sizing.FORMULAS.get(size["bound"], "")
    days = _day_promise(plan, schedule, len(frame.strata)) if schedule is not None else None
    if days is not None:
        independent = guarantee
        guarantee = days["sentence"]
        assumption = days["assumption"] or assumption
        if days["days"] < days["visits"]:
            days["independent"] = ("Counted as independent samples, the same visits would be said to give: "
                                   + independent + " That count does not hold: visits on one field day share its "
                                   "weather and time of day, so the field days are the units.")
    if days_plan is not None and days is not None:
        days["sized"] = {"days": days_plan.days, "per_day": days_plan.per_day, "visits": days_plan.visits,
                         "per_day_optimum": days_plan.per_day_optimum, "cost": days_plan.cost,
                         "notes": list(days_plan.notes)}
    return {
        "days": days,
        "formula": formula,
        "inputs": {k: size.get(k) for k in ("tolerance", "range", "lower", "sd", "sd_between_days", "sd_within_day",
                                            "cost_day", "cost_visit", "confidence", "bound", "sides",
                                            "allocation", "min_per_stratum", "n")},
        "per_stratum": per,
        "guarantee": guarantee,
        "assumption": assumption,
        "statistic": survey["statistic"],
        "tolerance_factor": (10 ** size["tolerance"]) if survey["statistic"] == "geomean" and size.get("tolerance")
        else None,
    }


def _frame_lonlat(frame: Frame) -> tuple[float, float]:
    from pyproj import Transformer

    c = frame.water.centroid if frame.water is not None else frame.strata[0].geometry.centroid
    t = Transformer.from_crs(frame.crs, "EPSG:4326", always_xy=True)
    lon, lat = t.transform(c.x, c.y)
    return float(lon), float(lat)


@dataclass(frozen=True)
class Stages:
    """What the draw needs besides the frame: the allocation, the allowed days and how many field days."""

    allocation: Any
    days: tuple
    field_days: int | None
    days_plan: Any
    warnings: tuple[str, ...]


def plan_stages(plan: Plan, frame: Frame, settings: dict | None = None) -> Stages:
    """Size and allocate, and compute the season's allowed days and the number of field days (seed-free).

    :func:`make_design` and ``geosample simulate`` both call this, so a simulated
    season is drawn from exactly the days and sizes the plan would use.
    """
    from .randomizer.time import field_days

    settings = settings or plan.settings
    allocation = allocation_from_plan(plan, frame)
    t = settings["time"]
    lon, lat = _frame_lonlat(frame)
    days = field_days(t["start"], t["end"], weekdays=t["days"], skip=t["skip"], window=t["window"],
                      timezone=settings["survey"]["timezone"], lat=lat, lon=lon, temporal=t["temporal"],
                      min_minutes=t["minutes_on_site"])
    day_tuple = getattr(days, "days", days)
    day_warnings = tuple(getattr(days, "warnings", ()))
    crew_days, days_plan = t.get("field_days"), None
    if not crew_days and settings["size"].get("tolerance") is not None:
        # the field days are the units: k days of m visits (stats.twostage), within the season's allowed days
        days_plan = days_plan_from_plan(plan, strata=len(frame.strata))
        n_temporal = len({getattr(day, "temporal_stratum", None) for day in day_tuple})
        if days_plan.days < n_temporal <= len(day_tuple):
            # every temporal stratum needs a field day: with those more days, fewer visits a day may do
            for m in range(1, t["per_day"] + 1):
                days_plan = days_plan_from_plan(plan, days=n_temporal, per_day=m, strata=len(frame.strata))
                if days_plan.half_width <= settings["size"]["tolerance"] * (1 + 1e-9):
                    break
        k_units = _days_for_units(day_tuple, days_plan.days)
        total = allocation.total  # a fixed size.n stays fixed: the report states what its days give
        if settings["size"].get("n") is None and k_units * days_plan.per_day > total:
            total = k_units * days_plan.per_day
            allocation = allocation_from_plan(plan, frame, n=total)
        crew_days = min(len(day_tuple), total, max(k_units, -(-total // t["per_day"]))) or None
        if days_plan.days > len(day_tuple):
            day_warnings += (f"the {settings['size']['bound']} bound needs {days_plan.days} field days, but the season "
                             f"allows only {len(day_tuple)}: the report states what {len(day_tuple)} days give",)
    return Stages(allocation, tuple(day_tuple), crew_days, days_plan, tuple(day_warnings))


def make_design(
    plan: Plan,
    *,
    layers: Layers | None = None,
    seed: int | None = None,
    seed_source: str | None = None,
    draw_count: int = 1,
    inputs: dict | None = None,
    progress: Progress | None = None,
    registration: dict | None = None,
    history: dict | None = None,
) -> Design:
    """Run every stage of the design.

    Parameters
    ----------
    plan : Plan
        A validated plan (:func:`geosample.plan.load_plan`).
    layers : Layers, optional
        The plan's layers; read from disk when not given.
    seed : int, optional
        The root seed; without it the plan's seed (or seed_text) is used, else a
        fresh one is drawn from the OS. The seed used is in ``Design.seed``.
    draw_count : int
        How many draws the draw record holds for this plan (for the report).
    progress : callable, optional
        Called with the name of each step as it starts.
    registration, history : dict, optional
        The manifest's ``registration`` and ``history`` entries, carried into the
        design for the report and the manifest (``verify`` passes them back).

    Returns
    -------
    Design
    """
    from .itinerary import build_itinerary
    from .randomizer.space import draw_sites
    from .randomizer.time import schedule_visits

    step = progress or (lambda name: None)
    settings = {k: dict(v) for k, v in plan.settings.items()}
    if seed is None:
        seed, seed_source = resolve_seed(settings)
    # A seed from a text or a registration is recorded as seed_used; the plan's own seed stays empty.
    settings["draw"]["seed"] = int(seed) if seed_source not in ("text", "registered") else None
    settings["draw"]["seed_used"] = str(seed)
    settings["draw"]["seed_source"] = seed_source or "given"

    step("reading layers")
    if layers is None:
        layers = load_layers(plan)
    step("building the frame")
    frame = build_frame_from_plan(plan, layers, progress=progress)
    step("sizing and allocating")
    stages = plan_stages(plan, frame, settings)
    allocation, day_tuple, crew_days, days_plan = (stages.allocation, stages.days, stages.field_days,
                                                   stages.days_plan)
    day_warnings = stages.warnings
    t = settings["time"]
    step("drawing sites")
    d = settings["draw"]
    draw = draw_sites(frame, allocation, method=d["method"], reserve=d["reserve"], spacing_m=d.get("spacing_m"),
                      seed=seed)
    step("drawing field days and times")
    schedule = schedule_visits(draw, day_tuple, per_day=t["per_day"], seed=seed,
                               minutes_on_site=t["minutes_on_site"], field_days=crew_days)
    step("planning day routes")
    schedule = build_itinerary(schedule, frame, speed_kmh=t["speed_kmh"], minutes_on_site=t["minutes_on_site"],
                               holding_h=t["holding_h"], lab_minutes=t["lab_minutes"], seed=seed)
    from dataclasses import replace

    schedule = replace(schedule, warnings=tuple(schedule.warnings) + day_warnings)
    sizing = _sizing_summary(plan, frame, allocation, schedule, days_plan)
    return Design(
        settings=settings,
        frame=frame,
        allocation=allocation,
        draw=draw,
        schedule=schedule,
        sizing=sizing,
        seed=int(seed),
        seed_source=seed_source or "given",
        draw_count=draw_count,
        inputs=dict(inputs or {}),
        registration=registration,
        history=history,
    )
