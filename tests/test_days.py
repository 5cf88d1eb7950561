"""The per-day field package (geosample/export/days.py, coords.py, svg.py; the day GPX from gpx.py).

Checked against readers and references outside the code under test: gpxpy and
pyogrio (GDAL's GPX driver) for the GPX files, the csv module for the CSV, pyproj
(transforms built here) for the coordinates, and the demo lake's own water layer
(read with pyogrio) for "every track segment lies on the water".
"""
from __future__ import annotations

import csv
import datetime as dt
import re

import gpxpy
import pyogrio
import pyproj
import pytest
import shapely
from shapely.geometry import LineString

from fixtures_design import SITES, VISITS, build_design
from geosample.export import write_package
from geosample.export.coords import ddm, utm, utm_band, utm_zone
from geosample.export.days import (EXTRA_COLUMNS, MAX_RESERVES_ON_SHEET, RESERVES_PER_STOP, field_days,
                                   render_sheet, reserves_on_sheet)
from geosample.export.svg import nice_length
from geosample.export.table import COLUMNS
from geosample.model import Visit

XSS = "<script>alert(1)</script>"
TO_LL = pyproj.Transformer.from_crs("EPSG:32616", "EPSG:4326", always_xy=True)


@pytest.fixture(scope="module")
def package(tmp_path_factory):
    return write_package(build_design(), tmp_path_factory.mktemp("pkg"))


def _day_files(package, ext):
    return sorted((k, p) for k, p in package.items() if k.startswith("days/") and k.endswith(ext))


# --------------------------------------------------------------------------- coordinates
def test_ddm_worked_example():
    # 46.052797 deg = 46 deg + 0.052797 * 60 = 3.16782 min; 97.561661 deg W = 97 deg 33.69966 min W (by hand)
    assert ddm(46.052797, -97.561661) == ("46°03.168' N", "097°33.700' W")
    assert ddm(-33.8688, 151.2093) == ("33°52.128' S", "151°12.558' E")
    assert ddm(10.9999999, 0.0)[0] == "11°00.000' N"  # rounding carries into the degrees


def test_utm_zone_and_band_rules():
    # 6-degree zones from 180 W; band letters C..X without I and O, 8 degrees from 80 S
    # (the UTM grid as published by the US NGA; common practice). Norway 32V and Svalbard exceptions.
    assert utm_zone(46.05, -97.56) == 14 and utm_band(46.05) == "T"
    assert utm_zone(-33.87, 151.21) == 56 and utm_band(-33.87) == "H"
    assert utm_zone(60.0, 4.0) == 32  # would be 31 without the exception
    assert utm_zone(78.0, 8.0) == 31 and utm_zone(78.0, 10.0) == 33
    assert utm_band(83.9) == "X" and utm_band(-79.9) == "C"


@pytest.mark.parametrize("lat, lon", [(46.052797, -97.561661), (-33.8688, 151.2093), (0.5, -0.5)])
def test_utm_matches_pyproj_inverse(lat, lon):
    u = utm(lat, lon)
    back = pyproj.Transformer.from_crs(f"EPSG:{u.epsg}", "EPSG:4326", always_xy=True)
    blon, blat = back.transform(u.easting, u.northing)
    assert (blat, blon) == pytest.approx((lat, lon), abs=1e-9)
    assert u.epsg == (32600 if lat >= 0 else 32700) + u.zone


def test_nice_scale_lengths():
    assert [nice_length(x) for x in (730, 1999, 0.3, 5000)] == [500, 1000, 0.2, 5000]


# --------------------------------------------------------------------------- files
def test_one_gpx_csv_and_sheet_per_field_day(package):
    names = sorted(k for k in package if k.startswith("days/"))
    # two dates with visits; 2027-06-15 has none, so 2027-06-16 is day 2
    assert names == ["days/day-01-2027-06-14.csv", "days/day-01-2027-06-14.gpx", "days/day-01-2027-06-14.html",
                     "days/day-02-2027-06-16.csv", "days/day-02-2027-06-16.gpx", "days/day-02-2027-06-16.html"]
    assert all(p.is_file() for p in package.values())


def _csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_day_csv_rows_columns_and_coordinates(package):
    (_, p1), (_, p2) = _day_files(package, ".csv")
    rows = _csv(p1)
    assert list(rows[0]) == list(COLUMNS) + list(EXTRA_COLUMNS)
    # stops in route order, then the reserves of the day's strata (North basin only) in rank order
    assert [r["site_id"] for r in rows] == ["NB-001", "NB-002", "NB-003", "NB-004", "NB-005"]
    assert [r["route_order"] for r in rows] == ["1", "2", "3", "", ""]
    assert [r["site_id"] for r in _csv(p2)] == ["SB-001", "SB-002", "SB-003", "SB-004"]
    xy = {s[0]: (s[4], s[5]) for s in SITES}
    for r in rows:
        lon, lat = TO_LL.transform(*xy[r["site_id"]])
        m = re.fullmatch(r"(\d+)°(\d+\.\d+)' ([NS])", r["lat_dm"])
        assert (int(m[1]) + float(m[2]) / 60) * (1 if m[3] == "N" else -1) == pytest.approx(lat, abs=2e-5)
        m = re.fullmatch(r"(\d+)°(\d+\.\d+)' ([EW])", r["lon_dm"])
        assert (int(m[1]) + float(m[2]) / 60) * (1 if m[3] == "E" else -1) == pytest.approx(lon, abs=2e-5)
        # the fixture's frame is UTM 16N (EPSG:32616), the sites' own zone: easting, northing = x, y
        zone, e, _, n, _ = r["utm"].split()
        assert zone == "16T"
        assert (float(e), float(n)) == pytest.approx(xy[r["site_id"]], abs=0.6)


def test_day_gpx_has_stops_then_reserves_and_a_track_per_trip(package):
    (_, p1), _ = _day_files(package, ".gpx")
    g = gpxpy.parse(p1.read_text(encoding="utf-8"))
    assert [w.name for w in g.waypoints] == ["NB-001", "NB-002", "NB-003", "NB-004", "NB-005"]
    assert [r.name for r in g.routes] == ["Day 1 2027-06-14"] and [t.name for t in g.tracks] == ["Day 1 2027-06-14"]
    h, m = VISITS["NB-002"][1]
    assert g.waypoints[1].time == dt.datetime(2027, 6, 14, h + 5, m, tzinfo=dt.timezone.utc)  # CDT is UTC-5
    assert {"waypoints", "routes", "tracks"} <= {n for n, _ in pyogrio.list_layers(p1)}


def test_sheet_content(package):
    (_, p1), _ = _day_files(package, ".html")
    text = p1.read_text(encoding="utf-8")
    for needle in ("Day 1", "2027-06-14", "Monday", "07:00 to 16:00", "West launch", "09:40", "NB-R1", "NB-R2",
                   "16T 430200 E", "Crew", "Sampled at", "Result", "Qual.", "Notes", "<svg", "local regulations",
                   "safety plan", "replaced_by"):
        assert needle in text, needle
    assert "SB-R1" not in text  # only the reserves of the day's strata
    assert not re.search(r"""(src|href)=["']?(https?:)?//""", text)  # nothing fetched from a network
    assert 'href="../map.html#day=1"' in text


def test_sheet_escapes_user_text(tmp_path):
    d = build_design((XSS, "South basin"), title=XSS)
    day = field_days(d)[0]
    text = render_sheet(d, day)
    assert XSS not in text and "&lt;script&gt;" in text


def test_reserves_on_sheet_take_turns_between_strata():
    rs = tuple(Visit(f"{c}-{k:02d}", c, "reserve", k, 0, 0, 0, 0) for c in "ABC" for k in range(1, 20))
    shown = reserves_on_sheet(rs, 6)
    room = MAX_RESERVES_ON_SHEET - RESERVES_PER_STOP * 6
    assert len(shown) == room
    for c in "ABC":  # the lowest ranks of each stratum, in order
        ranks = [v.reserve_rank for v in shown if v.stratum == c]
        assert ranks == list(range(1, len(ranks) + 1)) and abs(len(ranks) - room / 3) <= 1
    assert reserves_on_sheet(rs[:5], 6) == rs[:5]


def test_day_files_are_identical_for_identical_designs(tmp_path):
    a = write_package(build_design(), tmp_path / "a")
    b = write_package(build_design(), tmp_path / "b")
    for k in a:
        if k.startswith("days/"):
            assert a[k].read_bytes() == b[k].read_bytes(), k


# --------------------------------------------------------------------------- the demo lake (two islands)
@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from geosample.workflow import run_demo

    out = tmp_path_factory.mktemp("demo") / "design"
    run_demo(out)
    return out


def _water(demo, epsg):
    w = pyogrio.read_dataframe(demo / "inputs" / "water.geojson").to_crs(epsg)
    return shapely.union_all(w.geometry.values)


def _segments(gpx_path, to_xy):
    g = gpxpy.parse(gpx_path.read_text(encoding="utf-8"))
    for trk in g.tracks:
        for seg in trk.segments:
            xy = [to_xy.transform(p.longitude, p.latitude) for p in seg.points]
            yield from ((trk.name, a, b) for a, b in zip(xy, xy[1:]))


def test_every_day_track_segment_lies_on_the_demo_lakes_water(demo):
    import json

    manifest = json.loads((demo / "manifest.json").read_text(encoding="utf-8"))
    epsg = manifest["crs"]["epsg"]
    water = _water(demo, epsg)
    assert len(water.interiors if water.geom_type == "Polygon" else
               [r for p in water.geoms for r in p.interiors]) >= 2  # the demo lake has two islands
    tolerant = water.buffer(3.0)  # a few metres: GPX coordinates are rounded to 1e-7 degree
    to_xy = pyproj.Transformer.from_crs("EPSG:4326", f"EPSG:{epsg}", always_xy=True)
    days = sorted((demo / "days").glob("*.gpx"))
    assert len(days) == 16 and all(f"days/{p.name}" in manifest["outputs"] for p in days)
    n = 0
    for p in days:
        for name, a, b in _segments(p, to_xy):
            assert tolerant.contains(LineString([a, b])), f"{p.name} {name}: segment {a} -> {b} leaves the water"
            n += 1
    assert n > 100
    # sites.gpx too, routes and tracks
    for name, a, b in _segments(demo / "sites.gpx", to_xy):
        assert tolerant.contains(LineString([a, b])), name
    g = gpxpy.parse((demo / "sites.gpx").read_text(encoding="utf-8"))
    for r in g.routes:
        xy = [to_xy.transform(q.longitude, q.latitude) for q in r.points]
        assert tolerant.contains(LineString(xy)), r.name
    # sites.gpkg's routes layer (frame CRS) too
    routes = pyogrio.read_dataframe(demo / "sites.gpkg", layer="routes")
    assert len(routes) == 16 and all(tolerant.contains(g) for g in routes.geometry)
    # the check can fail: straight lines between the stops cross an island on some day
    crossing = 0
    for r in g.routes:
        named = [to_xy.transform(q.longitude, q.latitude) for q in r.points if q.name]
        if LineString(named).difference(water).length > 10:
            crossing += 1
    assert crossing >= 1
