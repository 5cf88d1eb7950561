"""The sites and day routes for a GPS unit: ``sites.gpx`` (GPX 1.1, written with gpxpy).

- One waypoint per site, primaries and reserves, in the order of
  ``schedule.csv``: ``name`` is the site id, ``desc`` gives the stratum, the
  role, the planned date and time (primaries) or the reserve rank (reserves),
  ``type`` is the role, ``sym`` a common GPS symbol name (a blue flag for
  primaries, a green flag for reserves, common practice).
- One route per crew trip (a field day split by the holding time has several
  trips), named ``"Day 3 2027-06-14"`` (``"... trip 2"`` for later trips): the
  access point, the sites in route order, the access point again. A GPS unit
  navigates route points, so the route holds the stops, not the vertices of
  the over-water path (the map shows that path).

No ``<time>`` is written: GPX times are when a point was recorded, not when it
is planned, and leaving them out keeps the file identical for identical designs.
"""
from __future__ import annotations

import re
from pathlib import Path

import gpxpy.gpx

from ..model import Design, Route, Visit
from ..version import __version__
from .table import day_numbers, ordered_visits

__all__ = ["FILE_NAME", "COORD_DECIMALS", "SYMBOLS", "route_name", "build_gpx", "write_gpx"]

FILE_NAME = "sites.gpx"
COORD_DECIMALS = 7
#: Waypoint symbol by role (names most GPS units know; common practice).
SYMBOLS = {"primary": "Flag, Blue", "reserve": "Flag, Green"}

# XML 1.0 forbids most control characters (XML 1.0, section 2.2).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def _text(s: str) -> str:
    return _NOT_XML.sub("", str(s))


def _when(v: Visit) -> str:
    t = v.planned_time
    if t is None:
        return v.visit_date.isoformat() if v.visit_date else "date not set"
    return t.strftime("%Y-%m-%d %H:%M") + " UTC" + t.strftime("%z")[:3] + ":" + t.strftime("%z")[3:]


def _description(v: Visit, day: int | None) -> str:
    if v.role == "primary":
        stop = f", stop {v.route_order}" if v.route_order is not None else ""
        return f"Stratum: {v.stratum}; primary; {_when(v)}; day {day}{stop}"
    return (f"Stratum: {v.stratum}; reserve {v.reserve_rank} (use only to replace a primary of this "
            "stratum, in rank order)")


def route_name(day: int, route: Route, trip: int, trips: int) -> str:
    """``"Day 3 2027-06-14"``, with ``" trip 2"`` when the day has several trips.

    Examples
    --------
    >>> import datetime as dt
    >>> r = Route(0, dt.date(2027, 6, 14), "", (), (), (), 0.0, None, None)
    >>> route_name(3, r, 1, 1), route_name(3, r, 2, 2)
    ('Day 3 2027-06-14', 'Day 3 2027-06-14 trip 2')
    """
    name = f"Day {day} {route.date.isoformat()}"
    return name + (f" trip {trip}" if trips > 1 else "")


def _point(cls, lat: float, lon: float, **kw):
    return cls(round(float(lat), COORD_DECIMALS), round(float(lon), COORD_DECIMALS), **kw)


def _route_description(route: Route) -> str:
    parts = [f"{len(route.site_ids)} sites", f"{route.length_m / 1000:.1f} km over water"]
    if route.start is not None and route.end is not None:
        parts.append(f"leave {route.start.strftime('%H:%M')}, back {route.end.strftime('%H:%M')}")
    parts.append("holding time met" if route.lab_deadline_ok else "HOLDING TIME NOT MET")
    return "; ".join(parts)


def build_gpx(design: Design) -> gpxpy.gpx.GPX:
    """The GPX document (gpxpy objects) for ``design``.

    Parameters
    ----------
    design : Design

    Returns
    -------
    gpxpy.gpx.GPX
    """
    g = gpxpy.gpx.GPX()
    g.creator = f"geosample {__version__}"
    g.name = _text(design.survey.get("title") or "Sampling sites")
    g.description = _text("Sites (primaries and ordered reserves) and crew routes of a randomised sampling design")
    visits = ordered_visits(design)
    days = day_numbers(visits)
    by_id = {v.site_id: v for v in visits}
    for v in visits:
        g.waypoints.append(_point(
            gpxpy.gpx.GPXWaypoint, v.lat, v.lon, name=_text(v.site_id),
            description=_text(_description(v, days.get(v.visit_date) if v.visit_date else None)),
            symbol=SYMBOLS.get(v.role, SYMBOLS["primary"]), type=_text(v.role),
        ))
    access = {a.name: a for a in design.frame.access}
    routes = sorted(design.schedule.routes, key=lambda r: (r.date, r.start is None, r.start or r.date))
    per_date: dict = {}
    for r in routes:
        per_date.setdefault(r.date, []).append(r)
    number = 0
    for date, trips in per_date.items():
        day = days.get(date) or (sorted(per_date).index(date) + 1)
        for k, r in enumerate(trips, start=1):
            number += 1
            rte = gpxpy.gpx.GPXRoute(name=_text(route_name(day, r, k, len(trips))),
                                     description=_text(_route_description(r)), number=number)
            a = access.get(r.access)
            start = _access_point(a, r, 0)
            if start is not None:
                rte.points.append(start)
            for sid in r.site_ids:
                v = by_id.get(sid)
                if v is not None:
                    rte.points.append(_point(gpxpy.gpx.GPXRoutePoint, v.lat, v.lon, name=_text(sid)))
            end = _access_point(a, r, -1)
            if end is not None:
                rte.points.append(end)
            g.routes.append(rte)
    return g


def _access_point(a, route: Route, end: int):
    """The route's access point; without one, the first/last vertex of its path (if any)."""
    if a is not None:
        return _point(gpxpy.gpx.GPXRoutePoint, a.lat, a.lon, name=_text(a.name))
    if route.coords_lonlat:
        lon, lat = route.coords_lonlat[end]
        return _point(gpxpy.gpx.GPXRoutePoint, lat, lon, name="Start" if end == 0 else "End")
    return None


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
    path.write_text(build_gpx(design).to_xml(version="1.1"), encoding="utf-8", newline="\n")
    return path
