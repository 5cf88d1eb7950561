"""The sites and day routes for a GPS unit: ``sites.gpx`` (GPX 1.1, written with gpxpy).

- One waypoint per site, primaries and reserves, in the order of
  ``schedule.csv``: ``name`` is the site id, ``desc`` gives the stratum, the
  role, the planned date and time (primaries) or the reserve label and rank
  (reserves), ``type`` is the role, ``time`` the planned time (primaries).
- One route and one track per crew trip (a field day split by the holding time
  has several trips), named ``"Day 3 2027-06-14"`` (``"... trip 2"`` for later
  trips). Both follow the over-water path the itinerary found (``Route.coords_xy``),
  so a GPS that draws straight lines between route points never crosses an
  island: the route's points are the access point, every bend of the path
  (unnamed, ``type`` ``via``) and the sites (named by site id, with their planned
  time), back to the access point; the track is the same path as one segment.
- ``sym``: the project's own neutral names (:data:`SYMBOLS`: "Sample site",
  "Reserve site", "Access point"), which a GPS that does not know them shows with
  its default mark; with ``[export] gpx_symbols = "none"`` no ``sym`` is written.

``<time>`` holds the *planned* time, in UTC as GPX 1.1 requires (its schema
says times are UTC), only where a planned time exists (primaries, the stops of
a route, a trip's departure and return). Planned times are part of the design,
so identical designs still give identical files.

:func:`day_gpx` builds the GPX of one field day (``days/``: see :mod:`.days`).
"""
from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import gpxpy.gpx

from ..model import AccessPoint, Design, Route, Visit
from ..version import __version__
from .table import day_numbers, ordered_visits, reserve_label

__all__ = ["FILE_NAME", "COORD_DECIMALS", "SYMBOLS", "SYMBOL_SETS", "Trip", "route_name", "trips",
           "stop_vertices", "build_gpx", "day_gpx", "write_gpx"]

FILE_NAME = "sites.gpx"
COORD_DECIMALS = 7
#: The project's own neutral symbol names, by role (``[export] gpx_symbols = "geosample"``).
SYMBOLS = {"primary": "Sample site", "reserve": "Reserve site", "access": "Access point"}
#: ``[export] gpx_symbols`` value -> symbol names by role (empty: no ``sym`` element).
SYMBOL_SETS = {"geosample": SYMBOLS, "none": {}}

# XML 1.0 forbids most control characters (XML 1.0, section 2.2).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def _text(s: str) -> str:
    return _NOT_XML.sub("", str(s))


def _utc(t: dt.datetime | None) -> dt.datetime | None:
    return None if t is None else t.astimezone(dt.timezone.utc)


def _when(v: Visit) -> str:
    t = v.planned_time
    if t is None:
        return v.visit_date.isoformat() if v.visit_date else "date not set"
    return t.strftime("%Y-%m-%d %H:%M") + " UTC" + t.strftime("%z")[:3] + ":" + t.strftime("%z")[3:]


def _description(v: Visit, day: int | None, label: str) -> str:
    if v.role == "primary":
        stop = f", stop {v.route_order}" if v.route_order is not None else ""
        return f"Stratum: {v.stratum}; primary; {_when(v)}; day {day}{stop}"
    return (f"Stratum: {v.stratum}; reserve {label} (rank {v.reserve_rank}; use only to replace a primary of this "
            "stratum, in rank order)")


def route_name(day: int, route: Route, trip: int, trips: int) -> str:
    """``"Day 3 2027-06-14"``, with ``" trip 2"`` when the day has several trips.

    Examples
    --------
    >>> r = Route(0, dt.date(2027, 6, 14), "", (), (), (), 0.0, None, None)
    >>> route_name(3, r, 1, 1), route_name(3, r, 2, 2)
    ('Day 3 2027-06-14', 'Day 3 2027-06-14 trip 2')
    """
    name = f"Day {day} {route.date.isoformat()}"
    return name + (f" trip {trip}" if trips > 1 else "")


@dataclass(frozen=True)
class Trip:
    """One route with its crew-day number, its trip number that day and its name."""

    route: Route
    day: int
    trip: int
    trips: int
    name: str


def trips(design: Design) -> list[Trip]:
    """Every route of the design as a :class:`Trip`, by date then departure."""
    visits = ordered_visits(design)
    days = day_numbers(visits)
    routes = sorted(design.schedule.routes, key=lambda r: (r.date, r.start is None, r.start or r.date,
                                                           r.day_index))
    per_date: dict[dt.date, list[Route]] = {}
    for r in routes:
        per_date.setdefault(r.date, []).append(r)
    out = []
    for date, rs in per_date.items():
        day = days.get(date) or (sorted(per_date).index(date) + 1)
        for k, r in enumerate(rs, start=1):
            out.append(Trip(r, day, k, len(rs), route_name(day, r, k, len(rs))))
    return out


def stop_vertices(route: Route, xy: dict[str, tuple[float, float]], tol_m: float = 0.05) -> dict[int, str]:
    """Path vertex index -> site id for the route's stops, found in order along ``route.coords_xy``.

    The itinerary's path passes exactly through each site; a stop not found
    (a hand-built route) is left out.

    Examples
    --------
    >>> r = Route(0, dt.date(2027, 6, 14), "", ("A", "B"), ((0, 0), (5, 5), (10, 0), (20, 0), (0, 0)), (), 0.0,
    ...           None, None)
    >>> stop_vertices(r, {"A": (10, 0), "B": (20, 0)})
    {2: 'A', 3: 'B'}
    """
    out: dict[int, str] = {}
    i = 1
    path = route.coords_xy
    for sid in route.site_ids:
        p = xy.get(sid)
        if p is None:
            continue
        for j in range(i, len(path)):
            if abs(path[j][0] - p[0]) <= tol_m and abs(path[j][1] - p[1]) <= tol_m:
                out[j] = sid
                i = j + 1
                break
    return out


def _point(cls, lat: float, lon: float, **kw):
    return cls(round(float(lat), COORD_DECIMALS), round(float(lon), COORD_DECIMALS), **kw)


def _route_description(route: Route) -> str:
    parts = [f"{len(route.site_ids)} sites", f"{route.length_m / 1000:.1f} km over water"]
    if route.start is not None and route.end is not None:
        parts.append(f"leave {route.start.strftime('%H:%M')}, back {route.end.strftime('%H:%M')}")
    parts.append("holding time met" if route.lab_deadline_ok else "HOLDING TIME NOT MET")
    return "; ".join(parts)


def _symbols(design: Design) -> dict[str, str]:
    choice = (design.settings.get("export") or {}).get("gpx_symbols", "geosample")
    return SYMBOL_SETS.get(choice, SYMBOLS)


def _waypoint(v: Visit, day: int | None, label: str, symbols: dict[str, str]) -> gpxpy.gpx.GPXWaypoint:
    return _point(gpxpy.gpx.GPXWaypoint, v.lat, v.lon, name=_text(v.site_id),
                  description=_text(_description(v, day, label)),
                  symbol=symbols.get(v.role) or None, type=_text(v.role),
                  time=_utc(v.planned_time) if v.role == "primary" else None)


def _ends(route: Route, access: AccessPoint | None) -> tuple[str, str]:
    if access is not None:
        return access.name, access.name
    return "Start", "End"


def _route_gpx(t: Trip, number: int, visits: dict[str, Visit], access: AccessPoint | None,
               symbols: dict[str, str]) -> gpxpy.gpx.GPXRoute:
    r = t.route
    rte = gpxpy.gpx.GPXRoute(name=_text(t.name), description=_text(_route_description(r)), number=number)
    stops = stop_vertices(r, {sid: (v.x, v.y) for sid, v in visits.items()})
    first, last = _ends(r, access)
    n = len(r.coords_lonlat)
    for j, (lon, lat) in enumerate(r.coords_lonlat):
        if j in stops:
            v = visits[stops[j]]
            p = _point(gpxpy.gpx.GPXRoutePoint, lat, lon, name=_text(v.site_id), time=_utc(v.planned_time),
                       symbol=symbols.get("primary") or None, type="stop")
        elif j == 0 or j == n - 1:
            p = _point(gpxpy.gpx.GPXRoutePoint, lat, lon, name=_text(first if j == 0 else last),
                       time=_utc(r.start if j == 0 else r.end), symbol=symbols.get("access") or None,
                       type="access point")
        else:
            p = _point(gpxpy.gpx.GPXRoutePoint, lat, lon, type="via")
        rte.points.append(p)
    return rte


def _track_gpx(t: Trip, number: int) -> gpxpy.gpx.GPXTrack:
    trk = gpxpy.gpx.GPXTrack(name=_text(t.name), description=_text(_route_description(t.route)))
    trk.number = number
    seg = gpxpy.gpx.GPXTrackSegment()
    for lon, lat in t.route.coords_lonlat:
        seg.points.append(_point(gpxpy.gpx.GPXTrackPoint, lat, lon))
    trk.segments.append(seg)
    return trk


def _document(design: Design, name: str, description: str, visits: Sequence[Visit], day_trips: Sequence[Trip],
              days: dict[dt.date, int]) -> gpxpy.gpx.GPX:
    symbols = _symbols(design)
    codes = {s.name: s.code for s in design.frame.strata}
    g = gpxpy.gpx.GPX()
    g.creator = f"geosample {__version__}"
    g.name = _text(name)
    g.description = _text(description)
    for v in visits:
        g.waypoints.append(_waypoint(v, days.get(v.visit_date) if v.visit_date else None,
                                     reserve_label(codes.get(v.stratum, ""), v.reserve_rank), symbols))
    by_id = {v.site_id: v for v in ordered_visits(design)}
    access = {a.name: a for a in design.frame.access}
    for k, t in enumerate(day_trips, start=1):
        g.routes.append(_route_gpx(t, k, by_id, access.get(t.route.access), symbols))
    for k, t in enumerate(day_trips, start=1):
        if t.route.coords_lonlat:
            g.tracks.append(_track_gpx(t, k))
    return g


def build_gpx(design: Design) -> gpxpy.gpx.GPX:
    """The GPX document (gpxpy objects) of the whole design (``sites.gpx``)."""
    visits = ordered_visits(design)
    return _document(design, design.survey.get("title") or "Sampling sites",
                     "Sites (primaries and ordered reserves) and crew routes over water of a randomised sampling "
                     "design", visits, trips(design), day_numbers(visits))


def day_gpx(design: Design, day: int, visits: Sequence[Visit], day_trips: Sequence[Trip]) -> gpxpy.gpx.GPX:
    """The GPX of one field day: its visits (stops in order, then reserves) and its trips."""
    date = day_trips[0].route.date if day_trips else next((v.visit_date for v in visits if v.visit_date), None)
    title = design.survey.get("title") or "Sampling sites"
    return _document(design, f"{title}: day {day} {date.isoformat() if date else ''}".strip(),
                     f"Field day {day}: the stops in visit order, the reserves of the day's strata in rank order, "
                     "and the route over water", visits, day_trips, {date: day} if date else {})


def to_xml(g: gpxpy.gpx.GPX) -> str:
    return g.to_xml(version="1.1")


def write_gpx(design: Design, path: str | Path) -> Path:
    """Write ``sites.gpx`` (GPX 1.1; see the module docstring).

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
    path.write_text(to_xml(build_gpx(design)), encoding="utf-8", newline="\n")
    return path
