"""A small hand-built Design for the exporter tests (no other stage is run).

An invented lake in UTM zone 16N (EPSG:32616) with an island, split into two
strata at a northing; a closed swimming area cut out of the south stratum; one
launch on the west shore; three primaries per stratum plus reserves; two field
days with visits (and one calendar day without), one route per day.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import math
from zoneinfo import ZoneInfo

import pyproj
from shapely.geometry import Polygon, box

from geosample.model import (
    AccessPoint,
    Allocation,
    Design,
    FieldDay,
    Frame,
    Removal,
    Route,
    Schedule,
    Site,
    SiteDraw,
    Stratum,
    Visit,
)

CRS = pyproj.CRS("EPSG:32616")
TZ = ZoneInfo("America/Chicago")
TO_LONLAT = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)

X0, Y0 = 430_000.0, 4_650_000.0
LAKE = Polygon(
    [(X0 - 2000, Y0 - 1400), (X0 + 1800, Y0 - 1500), (X0 + 2200, Y0 + 200), (X0 + 1500, Y0 + 1500),
     (X0 - 1200, Y0 + 1400), (X0 - 2300, Y0 + 300)],
    holes=[[(X0 + 300, Y0 + 500), (X0 + 700, Y0 + 500), (X0 + 700, Y0 + 800), (X0 + 300, Y0 + 800)]],
)
CLOSED = box(X0 + 800, Y0 - 1300, X0 + 1500, Y0 - 800)
LAUNCH_XY = (X0 - 2200, Y0 + 0.0)

# (id, stratum index, role, rank, x, y)
SITES = [
    ("NB-001", 0, "primary", 0, X0 - 1000, Y0 + 800),
    ("NB-002", 0, "primary", 0, X0 + 200, Y0 + 1100),
    ("NB-003", 0, "primary", 0, X0 + 1300, Y0 + 400),
    ("NB-004", 0, "reserve", 1, X0 - 300, Y0 + 300),
    ("NB-005", 0, "reserve", 2, X0 + 1000, Y0 + 1000),
    ("SB-001", 1, "primary", 0, X0 - 1200, Y0 - 600),
    ("SB-002", 1, "primary", 0, X0 + 100, Y0 - 1000),
    ("SB-003", 1, "primary", 0, X0 + 1700, Y0 - 300),
    ("SB-004", 1, "reserve", 1, X0 - 400, Y0 - 300),
]
# site id -> (date, hh:mm, route order)
VISITS = {
    "NB-001": (dt.date(2027, 6, 14), (9, 5), 1),
    "NB-002": (dt.date(2027, 6, 14), (9, 40), 2),
    "NB-003": (dt.date(2027, 6, 14), (10, 20), 3),
    "SB-001": (dt.date(2027, 6, 16), (13, 10), 1),
    "SB-002": (dt.date(2027, 6, 16), (13, 45), 2),
    "SB-003": (dt.date(2027, 6, 16), (14, 30), 3),
}
CALENDAR = (dt.date(2027, 6, 14), dt.date(2027, 6, 15), dt.date(2027, 6, 16))


def lonlat(x: float, y: float) -> tuple[float, float]:
    lon, lat = TO_LONLAT.transform(x, y)
    return float(lon), float(lat)


def _strata(names: tuple[str, str]) -> tuple[Stratum, ...]:
    north = LAKE.intersection(box(X0 - 5000, Y0, X0 + 5000, Y0 + 5000))
    south = LAKE.intersection(box(X0 - 5000, Y0 - 5000, X0 + 5000, Y0)).difference(CLOSED)
    total = north.area + south.area
    return (
        Stratum(names[0], "NB", north, north.area, north.area / total),
        Stratum(names[1], "SB", south, south.area, south.area / total),
    )


def _route(day_index: int, date: dt.date, ids: list[str], xy: dict, start: dt.datetime,
           end: dt.datetime) -> Route:
    path = [LAUNCH_XY] + [xy[i] for i in ids] + [LAUNCH_XY]
    length = sum(math.dist(a, b) for a, b in zip(path, path[1:]))
    return Route(
        day_index=day_index, date=date, access="West launch", site_ids=tuple(ids),
        coords_xy=tuple(path), coords_lonlat=tuple(lonlat(*p) for p in path), length_m=length,
        start=start, end=end, lab_deadline_ok=True,
    )


def build_design(names: tuple[str, str] = ("North basin", "South basin"), *, title: str = "Lake Verlin test survey",
                 draw_count: int = 1, confidence: float = 0.9, sides: str = "two") -> Design:
    """The test design; ``names`` renames the two strata (e.g. to test escaping)."""
    strata = _strata(names)
    lon_a, lat_a = lonlat(*LAUNCH_XY)
    access = (AccessPoint("West launch", LAUNCH_XY[0], LAUNCH_XY[1], lat_a, lon_a, 0.0),)
    sites, visits, xy = [], [], {}
    order = {0: 0, 1: 0}
    for sid, k, role, rank, x, y in SITES:
        lon, lat = lonlat(x, y)
        xy[sid] = (x, y)
        sites.append(Site(sid, names[k], role, rank, order[k], x, y, lat, lon))
        order[k] += 1
        kw = {}
        if sid in VISITS:
            date, (hh, mm), ro = VISITS[sid]
            kw = dict(visit_date=date, planned_time=dt.datetime(date.year, date.month, date.day, hh, mm, tzinfo=TZ),
                      day_index=CALENDAR.index(date), route_order=ro)
        visits.append(Visit(sid, names[k], role, rank, x, y, lat, lon, **kw))
    days = tuple(
        FieldDay(d, dt.datetime(d.year, d.month, d.day, 7, 0, tzinfo=TZ), dt.datetime(d.year, d.month, d.day, 16, 0,
                 tzinfo=TZ), temporal_stratum=f"{d.isocalendar().year}-W{d.isocalendar().week:02d}",
                 inclusion_p=2 / 3, drawn=d != CALENDAR[1])  # 2 of the week's 3 days drawn
        for d in CALENDAR
    )
    d1, d2 = CALENDAR[0], CALENDAR[2]
    routes = (
        _route(0, d1, ["NB-001", "NB-002", "NB-003"], xy, dt.datetime(2027, 6, 14, 8, 40, tzinfo=TZ),
               dt.datetime(2027, 6, 14, 11, 5, tzinfo=TZ)),
        _route(2, d2, ["SB-001", "SB-002", "SB-003"], xy, dt.datetime(2027, 6, 16, 12, 50, tzinfo=TZ),
               dt.datetime(2027, 6, 16, 15, 20, tzinfo=TZ)),
    )
    time_of_day = {
        names[0]: {"n": 3.0, "earliest_h": 9 + 5 / 60, "median_h": 9 + 40 / 60, "latest_h": 10 + 20 / 60,
                   "share_before_10": 2 / 3},
        names[1]: {"n": 3.0, "earliest_h": 13 + 10 / 60, "median_h": 13.75, "latest_h": 14.5, "share_before_10": 0.0},
    }
    schedule = Schedule(visits=tuple(visits), days=days, routes=routes,
                        travel_minutes_per_site={names[0]: 12.5, names[1]: 15.0}, time_of_day=time_of_day)
    closed_area = CLOSED.intersection(LAKE).area
    frame = Frame(
        crs=CRS, crs_reason="UTM zone 16N contains the water body; distances and areas in metres",
        water=LAKE, exclusions=CLOSED, strata=strata, water_area_m2=LAKE.area,
        removed=(Removal("exclude: closed.geojson", closed_area, 100 * closed_area / LAKE.area, "swimming area"),
                 Removal("reach_m", 0.0, 0.0, "every part of the water is within 4000 m of a launch")),
        access=access, warnings=("access point West launch moved 0 m to the water",),
    )
    alloc = Allocation(
        strata=names, n=(3, 3), total=6, method="proportional", bound="chebyshev", sides=sides,
        confidence=confidence, tolerance=40.0, error_bound=0.0938, achieved_tolerance=38.7,
        weights=(strata[0].weight, strata[1].weight), notes=("min_per_stratum = 2 applied to no stratum",),
    )
    draw = SiteDraw(sites=tuple(sites), method="balanced", reserve=0.5, spacing_m=100.0,
                    balance={names[0]: 0.041, names[1]: None})
    settings = {
        "survey": {"title": title, "parameter": "E. coli", "units": "MPN/100 mL", "statistic": "mean",
                   "criterion": 126, "timezone": "America/Chicago"},
        "area": {"water": "water.geojson", "exclude": ["closed.geojson"], "access": "access.geojson",
                 "reach_m": 4000},
        "size": {"tolerance": 40.0, "range": 80.0, "confidence": confidence, "bound": "chebyshev", "sides": sides,
                 "allocation": "proportional", "min_per_stratum": 2},
        "draw": {"method": "balanced", "reserve": 0.5, "spacing_m": 100, "seed": 20270601},
        "time": {"start": CALENDAR[0], "end": CALENDAR[-1], "days": ["mon", "tue", "wed"], "skip": [],
                 "window": ["07:00", "16:00"], "per_day": 8, "speed_kmh": 15, "minutes_on_site": 15,
                 "holding_h": 6, "lab_minutes": 40},
    }
    sizing = {
        "formula": "n >= (L/2)^2 / (a d^2)",
        "inputs": {"tolerance": 40.0, "range": 80.0, "confidence": confidence, "bound": "chebyshev",
                   "sides": sides, "allocation": "proportional", "min_per_stratum": 2, "n": None, "sd": None},
        "per_stratum": [{"name": s.name, "code": s.code, "weight": s.weight, "area_m2": s.area_m2, "n": 3,
                         "sd": None, "range": 80.0, "cost": None} for s in strata],
        "guarantee": "With 6 primary samples the chebyshev bound guarantees ... (test text).",
        "assumption": "Measurements lie within a range of L; sites are drawn independently of the values.",
        "statistic": "mean",
        "tolerance_factor": None,
    }
    return Design(settings=settings, frame=frame, allocation=alloc, draw=draw, schedule=schedule, sizing=sizing,
                  seed=20270601, seed_source="plan", draw_count=draw_count,
                  inputs={"water": {"path": "water.geojson", "sha256": "0" * 64}})


def with_two_trips(design: Design) -> Design:
    """The same design with the second day split into two trips (as the holding time can force)."""
    r = design.schedule.routes[1]
    xy = {v.site_id: (v.x, v.y) for v in design.schedule.visits}
    t1 = _route(r.day_index, r.date, list(r.site_ids[:2]), xy, r.start, r.start + dt.timedelta(hours=1, minutes=20))
    t2 = _route(r.day_index, r.date, list(r.site_ids[2:]), xy, r.start + dt.timedelta(hours=1, minutes=20), r.end)
    sched = dataclasses.replace(design.schedule, routes=(design.schedule.routes[0], t1, t2))
    return dataclasses.replace(design, schedule=sched)

