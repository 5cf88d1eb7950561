"""One field day at a time: ``days/`` (a GPX, a CSV and a printable field sheet per day).

For crew day N (the N-th date with visits, as ``schedule.csv``'s ``day``) on
date D, three files named ``day-NN-D``:

- ``.gpx`` (:func:`.gpx.day_gpx`): the day's stops as waypoints in visit order,
  then the reserves of the day's strata in rank order, and per trip a route and a
  track along the over-water path the itinerary found (so every segment is on
  the water, around the islands).
- ``.csv``: the same rows and columns as ``schedule.csv`` (the crew's blanks
  included, so filled rows can be copied back), then the coordinates as a crew
  reads them: ``lat_dm, lon_dm`` (degrees and decimal minutes) and ``utm`` (zone,
  band, easting, northing in the point's own UTM zone; :mod:`.coords`).
- ``.html``: the field sheet, one printed page: date, window, launch and trips,
  blanks for the crew, a small map of the route (inline SVG drawn from the frame,
  no network), the stops with planned time and coordinates (decimal degrees,
  degrees and decimal minutes, UTM with its zone) and blanks for sampled time,
  result, qualifier and notes, the reserves of the day's strata in rank order
  with their labels (``NB-R1``), and the safety cautions.

Every file is a function of the design alone (no clock time), so identical
designs give identical bytes; each is listed in the manifest as ``days/<name>``.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..model import Design, FieldDay, Visit
from . import template_environment
from .coords import ddm, utm
from .gpx import Trip, day_gpx, to_xml, trips
from .svg import ROUTE_COLOURS, Line, Marker, padded_extent, svg_map
from .table import COLUMNS, day_numbers, ordered_visits, reserve_label, schedule_rows

__all__ = ["FOLDER", "EXTRA_COLUMNS", "DayFiles", "field_days", "day_rows", "sheet_context", "render_sheet",
           "write_days", "SHEET_CAUTIONS", "MAX_RESERVES_ON_SHEET", "RESERVES_PER_STOP", "reserves_on_sheet"]

FOLDER = "days"
#: Columns the day CSV adds after the columns of ``schedule.csv``.
EXTRA_COLUMNS = ("lat_dm", "lon_dm", "utm")
#: Reserve lines a sheet has room for with no stop; each stop takes the room of :data:`RESERVES_PER_STOP`.
MAX_RESERVES_ON_SHEET = 40
RESERVES_PER_STOP = 4

#: Short cautions for the sheet (the report has the full text and sources).
SHEET_CAUTIONS = (
    "Follow local regulations and your program's safety plan; they come before this sheet.",
    "Life jackets on the water and when wading; never alone; check the forecast; tell someone ashore the route "
    "and return time.",
    "Thunder or lightning: leave the water. Strong wind or waves: stop. A site that cannot be reached safely is "
    "not sampled: write why, and use the next reserve of its stratum in rank order.",
    "Gloves, no hand-to-face contact, wash hands before eating; clean boots and gear between water bodies.",
    "Keep samples cool and dark; record the time of each sample; meet the holding time.",
)


@dataclass(frozen=True)
class DayFiles:
    """One crew day: its number, date, stops (route order), reserves of its strata, and trips."""

    day: int
    date: dt.date
    stops: tuple[Visit, ...]
    reserves: tuple[Visit, ...]
    trips: tuple[Trip, ...]
    field_day: FieldDay | None

    @property
    def stem(self) -> str:
        return f"day-{self.day:02d}-{self.date.isoformat()}"


def field_days(design: Design) -> list[DayFiles]:
    """The crew days of ``design`` in date order (only dates with visits)."""
    visits = ordered_visits(design)
    numbers = day_numbers(visits)
    all_trips = trips(design)
    order = {s.name: i for i, s in enumerate(design.frame.strata)}
    out = []
    for date, n in sorted(numbers.items(), key=lambda kv: kv[1]):
        stops = tuple(v for v in visits if v.role == "primary" and v.visit_date == date)
        strata = {v.stratum for v in stops}
        reserves = tuple(sorted((v for v in visits if v.role != "primary" and v.stratum in strata),
                                key=lambda v: (order.get(v.stratum, len(order)), v.stratum, v.reserve_rank,
                                               v.site_id)))
        idx = next((v.day_index for v in stops if v.day_index is not None), None)
        fd = design.schedule.days[idx] if idx is not None and 0 <= idx < len(design.schedule.days) else None
        out.append(DayFiles(n, date, stops, reserves, tuple(t for t in all_trips if t.route.date == date), fd))
    return out


def rows_by_site(design: Design) -> dict[str, dict[str, str]]:
    """The schedule's rows by site id (computed once per design, shared by the day CSVs)."""
    return {v.site_id: r for v, r in zip(ordered_visits(design), schedule_rows(design))}


def day_rows(design: Design, day: DayFiles, rows: dict[str, dict[str, str]] | None = None) -> list[dict[str, str]]:
    """The day CSV's rows: the schedule's rows of its stops and reserves, with :data:`EXTRA_COLUMNS`.

    ``rows`` is :func:`rows_by_site` of the design, when the caller has it already.
    """
    rows = rows_by_site(design) if rows is None else rows
    out = []
    for v in day.stops + day.reserves:
        row = dict(rows[v.site_id])
        lat_dm, lon_dm = ddm(v.lat, v.lon)
        row.update({"lat_dm": lat_dm, "lon_dm": lon_dm, "utm": utm(v.lat, v.lon).text})
        out.append(row)
    return out


def reserves_on_sheet(reserves: tuple[Visit, ...], n_stops: int) -> tuple[Visit, ...]:
    """The reserves the sheet has room for: the lowest ranks, taken in turn from each stratum.

    Room is :data:`MAX_RESERVES_ON_SHEET` less :data:`RESERVES_PER_STOP` per stop (at least one per
    stratum); the order of ``reserves`` (stratum, then rank) is kept. The day's CSV and GPX list them all.

    Examples
    --------
    >>> from geosample.model import Visit
    >>> rs = tuple(Visit(f"{c}-{k}", c, "reserve", k, 0, 0, 0, 0) for c in "AB" for k in range(1, 30))
    >>> shown = reserves_on_sheet(rs, 8)
    >>> len(shown), [v.site_id for v in shown][:2], sum(v.stratum == "B" for v in shown)
    (8, ['A-1', 'A-2'], 4)
    """
    strata = list(dict.fromkeys(v.stratum for v in reserves))
    room = max(MAX_RESERVES_ON_SHEET - RESERVES_PER_STOP * n_stops, len(strata))
    if len(reserves) <= room:
        return reserves
    queues = {st: [v for v in reserves if v.stratum == st] for st in strata}
    keep: set[str] = set()
    depth = 0
    while len(keep) < room:
        added = False
        for st in strata:
            if depth < len(queues[st]) and len(keep) < room:
                keep.add(queues[st][depth].site_id)
                added = True
        if not added:
            break
        depth += 1
    return tuple(v for v in reserves if v.site_id in keep)


def _csv_text(rows: list[dict[str, str]]) -> str:
    buf = io.StringIO(newline="")
    w = csv.DictWriter(buf, fieldnames=list(COLUMNS) + list(EXTRA_COLUMNS), lineterminator="\n",
                       quoting=csv.QUOTE_MINIMAL)
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue()


def _hhmm(t: dt.datetime | None) -> str:
    return "" if t is None else t.strftime("%H:%M")


def _coords(v: Any) -> dict[str, str]:
    lat_dm, lon_dm = ddm(v.lat, v.lon)
    u = utm(v.lat, v.lon)
    return {"dd": f"{v.lat:.6f}, {v.lon:.6f}", "dm": f"{lat_dm}  {lon_dm}", "utm": u.text,
            "utm_e": f"{u.zone}{u.band} {u.easting:.0f} E", "utm_n": f"{u.northing:.0f} N",
            "short": f"{lat_dm.replace(' ', '')} {lon_dm.replace(' ', '')}  {u.zone}{u.band} {u.easting:.0f} "
                     f"{u.northing:.0f}"}


#: Size of the sheet's map (CSS px) by the sheet's density.
MAP_SIZE = {"normal": (760, 230), "dense": (760, 200), "denser": (760, 170)}


def _density(n_stops: int, n_reserves: int) -> str:
    load = RESERVES_PER_STOP * n_stops + n_reserves
    return "normal" if load <= 30 else "dense" if load <= 36 else "denser"


def _map(design: Design, day: DayFiles, density: str) -> str:
    frame = design.frame
    from shapely.geometry import LineString, MultiPoint

    lines, geoms, markers = [], [], []
    for k, t in enumerate(day.trips):
        if len(t.route.coords_xy) >= 2:
            lines.append(Line(tuple(t.route.coords_xy), ROUTE_COLOURS[k % len(ROUTE_COLOURS)], 2.2,
                              "" if k == 0 else "6 3"))
            geoms.append(LineString(t.route.coords_xy))
    codes = {s.name: s.code for s in frame.strata}
    for v in reserves_on_sheet(day.reserves, len(day.stops)):
        markers.append(Marker(v.x, v.y, "reserve", reserve_label(codes.get(v.stratum, ""), v.reserve_rank)))
    used = {t.route.access for t in day.trips}
    for a in frame.access:
        if a.name in used:
            markers.append(Marker(a.x, a.y, "access", a.name))
    for v in day.stops:
        markers.append(Marker(v.x, v.y, "stop", "" if v.route_order is None else str(v.route_order),
                              ROUTE_COLOURS[0]))
    pts = [(v.x, v.y) for v in day.stops] + [(m.x, m.y) for m in markers]
    if pts:
        geoms.append(MultiPoint(pts))
    if not geoms:
        return ""
    width, height = MAP_SIZE[density]
    extent = padded_extent(geoms, pad=0.08, aspect=width / height)
    return svg_map(frame, extent, width=width, height=height, lines=lines, markers=markers,
                   title=f"Day {day.day} route")


def _more(reserves: tuple[Visit, ...], shown: tuple[Visit, ...], codes: dict[str, str]) -> list[str]:
    """Per stratum, the reserves left off the sheet (``"NB-R9 to NB-R14"``)."""
    ids = {v.site_id for v in shown}
    out = []
    for st in dict.fromkeys(v.stratum for v in reserves):
        left = [v for v in reserves if v.stratum == st and v.site_id not in ids]
        if left:
            a = reserve_label(codes.get(st, ""), left[0].reserve_rank)
            b = reserve_label(codes.get(st, ""), left[-1].reserve_rank)
            out.append(a if a == b else f"{a} to {b}")
    return out


def sheet_context(design: Design, day: DayFiles) -> dict:
    """Everything the day sheet shows, as plain data."""
    s = design.survey
    codes = {st.name: st.code for st in design.frame.strata}
    fd = day.field_day
    tzname = ""
    first_time = next((v.planned_time for v in day.stops if v.planned_time is not None), None)
    if first_time is not None:
        tzname = f"{first_time.tzname() or ''} (UTC{first_time.strftime('%z')[:3]}:{first_time.strftime('%z')[3:]})"
    access = {a.name: a for a in design.frame.access}
    trips_ = []
    for t in day.trips:
        a = access.get(t.route.access)
        trips_.append({
            "name": t.name, "access": t.route.access or "(first site)",
            "access_coords": _coords(a) if a is not None else None,
            "leave": _hhmm(t.route.start), "back": _hhmm(t.route.end), "km": f"{t.route.length_m / 1000:.1f}",
            "ok": t.route.lab_deadline_ok, "sites": len(t.route.site_ids),
        })
    stops = [{"order": "" if v.route_order is None else v.route_order, "site_id": v.site_id, "stratum": v.stratum,
              "code": codes.get(v.stratum, ""), "planned": _hhmm(v.planned_time), **_coords(v)} for v in day.stops]
    shown = reserves_on_sheet(day.reserves, len(day.stops))
    reserves = [{"label": reserve_label(codes.get(v.stratum, ""), v.reserve_rank), "site_id": v.site_id,
                 "stratum": v.stratum, **_coords(v)} for v in shown]
    t = design.settings.get("time", {})
    density = _density(len(stops), len(reserves))
    return {
        "title": s.get("title") or "Sampling design", "parameter": s.get("parameter") or "",
        "units": s.get("units") or "", "day": day.day, "date": day.date.isoformat(),
        "weekday": day.date.strftime("%A"),
        "window": f"{_hhmm(fd.window_start)} to {_hhmm(fd.window_end)}" if fd else "",
        "sun": (f"sunrise {_hhmm(fd.sunrise)}, sunset {_hhmm(fd.sunset)}" if fd and fd.sunrise and fd.sunset
                else ""),
        "timezone": tzname, "trips": trips_, "stops": stops, "reserves": reserves,
        "more_reserves": _more(day.reserves, shown, codes), "csv": f"{day.stem}.csv", "gpx": f"{day.stem}.gpx",
        "map_link": f"../map.html#day={day.day}",
        "holding_h": t.get("holding_h"), "on_site": t.get("minutes_on_site"),
        "strata_codes": [(st.code, st.name) for st in design.frame.strata
                         if any(v.stratum == st.name for v in shown)],
        "svg": _map(design, day, density), "cautions": list(SHEET_CAUTIONS),
        "density": density,
    }


def render_sheet(design: Design, day: DayFiles) -> str:
    """The field sheet of one day as HTML text (jinja2, autoescaped; the map is our own SVG)."""
    from markupsafe import Markup

    ctx = sheet_context(design, day)
    ctx["svg"] = Markup(ctx["svg"])  # built by svg.svg_map, every label escaped there
    return template_environment().get_template("day_sheet.html.j2").render(**ctx)


def write_days(design: Design, folder: str | Path) -> dict[str, Path]:
    """Write ``days/`` under ``folder``: per crew day a GPX, a CSV and a field sheet.

    Returns
    -------
    dict
        ``"days/<file name>"`` -> path, by day, each day's ``.gpx``, ``.csv``, ``.html``.
    """
    base = Path(folder) / FOLDER
    base.mkdir(parents=True, exist_ok=True)
    out: dict[str, Path] = {}
    rows = rows_by_site(design)
    for day in field_days(design):
        gpx = base / f"{day.stem}.gpx"
        gpx.write_text(to_xml(day_gpx(design, day.day, day.stops + day.reserves, day.trips)), encoding="utf-8",
                       newline="\n")
        table = base / f"{day.stem}.csv"
        table.write_text(_csv_text(day_rows(design, day, rows)), encoding="utf-8", newline="")
        sheet = base / f"{day.stem}.html"
        sheet.write_text(render_sheet(design, day), encoding="utf-8", newline="\n")
        for p in (gpx, table, sheet):
            out[f"{FOLDER}/{p.name}"] = p
    return out
