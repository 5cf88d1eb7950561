"""The design report: ``report.html``, what a regulator reads.

One self-contained, printable HTML page (inline CSS, no script, no external
request), rendered by jinja2 with autoescaping on, from
``templates/report.html.j2``. It answers the three questions of the job:

1. *Why this many samples?* The bound, its formula and inputs, the total, the
   guarantee sentence and the allocation table.
2. *Were the places and times really chosen at random?* What each constraint
   removed from the water, the CRS, the draw method, the seed and where it came
   from, how many draws this plan has had, the spatial balance, the schedule
   and the routes (with the time-of-day spread per stratum).
3. *What exactly may a result claim?* The wording a result may use, the wording
   it must not use, and field cautions (safety, hygiene, weather, sample depth,
   holding time) that defer to local rules and accredited practice.

:func:`report_context` builds the figures as plain data (tested without HTML);
:func:`render_report` renders them; :func:`write_report` writes the file. No
clock time is written, so the same design gives the same bytes.
"""
from __future__ import annotations

import datetime as dt
import math
from collections import Counter
from pathlib import Path
from typing import Any

from ..model import Design, Route
from ..version import __version__
from . import PACKAGE_FILES, template_environment
from .table import day_numbers, ordered_visits

__all__ = ["FILE_NAME", "DRAW_METHODS", "SEED_SOURCES", "report_context", "render_report", "write_report",
           "claim_wording"]

FILE_NAME = "report.html"

#: How each draw method works, in a sentence, with its source.
DRAW_METHODS = {
    "simple": "simple random sampling: points drawn independently and uniformly over each stratum, the later "
              "points being the ordered reserves",
    "balanced": "balanced acceptance sampling (Robertson, Brown, McDonald & Jaksons 2013, Biometrics 69:776-784): "
                "random-start Halton points kept where they fall in the stratum, in order; the points kept after "
                "the primaries are the ordered reserves",
    "grts": "generalized random tessellation stratified sampling (Stevens & Olsen 2004, JASA 99:262-278): "
            "randomised hierarchical quadrant addresses, systematic selection along the ordered line, reverse "
            "hierarchical order; reserves follow in that order",
}

#: Where the seed came from, in words.
SEED_SOURCES = {
    "plan": "written in the plan file before the draw",
    "os": "drawn from the operating system's entropy source when the draw was made, and recorded here and in "
          "the manifest",
    "text": "the SHA-256 of a seed text (announcing the text before the draw lets anyone check that the seed "
            "was not chosen after seeing the sites)",
    "registered": "made from the registration and a public value published after it (see below)",
}

_DAY_NAMES = {"mon": "Monday", "tue": "Tuesday", "wed": "Wednesday", "thu": "Thursday", "fri": "Friday",
              "sat": "Saturday", "sun": "Sunday"}


# --------------------------------------------------------------------------- formatting
def _pct(x: float | None, digits: int = 1) -> str:
    return "" if x is None else f"{100 * x:.{digits}f}%"


def _conf_pct(c: float) -> str:
    """0.95 -> "95%", 0.975 -> "97.5%"."""
    return f"{100 * c:.10g}%"


def _num(x: Any, digits: int = 3) -> str:
    if x is None:
        return ""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return f"{x:,}"
    if isinstance(x, float):
        if math.isnan(x):
            return ""
        return f"{x:,.{digits}g}" if abs(x) < 1e6 else f"{x:,.0f}"
    if isinstance(x, (list, tuple)):
        return ", ".join(_num(v, digits) for v in x)
    if isinstance(x, dict):
        return "; ".join(f"{k}: {_num(v, digits)}" for k, v in x.items())
    return str(x)


def _clock_h(h: float | None) -> str:
    """Decimal local hours -> "HH:MM" (9.5 -> "09:30")."""
    if h is None:
        return ""
    minutes = int(round(h * 60))
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def _km2(m2: float) -> str:
    return f"{m2 / 1e6:,.3f}"


def _sentence(text: str) -> str:
    """Capitalised, ending with a full stop ("the frame lies..." -> "The frame lies....")."""
    text = (text or "").strip()
    if not text:
        return ""
    text = text[0].upper() + text[1:]
    return text if text.endswith((".", "!", "?")) else text + "."


def _hhmm(t: dt.datetime | None) -> str:
    return "" if t is None else t.strftime("%H:%M")


# --------------------------------------------------------------------------- claims
def claim_wording(design: Design) -> dict[str, list[str]]:
    """The sentences a result may use (``may``) and must not use (``must_not``).

    The confidence level, units, criterion and season come from the design.

    Returns
    -------
    dict
        ``{"may": [...], "must_not": [...]}``.
    """
    s = design.survey
    c = _conf_pct(design.allocation.confidence)
    units = s.get("units") or ""
    u = f" {units}" if units else ""
    param = s.get("parameter") or "the measured quantity"
    geo = s.get("statistic") == "geomean"
    what = "geometric mean" if geo else "mean"
    one = design.allocation.sides == "one"
    crit = s.get("criterion")
    t = design.settings.get("time", {})
    season = f"from {t.get('start')} to {t.get('end')}" if t.get("start") and t.get("end") else "in the season"
    coverage = (f"the procedure used gives an interval that contains the true {what} at least {c} of the time "
                f"(over repetitions of the whole design: draw, field work and analysis)")
    may = []
    if geo:
        est = (f"The {what} of {param} over the frame, {season}, is G{u}, within a factor F (from G/F to G×F), "
               f"at the {c} confidence level: {coverage}.")
    elif one:
        est = (f"The {what} of {param} over the frame, {season}, is at most X + D{u} at the {c} confidence level "
               f"(a one-sided bound): {coverage}.")
    else:
        est = (f"The {what} of {param} over the frame, {season}, is X ± D{u} at the {c} confidence level: "
               f"{coverage}.")
    may.append(est)
    if crit is not None:
        may.append(f"If the whole interval lies below the criterion: \u201cthe {what} is below {crit:g}{u} at the "
                   f"{c} confidence level\u201d (and likewise above it, if the whole interval lies above). If the "
                   f"interval contains {crit:g}, the result does not decide either way; say so.")
    may.append("The statement is about the frame (the water that could be sampled, as mapped) and the "
               "sampling window; name both when quoting it.")
    must_not = [
        (f"\u201cThere is a {c} probability that the {what} is below the criterion.\u201d The {what} is a fixed "
         f"number, not a random one: the {c} is how often the procedure's interval covers it, not a "
         "probability about this interval or this criterion."),
        (f"A statement about single samples: a {what} below the criterion says nothing about how often a "
         "single sample exceeds it (that needs a percentile or threshold value, and its own design)."),
        (f"A statement about days outside the season ({season}), hours outside the sampling window, or places "
         "outside the frame (closed areas and the water the constraints removed: section 2)."),
        ("A result after sites were moved, skipped or replaced other than by the reserve rule (the next "
         "reserve of the same stratum, in rank order), or after re-drawing until the sites or days were "
         "convenient: the guarantee holds only for the design as drawn."),
    ]
    return {"may": may, "must_not": must_not}


def _cautions(design: Design) -> list[dict[str, str]]:
    t = design.settings.get("time", {})
    holding = t.get("holding_h")
    lab = t.get("lab_minutes")
    plan_line = (f" This plan allows time.holding_h = {holding:g} h from the first sample of a trip to the lab, "
                 f"with time.lab_minutes = {lab:g} min from the access point to the lab."
                 if isinstance(holding, (int, float)) and isinstance(lab, (int, float)) else "")
    return [
        {"title": "Boat and wading safety",
         "text": "Wear a life jacket on the water and when wading; never sample alone; check the weather forecast "
                 "and the flow before going out and tell someone ashore the route and return time; do not wade "
                 "in fast or deep water, or where the bottom cannot be seen. A site that cannot be reached "
                 "safely is not sampled: record why and use the next reserve of its stratum.",
         "source": "common practice"},
        {"title": "Hygiene around contaminated water",
         "text": "Water with faecal contamination can carry pathogens. Wear gloves, cover cuts, keep hands away "
                 "from the face, wash or disinfect hands before eating or drinking and after sampling, and "
                 "clean boots and gear between water bodies.",
         "source": "common practice"},
        {"title": "Weather and lightning",
         "text": "Do not go out when thunderstorms are forecast; leave the water at the first thunder or "
                 "lightning and wait until well after the storm has passed. Strong wind and waves are reasons "
                 "to stop. Rain is not a reason to move a visit: heavy rain (over about 6 mm) raises "
                 "indicator-bacteria counts for up to about 3 days (Ackerman & Weisberg 2003, J. Water Health "
                 "1:85-89), and the random days include wet days on purpose.",
         "source": "common practice; Ackerman & Weisberg 2003"},
        {"title": "Sample depth",
         "text": "Take the sample about 30 cm below the surface where the water is at least 1 m deep (EU Bathing "
                 "Water Directive 2006/7/EC, Annex V), or as the program's method says; note the depth if it "
                 "differs.",
         "source": "Directive 2006/7/EC, Annex V"},
        {"title": "Holding time",
         "text": "Samples for coliforms, E. coli and enterococci are commonly held no more than 8 h from "
                 "collection, cooled below 10 °C (40 CFR 136.3, Table II; check the current text), usually read "
                 "as 6 h to deliver the sample and 2 h to start the analysis (Standard Methods 9060 B). Keep "
                 "samples cool and dark and record the collection time." + plan_line,
         "source": "40 CFR 136.3 Table II; Standard Methods 9060 B"},
        {"title": "Time of day",
         "text": "Sunlight inactivates indicator bacteria, so morning counts tend to be higher than afternoon "
                 "counts at the same place (Whitman et al. 2004, Appl. Environ. Microbiol. 70:4276). Sample at "
                 "the planned time; a visit far from it is flagged when results are assessed.",
         "source": "Whitman et al. 2004"},
    ]


# --------------------------------------------------------------------------- sections
def _sizing(design: Design) -> dict:
    a = design.allocation
    sz = design.sizing or {}
    inputs = [(k, _num(v)) for k, v in (sz.get("inputs") or {}).items() if v is not None]
    out = {
        "bound": a.bound, "sides": "two-sided" if a.sides == "two" else "one-sided",
        "confidence": _conf_pct(a.confidence), "tolerance": _num(a.tolerance),
        "achieved_tolerance": _num(a.achieved_tolerance), "error_bound": _num(a.error_bound, 4),
        "total": a.total, "method": a.method, "formula": sz.get("formula") or "",
        "inputs": inputs, "guarantee": sz.get("guarantee") or "", "assumption": sz.get("assumption") or "",
        "notes": list(a.notes) + list((sz.get("days") or {}).get("notes") or [])
        + list(((sz.get("days") or {}).get("sized") or {}).get("notes") or []),
        "tolerance_factor": _num(sz.get("tolerance_factor")) if sz.get("tolerance_factor") else "",
        "days": _days_promise(sz.get("days")),
    }
    if out["days"] is not None:  # the promise on the field days replaces the count of visits as independent
        hw = sz["days"].get("half_width")
        out["achieved_tolerance"] = _num(hw) if hw is not None else ""
        out["error_bound"] = _num(sz["days"].get("error_bound"), 4)
    return out


def _days_promise(days: dict | None) -> dict | None:
    if not days:
        return None
    return {"sized": None, "independent": None, **days}


def _allocation_rows(design: Design) -> list[dict]:
    alloc = design.allocation.as_dict()
    reserves = Counter(s.stratum for s in design.draw.sites if s.role != "primary")
    drawn = Counter(s.stratum for s in design.draw.sites if s.role == "primary")
    rows = []
    for s in design.frame.strata:
        b = design.draw.balance.get(s.name)
        rows.append({"name": s.name, "code": s.code, "area_km2": _km2(s.area_m2), "weight": f"{s.weight:.3f}",
                     "n": alloc.get(s.name, 0), "drawn": drawn.get(s.name, 0), "reserves": reserves.get(s.name, 0),
                     "balance": "too few sites to measure" if b is None else f"{b:.3f}"})
    return rows


def _frame(design: Design) -> dict:
    f = design.frame
    crs = f.crs
    epsg = crs.to_epsg() if hasattr(crs, "to_epsg") else None
    return {
        "water_km2": _km2(f.water_area_m2), "frame_km2": _km2(f.area_m2),
        "frame_share": _pct(f.area_m2 / f.water_area_m2) if f.water_area_m2 else "",
        "removed": [{"constraint": r.constraint, "area_km2": _km2(r.area_m2), "percent": f"{r.percent_of_water:.2f}%",
                     "detail": r.detail} for r in f.removed],
        "crs_name": getattr(crs, "name", str(crs)), "crs_epsg": epsg, "crs_reason": _sentence(f.crs_reason),
        "n_access": len(f.access),
        "access": [{"name": a.name, "snapped_m": f"{a.snapped_m:.0f}"} for a in f.access],
    }


def _draw(design: Design) -> dict:
    d = design.draw
    return {
        "method": d.method, "description": DRAW_METHODS.get(d.method, d.method),
        "reserve": _num(d.reserve), "spacing_m": _num(d.spacing_m) if d.spacing_m else "none",
        "seed": str(design.seed), "seed_source": design.seed_source,
        "seed_source_text": SEED_SOURCES.get(design.seed_source, design.seed_source),
        "draw_count": design.draw_count, "earlier_draws": design.draw_count > 1,
        "n_primary": sum(1 for s in d.sites if s.role == "primary"),
        "n_reserve": sum(1 for s in d.sites if s.role != "primary"),
    }


def _seed_choice(design: Design) -> dict:
    """The "How the seed was chosen" subsection: registered or not, the seed text, the draw history."""
    from ..registration import printable

    reg = design.registration or {}
    seed_text = (design.settings.get("draw") or {}).get("seed_text") if design.seed_source == "text" else None
    history = design.history or {}
    return {
        "registered": bool(reg),
        "seed": str(design.seed),
        "source_text": SEED_SOURCES.get(design.seed_source, design.seed_source),
        "digest": str(reg.get("sha256", "")),
        "public_source": printable(reg.get("public_source", "")),
        "public_date": str(reg.get("public_date", "")),
        "public_value": printable(reg.get("public_value", "")),
        "seed_text": None if seed_text is None else printable(seed_text),
        "draw_count": design.draw_count,
        "earlier_draws": design.draw_count > 1,
        "other_settings_draws": int(history.get("other_settings_draws") or 0),
        "history_file": history.get("file", ""),
    }


def _schedule(design: Design) -> dict:
    sched = design.schedule
    t = design.settings.get("time", {})
    visits = [v for v in ordered_visits(design) if v.role == "primary" and v.visit_date is not None]
    days = day_numbers(visits)
    weeks: dict[str, dict[str, int]] = {}
    for v in visits:
        iso = v.visit_date.isocalendar()
        key = f"{iso.year}-W{iso.week:02d}"
        w = weeks.setdefault(key, {"visits": 0, "days": set()})  # type: ignore[dict-item]
        w["visits"] += 1
        w["days"].add(v.visit_date)  # type: ignore[union-attr]
    week_rows = [{"week": k, "visits": w["visits"], "days": len(w["days"])} for k, w in sorted(weeks.items())]
    tod = []
    order = [s.name for s in design.frame.strata]
    summary = sched.time_of_day or {}
    for name in order + sorted(set(summary) - set(order)):
        r = summary.get(name)
        if not r:
            continue
        tod.append({"name": name, "n": int(r.get("n", 0)), "earliest": _clock_h(r.get("earliest_h")),
                    "median": _clock_h(r.get("median_h")), "latest": _clock_h(r.get("latest_h")),
                    "before_10": _pct(r.get("share_before_10"), 0), "share": r.get("share_before_10")})
    shares = [r["share"] for r in tod if r["share"] is not None]
    spread_note = ""
    if len(shares) >= 2 and max(shares) - min(shares) > 0.5:
        hi = max(tod, key=lambda r: r["share"])
        lo = min(tod, key=lambda r: r["share"])
        spread_note = (f"{hi['name']} is sampled before 10:00 far more often ({hi['before_10']}) than "
                       f"{lo['name']} ({lo['before_10']}). Counts of indicator bacteria depend on the time of "
                       "day, so a difference between these strata may be partly a difference in sampling hour.")
    window = t.get("window")
    return {
        "start": str(t.get("start", "")), "end": str(t.get("end", "")),
        "weekdays": ", ".join(_DAY_NAMES.get(str(d).lower(), str(d)) for d in t.get("days", [])),
        "skip": ", ".join(str(d) for d in t.get("skip", []) or []),
        "window": " to ".join(str(w) for w in window) if isinstance(window, (list, tuple)) else str(window or ""),
        "timezone": design.survey.get("timezone", ""), "per_day": t.get("per_day", ""),
        "calendar_days": sched.calendar_days or len(sched.days), "field_days": len(days), "visits": len(visits),
        "time_draw": sched.time_draw or "Planned times are random within the window.",
        "weeks": week_rows, "time_of_day": tod, "spread_note": spread_note,
        "warnings": list(sched.warnings),
    }


def _route_rows(design: Design) -> dict:
    from .gpx import route_name

    sched = design.schedule
    t = design.settings.get("time", {})
    lab = float(t.get("lab_minutes") or 0)
    holding = t.get("holding_h")
    visits = ordered_visits(design)
    days = day_numbers(visits)
    planned = {v.site_id: v.planned_time for v in visits}
    per_date: dict[dt.date, list[Route]] = {}
    for r in sorted(sched.routes, key=lambda r: (r.date, r.day_index)):
        per_date.setdefault(r.date, []).append(r)
    rows = []
    for date, trips in per_date.items():
        day = days.get(date) or (sorted(per_date).index(date) + 1)
        for k, r in enumerate(trips, start=1):
            first = min((planned[s] for s in r.site_ids if planned.get(s) is not None), default=None)
            # real minutes (timestamps): two times in one zone subtract on the wall clock, wrong across DST
            to_lab = (((r.end.timestamp() - first.timestamp()) / 60 + lab) / 60) if first and r.end else None
            rows.append({"name": route_name(day, r, k, len(trips)), "access": r.access or "(none)",
                         "sites": len(r.site_ids), "km": f"{r.length_m / 1000:.1f}", "leave": _hhmm(r.start),
                         "back": _hhmm(r.end), "to_lab_h": "" if to_lab is None else f"{to_lab:.1f}",
                         "ok": r.lab_deadline_ok, "notes": list(r.notes)})
    travel = [{"name": k, "minutes": f"{v:.1f}"} for k, v in (sched.travel_minutes_per_site or {}).items()]
    return {
        "rows": rows, "trips": len(rows), "days": len(per_date),
        "total_km": f"{sum(r.length_m for r in sched.routes) / 1000:.1f}",
        "not_met": sum(1 for r in sched.routes if not r.lab_deadline_ok),
        "holding_h": _num(holding) if holding is not None else "", "lab_minutes": _num(lab),
        "travel": travel,
    }


def _overview_map(design: Design) -> str:
    """The whole frame with every trip's path over water, the primaries and the access points (inline SVG)."""
    from .gpx import trips
    from .svg import ROUTE_COLOURS, Line, Marker, padded_extent, svg_map

    frame = design.frame
    lines = [Line(tuple(t.route.coords_xy), ROUTE_COLOURS[(t.day - 1) % len(ROUTE_COLOURS)], 1.3)
             for t in trips(design) if len(t.route.coords_xy) >= 2]
    markers = [Marker(v.x, v.y, "dot", colour="#000000") for v in design.schedule.visits if v.role == "primary"]
    markers += [Marker(a.x, a.y, "access", a.name) for a in frame.access]
    geoms = [g for g in (frame.water, *(s.geometry for s in frame.strata)) if g is not None and not g.is_empty]
    if not geoms:
        return ""
    extent = padded_extent(geoms, pad=0.03, aspect=760 / 460)
    return svg_map(frame, extent, width=760, height=460, lines=lines, markers=markers,
                   title="Overview: strata, closed areas, routes over water, primary sites and access points")


def _site_list(design: Design) -> dict:
    """Every site for the paper schedule: primaries by field day and stop, reserves by stratum and rank."""
    from .table import reserve_label

    codes = {s.name: s.code for s in design.frame.strata}
    visits = ordered_visits(design)
    days = day_numbers(visits)
    by_day: dict[dt.date, list[dict]] = {}
    for v in visits:
        if v.role == "primary" and v.visit_date is not None:
            by_day.setdefault(v.visit_date, []).append({
                "order": "" if v.route_order is None else v.route_order, "site_id": v.site_id,
                "stratum": v.stratum, "planned": _hhmm(v.planned_time), "lat": f"{v.lat:.6f}",
                "lon": f"{v.lon:.6f}"})
    reserves = [{"label": reserve_label(codes.get(v.stratum, ""), v.reserve_rank), "site_id": v.site_id,
                 "stratum": v.stratum, "lat": f"{v.lat:.6f}", "lon": f"{v.lon:.6f}"}
                for v in visits if v.role != "primary"]
    return {"days": [{"day": days[d], "date": d.isoformat(), "weekday": d.strftime("%a"), "rows": rows}
                     for d, rows in sorted(by_day.items())],
            "reserves": reserves}


def report_context(design: Design) -> dict:
    """Everything ``report.html`` shows, as plain data (strings, numbers, lists, dicts).

    Parameters
    ----------
    design : Design

    Returns
    -------
    dict
        Keys ``survey, version, sizing, allocation, frame, draw, seed_choice,
        schedule, routes, claims, cautions, warnings, files``.
    """
    s = design.survey
    warnings = list(design.frame.warnings) + list(design.draw.warnings) + list(design.schedule.warnings)
    return {
        "survey": {"title": s.get("title") or "Sampling design", "parameter": s.get("parameter") or "",
                   "units": s.get("units") or "", "statistic": s.get("statistic") or "mean",
                   "criterion": "" if s.get("criterion") is None else _num(s.get("criterion")),
                   "timezone": s.get("timezone") or ""},
        "version": __version__,
        "sizing": _sizing(design),
        "allocation": _allocation_rows(design),
        "frame": _frame(design),
        "draw": _draw(design),
        "seed_choice": _seed_choice(design),
        "schedule": _schedule(design),
        "routes": _route_rows(design),
        "claims": claim_wording(design),
        "cautions": _cautions(design),
        "warnings": warnings,
        "files": [f for f in PACKAGE_FILES if f != FILE_NAME] + ["days/", "manifest.json"],
        "overview_svg": _overview_map(design),
        "site_list": _site_list(design),
    }


def render_report(design: Design) -> str:
    """``report.html`` as text (jinja2, autoescaped)."""
    from markupsafe import Markup

    ctx = report_context(design)
    ctx["overview_svg"] = Markup(ctx["overview_svg"])  # built by svg.svg_map, every label escaped there
    return template_environment().get_template("report.html.j2").render(**ctx)


def write_report(design: Design, path: str | Path) -> Path:
    """Write ``report.html`` (self-contained and printable; see the module docstring).

    Parameters
    ----------
    design : Design
    path : str or Path
        The file to write (replaced if it exists).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    path.write_text(render_report(design), encoding="utf-8", newline="\n")
    return path
