"""Tests for geosample.export: schedule.csv, sites.geojson, sites.gpx, map.html, report.html.

The design is built by hand (tests/fixtures_design.py). Files are checked with
reference readers: gpxpy and pyogrio (GDAL's GPX driver) for the GPX, pandas and
the csv module for the schedule, json, geopandas and pyproj for the GeoJSON,
html.parser for the HTML pages.
"""
from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import hashlib
import html
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import geopandas
import gpxpy
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import pytest
import shapely

from fixtures_design import CALENDAR, LAUNCH_XY, SITES, TZ, VISITS, build_design, with_two_trips
from geosample.export import PACKAGE_FILES, write_package
from geosample.export.gpx import write_gpx
from geosample.export.map import design_block, read_design_block, render_map, write_map
from geosample.export.report import claim_wording, render_report, report_context, write_report
from geosample.export.table import neutralise_formula, schedule_rows, write_schedule

# The pinned schedule.csv columns, copied from DEVELOPERS.md ("schedule.csv and manifest.json").
PINNED = ["site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "day", "day_inclusion_p",
          "route_order", "lat", "lon", "x", "y", "result", "qualifier", "sampled_at", "sampler", "notes",
          "replaced_by", "replacement_reason"]
XSS = "<script>alert(1)</script>"
ALL_IDS = [s[0] for s in SITES]
PRIMARY_IDS = [s[0] for s in SITES if s[2] == "primary"]
RESERVE_IDS = [s[0] for s in SITES if s[2] == "reserve"]
# Reference transform, built here rather than taken from the fixture or the code under test.
REF = pyproj.Transformer.from_crs("EPSG:32616", "EPSG:4326", always_xy=True)


@pytest.fixture(scope="module")
def design():
    return build_design()


@pytest.fixture(scope="module")
def package(design, tmp_path_factory):
    return write_package(design, tmp_path_factory.mktemp("pkg"))


# --------------------------------------------------------------------------- GPX
def test_gpx_parses_with_gpxpy_and_holds_every_site_and_one_route_per_trip(package, design):
    with open(package["sites.gpx"], encoding="utf-8") as fh:
        g = gpxpy.parse(fh)
    assert g.version == "1.1"
    assert sorted(w.name for w in g.waypoints) == sorted(ALL_IDS)
    assert len(g.routes) == len(design.schedule.routes) == 2
    # Day numbers count only days with visits: 2027-06-15 has none, so 2027-06-16 is day 2.
    assert [r.name for r in g.routes] == ["Day 1 2027-06-14", "Day 2 2027-06-16"]
    lon_a, lat_a = REF.transform(*LAUNCH_XY)
    for rte, ids in zip(g.routes, (["NB-001", "NB-002", "NB-003"], ["SB-001", "SB-002", "SB-003"])):
        names = [p.name for p in rte.points]
        assert names == ["West launch"] + ids + ["West launch"]
        for p in (rte.points[0], rte.points[-1]):
            assert p.latitude == pytest.approx(lat_a, abs=1e-6) and p.longitude == pytest.approx(lon_a, abs=1e-6)
    wpt = {w.name: w for w in g.waypoints}
    x, y = next((s[4], s[5]) for s in SITES if s[0] == "NB-002")
    lon, lat = REF.transform(x, y)
    assert wpt["NB-002"].latitude == pytest.approx(lat, abs=1e-6)
    assert wpt["NB-002"].longitude == pytest.approx(lon, abs=1e-6)
    assert "North basin" in wpt["NB-002"].description and "2027-06-14 09:40" in wpt["NB-002"].description
    assert "reserve NB-R2 (rank 2;" in wpt["NB-005"].description


def test_gpx_parses_with_pyogrio_layers(package):
    layers = {name for name, _ in pyogrio.list_layers(package["sites.gpx"])}
    assert {"waypoints", "routes"} <= layers
    wpts = pyogrio.read_dataframe(package["sites.gpx"], layer="waypoints")
    rtes = pyogrio.read_dataframe(package["sites.gpx"], layer="routes")
    assert sorted(wpts["name"]) == sorted(ALL_IDS)
    assert list(rtes["name"]) == ["Day 1 2027-06-14", "Day 2 2027-06-16"]
    assert wpts.crs.to_epsg() == 4326


def test_gpx_a_split_day_gives_one_route_per_trip(tmp_path):
    d = with_two_trips(build_design())
    write_gpx(d, tmp_path / "s.gpx")
    g = gpxpy.parse((tmp_path / "s.gpx").read_text(encoding="utf-8"))
    assert [r.name for r in g.routes] == ["Day 1 2027-06-14", "Day 2 2027-06-16 trip 1", "Day 2 2027-06-16 trip 2"]
    assert [len(r.points) for r in g.routes] == [5, 4, 3]  # launch + sites + launch
    assert len(pyogrio.read_dataframe(tmp_path / "s.gpx", layer="routes")) == 3


def _with_bend(design):
    """The first route with one bend added between the launch and its first stop (as a router's path has)."""
    r = design.schedule.routes[0]
    bend = (LAUNCH_XY[0] + 300.0, LAUNCH_XY[1] + 900.0)
    xy = (r.coords_xy[0], bend) + r.coords_xy[1:]
    ll = tuple(REF.transform(*p) for p in xy)
    r2 = dataclasses.replace(r, coords_xy=xy, coords_lonlat=ll)
    sched = dataclasses.replace(design.schedule, routes=(r2,) + design.schedule.routes[1:])
    return dataclasses.replace(design, schedule=sched), bend


def test_gpx_routes_and_tracks_follow_the_path_with_planned_times_in_utc(tmp_path):
    d, bend = _with_bend(build_design())
    write_gpx(d, tmp_path / "s.gpx")
    g = gpxpy.parse((tmp_path / "s.gpx").read_text(encoding="utf-8"))
    rte, trk = g.routes[0], g.tracks[0]
    # every vertex of the over-water path is a route point and a track point, in order
    path = [(round(lat, 6), round(lon, 6)) for lon, lat in d.schedule.routes[0].coords_lonlat]
    assert [(round(p.latitude, 6), round(p.longitude, 6)) for p in rte.points] == path
    assert [(round(p.latitude, 6), round(p.longitude, 6)) for p in trk.segments[0].points] == path
    lon_b, lat_b = REF.transform(*bend)
    via = rte.points[1]
    assert via.name is None and via.type == "via"
    assert via.latitude == pytest.approx(lat_b, abs=1e-6) and via.longitude == pytest.approx(lon_b, abs=1e-6)
    # planned times: 09:05 America/Chicago (CDT, UTC-5) is 14:05 UTC (GPX 1.1 schema: times in UTC)
    stop = next(p for p in rte.points if p.name == "NB-001")
    assert stop.time == dt.datetime(2027, 6, 14, 14, 5, tzinfo=dt.timezone.utc)
    assert "<time>2027-06-14T14:05:00Z</time>" in (tmp_path / "s.gpx").read_text(encoding="utf-8")
    wpt = {w.name: w for w in g.waypoints}
    assert wpt["NB-001"].time == dt.datetime(2027, 6, 14, 14, 5, tzinfo=dt.timezone.utc)
    assert wpt["NB-004"].time is None  # reserves have no planned time
    assert rte.points[0].time == dt.datetime(2027, 6, 14, 13, 40, tzinfo=dt.timezone.utc)  # leave 08:40 CDT
    assert {name for name, _ in pyogrio.list_layers(tmp_path / "s.gpx")} >= {"routes", "tracks", "route_points"}


@pytest.mark.parametrize("choice", ["geosample", "none"])
def test_gpx_symbols_are_the_projects_own_or_none(tmp_path, choice):
    d = build_design()
    d = dataclasses.replace(d, settings={**d.settings, "export": {"gpx_symbols": choice}})
    write_gpx(d, tmp_path / "s.gpx")
    text = (tmp_path / "s.gpx").read_text(encoding="utf-8")
    syms = set(re.findall(r"<sym>([^<]*)</sym>", text))
    if choice == "none":
        assert syms == set()
    else:
        assert syms == {"Sample site", "Reserve site", "Access point"}


# --------------------------------------------------------------------------- CSV
def test_csv_columns_order_encoding_and_line_endings(package):
    raw = package["schedule.csv"].read_bytes()
    assert not raw.startswith(b"\xef\xbb\xbf")
    assert b"\r\n" not in raw and raw.endswith(b"\n")
    header = raw.decode("utf-8").split("\n", 1)[0].split(",")
    assert header == PINNED


def test_csv_round_trips_with_pandas(package, design):
    df = pd.read_csv(package["schedule.csv"], dtype=str, keep_default_na=False)
    assert list(df.columns) == PINNED
    assert df.to_dict("records") == schedule_rows(design)
    assert list(df["site_id"]) == PRIMARY_IDS + RESERVE_IDS  # primaries by date and route order, then reserves
    num = pd.read_csv(package["schedule.csv"])
    for _, row in num.iterrows():
        lon, lat = REF.transform(row["x"], row["y"])
        assert row["lat"] == pytest.approx(lat, abs=2e-6) and row["lon"] == pytest.approx(lon, abs=2e-6)


def test_csv_times_dates_and_day_numbers(package):
    rows = list(csv.DictReader(open(package["schedule.csv"], encoding="utf-8", newline="")))
    by_id = {r["site_id"]: r for r in rows}
    visit_dates = sorted({d for d, _, _ in VISITS.values()})
    for sid, (date, (hh, mm), order) in VISITS.items():
        r = by_id[sid]
        t = dt.datetime.fromisoformat(r["planned_time"])
        assert t == dt.datetime(date.year, date.month, date.day, hh, mm, tzinfo=TZ)
        assert t.utcoffset() == dt.timedelta(hours=-5)  # CDT in June (IANA tz database via zoneinfo)
        assert r["planned_time"].endswith("-05:00")
        assert r["visit_date"] == date.isoformat()
        assert r["day"] == str(visit_dates.index(date) + 1)
        assert r["route_order"] == str(order)
        assert r["day_inclusion_p"] == "0.666666666667"  # the fixture's 2/3, 12 significant digits
    assert CALENDAR[1] not in visit_dates  # the day with no visits is not counted
    for sid in RESERVE_IDS:
        r = by_id[sid]
        assert r["role"] == "reserve"
        assert r["visit_date"] == r["planned_time"] == r["day"] == r["day_inclusion_p"] == r["route_order"] == ""
    for r in rows:
        assert r["result"] == r["qualifier"] == r["sampled_at"] == r["sampler"] == r["notes"] == ""
        assert re.fullmatch(r"-?\d+\.\d{6}", r["lat"]) and re.fullmatch(r"-?\d+\.\d{6}", r["lon"])
        assert re.fullmatch(r"\d+\.\d", r["x"]) and re.fullmatch(r"\d+\.\d", r["y"])


@pytest.mark.parametrize("name", ['=HYPERLINK("http://x","y")', "+1+2", "-2+3", "@SUM(A1)", "\tTab", "\rCR"])
def test_csv_neutralises_formulas_in_text_but_not_in_numbers(tmp_path, name):
    d = build_design((name, "South, \"quoted\" basin"))
    write_schedule(d, tmp_path / "s.csv")
    rows = list(csv.DictReader(open(tmp_path / "s.csv", encoding="utf-8", newline="")))
    north = [r for r in rows if r["site_id"].startswith("NB")]
    # A carriage return inside a cell is written as "\n" (the csv module quotes that; a lone CR it would not).
    assert all(r["stratum"] == "'" + name.replace("\r", "\n") for r in north)
    assert len(rows) == len(ALL_IDS)
    south = [r for r in rows if r["site_id"].startswith("SB")]
    assert all(r["stratum"] == 'South, "quoted" basin' for r in south)  # the csv module quoted it
    assert all(r["lon"].startswith("-87.") for r in rows)  # a negative longitude stays a number


def test_neutralise_formula_examples():
    # OWASP "CSV Injection": cells starting with = + - @ tab or CR (common practice).
    assert [neutralise_formula(s) for s in ("=1", "+1", "-1", "@1", "\t1", "\r1")] == \
        ["'=1", "'+1", "'-1", "'@1", "'\t1", "'\r1"]
    assert neutralise_formula("North basin") == "North basin"
    assert neutralise_formula("") == ""


# --------------------------------------------------------------------------- GeoJSON
def test_geojson_is_rfc7946_lon_lat(package):
    data = json.loads(package["sites.geojson"].read_text(encoding="utf-8"))
    assert data["type"] == "FeatureCollection"
    assert "crs" not in data  # RFC 7946 section 4 removed the crs member
    assert [f["properties"]["site_id"] for f in data["features"]] == PRIMARY_IDS + RESERVE_IDS
    for f in data["features"]:
        assert f["type"] == "Feature" and f["geometry"]["type"] == "Point"
        lon, lat = f["geometry"]["coordinates"]
        ref_lon, ref_lat = REF.transform(f["properties"]["x"], f["properties"]["y"])
        # RFC 7946 section 3.1.1: longitude first. Here lon ~ -87.8, lat ~ 42.0.
        assert lon == pytest.approx(ref_lon, abs=1e-6) and lat == pytest.approx(ref_lat, abs=1e-6)
        assert all(len(str(c).split(".")[1]) <= 7 for c in (lon, lat))
    props = {f["properties"]["site_id"]: f["properties"] for f in data["features"]}
    assert props["NB-004"]["visit_date"] is None and props["NB-004"]["route_order"] is None
    assert props["SB-002"]["planned_time"] == "2027-06-16T13:45:00-05:00"
    assert props["SB-002"]["route_order"] == 2


def test_geojson_reads_with_geopandas(package):
    gdf = geopandas.read_file(package["sites.geojson"])
    assert gdf.crs.to_epsg() == 4326
    assert sorted(gdf["site_id"]) == sorted(ALL_IDS)
    assert set(gdf["role"]) == {"primary", "reserve"}
    assert gdf.geometry.x.between(-88.0, -87.7).all() and gdf.geometry.y.between(41.9, 42.1).all()


# --------------------------------------------------------------------------- determinism
def _digests(files: dict[str, Path]) -> dict[str, str]:
    return {name: hashlib.sha256(Path(p).read_bytes()).hexdigest() for name, p in files.items()}


def test_package_writes_the_files_then_the_days(package):
    assert list(package)[:len(PACKAGE_FILES)] == list(PACKAGE_FILES)
    assert all(k.startswith("days/") for k in list(package)[len(PACKAGE_FILES):])
    assert all(Path(p).exists() and Path(p).stat().st_size > 0 for p in package.values())


def test_identical_designs_give_identical_bytes(tmp_path):
    # Two designs built separately (new folium elements, whose ids are random by default).
    a = _digests(write_package(build_design(), tmp_path / "a"))
    b = _digests(write_package(build_design(), tmp_path / "b"))
    assert a == b
    c = _digests(write_package(build_design(("North basin", "Other name")), tmp_path / "c"))
    assert all(c[n] != a[n] for n in PACKAGE_FILES)  # the hash does follow the content


# --------------------------------------------------------------------------- HTML
class _Tags(HTMLParser):
    """Collects start tags and their attributes, and the text inside #must-not."""

    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self._depth = 0
        self.must_not = ""
        self.text = ""

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if self._depth or a.get("id") == "must-not":
            self._depth += 1

    def handle_endtag(self, tag):
        if self._depth:
            self._depth -= 1

    def handle_data(self, data):
        self.text += data
        if self._depth:
            self.must_not += data


def _parse(text: str) -> _Tags:
    p = _Tags()
    p.feed(text)
    return p


def test_map_is_self_contained(package):
    text = package["map.html"].read_text(encoding="utf-8")
    tags = _parse(text).tags
    assert not [a for t, a in tags if t == "script" and a.get("src")]
    assert not [a for t, a in tags if t == "link"]
    # Outside the vendored Leaflet (whose attribution is a link, fetched only if clicked): no URL at all.
    ours = re.sub(r"<script>\n/\* @preserve.*?</script>", "", text, flags=re.S)
    assert len(ours) < len(text) - 100_000
    assert not re.search(r"""(src|href)\s*=\s*["']?https?:""", ours)
    assert not re.search(r"url\((?!data:|#)", text.split("<body>", 1)[0].replace("url(#default#VML)", ""))
    assert "Leaflet 1.9.4" in text and "jquery" not in text.lower() and "bootstrap" not in text.lower()


def test_map_content(package):
    text = package["map.html"].read_text(encoding="utf-8")
    data = read_design_block(text)
    assert data["format"] == "geosample-map-design/1"
    sites = {s["id"]: s for s in data["sites"]}
    assert sorted(sites) == sorted(ALL_IDS)
    for sid in PRIMARY_IDS:  # date, planned time and stop as the fixture states them
        date, (hh, mm), order = VISITS[sid]
        s = sites[sid]
        assert (s["date"], s["order"], s["role"]) == (date.isoformat(), order, "primary")
        assert s["planned_time"] == dt.datetime(date.year, date.month, date.day, hh, mm, tzinfo=TZ).isoformat()
        assert s["label"] == str(order)
        # Day numbers count only days with visits: 2027-06-15 has none, so 2027-06-16 is day 2.
        assert s["day"] == {dt.date(2027, 6, 14): 1, dt.date(2027, 6, 16): 2}[date]
    for sid, _, role, rank, x, y in SITES:
        lon, lat = REF.transform(x, y)
        assert sites[sid]["lat"] == pytest.approx(lat, abs=1e-6) and sites[sid]["lon"] == pytest.approx(lon, abs=1e-6)
    # Reserve labels: stratum code and rank, unique in the design (R1 exists in both strata).
    labels = {sid: sites[sid]["label"] for sid in RESERVE_IDS}
    assert labels == {"NB-004": "NB-R1", "NB-005": "NB-R2", "SB-004": "SB-R1"}
    assert [(d["day"], d["date"], d["sites"]) for d in data["days"]] == [(1, "2027-06-14", 3), (2, "2027-06-16", 3)]
    assert [(r["day"], r["name"], r["sites"]) for r in data["routes"]] == [
        (1, "Day 1 2027-06-14", ["NB-001", "NB-002", "NB-003"]), (2, "Day 2 2027-06-16", ["SB-001", "SB-002", "SB-003"])]
    assert [s["name"] for s in data["strata"]] == ["North basin", "South basin"]
    assert "Closed: no sampling" in text and "simplified for display" in text
    # The page holds no prebuilt popup per site: popups are built from the data when tapped.
    assert "bindPopup" not in text.split("<script>\n/* @preserve", 1)[0]
    assert "gs-popup" not in text[text.index('id="geosample-design"'):text.index("</script>", text.index(
        'id="geosample-design"'))]


def test_map_design_block_is_the_design_not_the_bytes(design):
    """Two renders give the same block; the block reads back with json (what verify compares)."""
    a, b = render_map(design), render_map(design)
    assert a == b
    assert read_design_block(a) == json.loads(json.dumps(design_block(design)))
    with pytest.raises(ValueError, match="geosample-design"):
        read_design_block("<html></html>")


def test_map_outlines_are_simplified_within_the_stated_tolerance(design):
    """Decoded outlines lie within the stated tolerance (plus 1e-5 degree rounding) of the frame's strata."""
    text = render_map(design)
    layers = json.loads(re.search(r'id="geosample-layers">(.*?)</script>', text, re.S).group(1))
    tol = layers["tolerance_m"]
    assert 0 < tol < 5  # a 4.5 km lake: about 1 m
    to_utm = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32616", always_xy=True)
    for stratum, polys in zip(design.frame.strata, layers["strata"]):
        for poly in polys:
            for ring in poly:
                lat = np.cumsum(ring[0::2]) / layers["scale"]
                lon = np.cumsum(ring[1::2]) / layers["scale"]
                x, y = to_utm.transform(lon, lat)
                d = shapely.distance(shapely.points(x, y), stratum.geometry.boundary)
                assert d.max() <= tol + 1.5  # 1e-5 degree is at most about 1.1 m


def test_map_many_lakes_stays_under_10_mb():
    """100,000 small lakes (about 2.2 million vertices): the outlines are simplified until the page fits."""
    rng = np.random.default_rng(3)
    n = 100_000
    g = int(np.ceil(np.sqrt(n)))
    cell = rng.permutation(g * g)[:n]
    cx = 500_000 + (cell % g) * 1000.0 + 500
    cy = 4_800_000 + (cell // g) * 1000.0 + 500
    lakes = shapely.buffer(shapely.points(cx, cy), rng.uniform(50, 400, n), quad_segs=5)
    water = shapely.MultiPolygon(list(lakes))
    d = build_design()
    stratum = dataclasses.replace(d.frame.strata[0], geometry=water, area_m2=water.area, weight=1.0)
    frame = dataclasses.replace(d.frame, water=water, exclusions=None, strata=(stratum,), water_area_m2=water.area,
                                access=())
    text = render_map(dataclasses.replace(d, frame=frame))
    layers = json.loads(re.search(r'id="geosample-layers">(.*?)</script>', text, re.S).group(1))
    assert len(text.encode()) <= 10 * 2**20
    assert layers["water"] == []  # the strata are the water: drawn once
    assert len(layers["strata"][0]) == n  # every lake still drawn
    assert f"to within {layers['tolerance_m']:.0f} m" in text


def test_map_basemap_is_an_overlay_off_by_default(design):
    text = render_map(design, tiles="https://tiles.invalid/{z}/{x}/{y}.png", attribution="Test tiles")
    options = json.loads(re.search(r'id="geosample-options">(.*?)</script>', text, re.S).group(1))
    assert options["tiles"] == "https://tiles.invalid/{z}/{x}/{y}.png" and options["attribution"] == "Test tiles"
    assert "tiles.invalid" not in render_map(design)
    # The page only lists the tile layer in the layer list (checked for requests in test_map_browser.py).
    assert "Basemap (needs a network)" in text


def test_report_sections_and_figures(package, design):
    text = package["report.html"].read_text(encoding="utf-8")
    ids = {a.get("id") for _, a in _parse(text).tags}
    assert {"why", "frame", "draw", "schedule", "routes", "claims", "must-not", "cautions"} <= ids
    plain = html.unescape(text)
    assert design.sizing["guarantee"] in plain
    assert design.sizing["formula"] in plain
    assert "chebyshev" in plain and "proportional" in plain
    assert "exclude: closed.geojson" in plain and "swimming area" in plain
    assert "EPSG:32616" in plain and "Why: UTM zone 16N contains the water body" in plain
    assert "20270601" in plain and "written in the plan file" in plain
    assert "Number of draws made for this plan: 1" in re.sub(r"<[^>]+>", "", plain)
    assert "Earlier draws exist" not in plain
    assert "Whitman et al. 2004" in plain and "70:4276" in plain
    assert "40 CFR 136.3" in plain and "9060 B" in plain and "2006/7/EC" in plain
    assert "life jacket" in plain and "gloves" in plain and "lightning" in plain
    assert "accredited laboratory" in plain and "does not certify" in plain
    assert "Day 2 2027-06-16" in plain
    # The north basin is sampled before 10:00 on 2 of 3 visits, the south never: the report says so.
    assert "67%" in plain and "0%" in plain and "far more often" in plain
    assert not [a for t, a in _parse(text).tags if t in ("script", "link", "img")]


def test_report_says_plainly_when_earlier_draws_exist():
    text = html.unescape(render_report(build_design(draw_count=3)))
    assert "Earlier draws exist" in text and "drawn 3 times" in text
    assert "defeats the randomisation" in text


def test_report_claims_wording():
    c = report_context(build_design(confidence=0.9))
    # Confidence as a long-run property of the procedure (Neyman's definition of a confidence interval).
    assert "contains the true mean at least 90% of the time" in c["claims"]["may"][0]
    assert "X ± D MPN/100 mL at the 90% confidence level" in c["claims"]["may"][0]
    one = claim_wording(build_design(sides="one"))
    assert "at most X + D" in one["may"][0]


def test_forbidden_claim_appears_only_as_a_must_not_example(package):
    parsed = _parse(package["report.html"].read_text(encoding="utf-8"))
    forbidden = "probability that the mean is below the criterion"
    assert parsed.text.count(forbidden) == 1
    assert forbidden in parsed.must_not


@pytest.mark.parametrize("writer", ["map", "report"])
def test_user_text_is_escaped(tmp_path, writer):
    d = build_design((XSS, "South & <b>co</b>"), title=f"Survey {XSS}")
    path = tmp_path / f"{writer}.html"
    (write_map if writer == "map" else write_report)(d, path)
    text = path.read_text(encoding="utf-8")
    assert XSS not in text
    assert "<b>co</b>" not in text
    assert html.escape(XSS) in text  # shown as text (legend, title, tables)
    assert not [a for t, a in _parse(text).tags if t == "script" and "alert" in str(a)]
    if writer == "map":
        # In the design block: JSON with < > & escaped, so it cannot close the script; the page shows it as text.
        assert "\\u003cscript\\u003ealert(1)\\u003c/script\\u003e" in text
        assert len(re.findall(r"<script\b", text)) == text.count("</script>") == 5
        assert read_design_block(text)["strata"][0]["name"] == XSS


def test_package_replaces_files_and_returns_paths(tmp_path, design):
    first = write_package(design, tmp_path)
    (tmp_path / "schedule.csv").write_text("edited", encoding="utf-8")
    second = write_package(design, tmp_path)
    assert first == second
    assert (tmp_path / "schedule.csv").read_text(encoding="utf-8").startswith("site_id,")


def test_rows_fail_clearly_on_naive_times():
    d = build_design()
    v = dataclasses.replace(d.schedule.visits[0], planned_time=dt.datetime(2027, 6, 14, 9, 5))
    sched = dataclasses.replace(d.schedule, visits=(v,) + d.schedule.visits[1:])
    with pytest.raises(ValueError, match="time zone"):
        schedule_rows(dataclasses.replace(d, schedule=sched))


def test_template_syntax_in_user_text_stays_text():
    # User text is data for the templates, never template source.
    d = build_design(("{{ 7*7 }}", "{% for x in y %}"), title="Survey {# not a comment #}")
    text = render_map(d)
    assert "<span>{{ 7*7 }} (3)</span>" in text  # legend, as written
    assert [s["name"] for s in read_design_block(text)["strata"]] == ["{{ 7*7 }}", "{% for x in y %}"]
    assert "<title>Survey {# not a comment #}</title>" in text
    report = render_report(d)
    assert "{{ 7*7 }}" in report and "{% for x in y %}" in report


def test_map_hours_to_the_lab_count_real_time_across_the_fall_back_hour():
    """2027-11-07 in America/Chicago: 00:30 CDT to 03:30 CST is 4 hours of real time (the clock
    goes back from 02:00 CDT to 01:00 CST; tz database rule, common knowledge), not the 3 a
    wall-clock subtraction gives."""
    import datetime as dt
    from zoneinfo import ZoneInfo

    from geosample.export.map import _route
    from geosample.model import Route

    tz = ZoneInfo("America/Chicago")
    first = dt.datetime(2027, 11, 7, 0, 30, tzinfo=tz)
    end = dt.datetime(2027, 11, 7, 3, 30, tzinfo=tz)
    r = Route(day_index=0, date=first.date(), access="Launch", site_ids=("A-001",), coords_xy=((0.0, 0.0), (1.0, 1.0)),
              coords_lonlat=((0.0, 0.0), (0.0, 0.0)), length_m=1.0, start=first, end=end, lab_deadline_ok=True,
              notes=())
    assert _route(r, "Day 1", 1, first, 30.0, 6.0)["first_to_lab_h"] == 4.5
