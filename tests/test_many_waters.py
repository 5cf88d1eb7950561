"""A regional frame of many water bodies: 300 invented lakes in one layer.

Checks the frame (area = the sum of the lakes' areas), the balanced and grts draws
over the whole region (every site in water, sites shared between lakes in
proportion to area), ``strata = "water-bodies"``, access points on a many-lake
frame, and ``geosample plan`` end to end on a 300-lake GeoJSON.
"""
from __future__ import annotations

import csv
import json

import geopandas
import numpy as np
import pyproj
import pytest
import scipy.stats
import shapely

from geosample.design import allocation_from_plan
from geosample.errors import InfeasibleError, LayerError, SettingError
from geosample.geometry import build_frame
from geosample.plan import load_plan
from geosample.randomizer.space import draw_sites
from geosample.stats.sizing import allocate

X0, Y0 = 500_000.0, 4_800_000.0  # UTM 16N, an invented lake district
N_LAKES = 300


def lake_circles(n: int = N_LAKES, seed: int = 7) -> list[shapely.Polygon]:
    """``n`` non-overlapping round lakes (radius 40-400 m) on a jittered 1 km grid, from a fixed seed."""
    rng = np.random.default_rng(seed)
    g = int(np.ceil(np.sqrt(n)))
    cell = rng.permutation(g * g)[:n]
    cx = X0 + (cell % g) * 1000.0 + 500 + rng.uniform(-60, 60, n)
    cy = Y0 + (cell // g) * 1000.0 + 500 + rng.uniform(-60, 60, n)
    r = np.exp(rng.uniform(np.log(40), np.log(400), n))
    return list(shapely.buffer(shapely.points(cx, cy), r, quad_segs=8))


@pytest.fixture(scope="module")
def lakes():
    return lake_circles()


@pytest.fixture(scope="module")
def layer(lakes):
    return geopandas.GeoDataFrame({"name": [f"Lake {i + 1}" for i in range(len(lakes))]}, geometry=lakes,
                                  crs=32616)


@pytest.fixture(scope="module")
def frame(layer):
    return build_frame(layer)


def test_the_synthetic_lakes_do_not_overlap(lakes):
    # the fixture's own premise, checked with shapely directly
    left, right = shapely.STRtree(lakes).query(lakes, predicate="intersects")
    assert np.all(left == right) and len(lakes) == N_LAKES


def test_frame_area_is_the_sum_of_the_lake_areas(frame, lakes):
    assert frame.crs.equals(pyproj.CRS(32616))
    expected = sum(p.area for p in lakes)  # shapely areas, computed here
    assert frame.water_area_m2 == pytest.approx(expected, rel=1e-9)
    assert frame.area_m2 == pytest.approx(expected, rel=1e-9)
    assert shapely.get_num_geometries(frame.water) == N_LAKES
    assert frame.water.is_valid


def test_touching_lakes_are_merged_by_a_union():
    # two boxes sharing an edge plus 70 separate ones: the layer is not disjoint, so the union merges the pair
    boxes = [shapely.box(X0, Y0, X0 + 100, Y0 + 100), shapely.box(X0 + 100, Y0, X0 + 200, Y0 + 100)]
    boxes += [shapely.box(X0 + 1000 * i, Y0 + 1000, X0 + 1000 * i + 50, Y0 + 1050) for i in range(70)]
    f = build_frame(geopandas.GeoDataFrame(geometry=boxes, crs=32616))
    assert shapely.get_num_geometries(f.water) == 71
    assert f.water_area_m2 == pytest.approx(20_000 + 70 * 2500, rel=1e-12)


def _lake_of(lakes, xy):
    tree = shapely.STRtree(lakes)
    pts = shapely.points(xy)
    ip, il = tree.query(pts, predicate="within")
    return ip, il


@pytest.mark.parametrize("method", ["simple", "balanced", "grts"])
def test_sites_lie_in_water_and_follow_area_shares(frame, lakes, method):
    n = 1000
    alloc = allocate([1.0], strata=[frame.strata[0].name], n=n, method="proportional")
    draw = draw_sites(frame, alloc, method=method, reserve=1.0, seed=20270601, measure_balance=False)
    xy = np.array([[s.x, s.y] for s in draw.sites])
    assert len(xy) == 2 * n
    ip, il = _lake_of(lakes, xy)
    assert sorted(ip) == list(range(len(xy)))  # every site inside exactly one lake
    # Chi-square over four size classes (quartiles of lake area): observed sites per class against
    # 2n x the class's share of the total area. scipy.stats.chisquare is the reference; false-alarm
    # rate 0.1 % for independent uniform points (simple); the balanced and grts draws spread points
    # more evenly than independent ones, which makes the test conservative for them.
    areas = np.array([p.area for p in lakes])
    cls = np.digitize(areas, np.quantile(areas, [0.25, 0.5, 0.75]))
    observed = np.bincount(cls[il], minlength=4)
    expected = len(xy) * np.bincount(cls, weights=areas, minlength=4) / areas.sum()
    assert scipy.stats.chisquare(observed, expected).pvalue > 1e-3


def test_water_body_strata_one_per_lake(layer, lakes):
    f = build_frame(layer, strata="water-bodies", name_field="name")
    assert [s.name for s in f.strata] == [f"Lake {i + 1}" for i in range(N_LAKES)]
    assert len({s.code for s in f.strata}) == N_LAKES
    for s, p in zip(f.strata, lakes):
        assert s.area_m2 == pytest.approx(p.area, rel=1e-9)
    assert sum(s.weight for s in f.strata) == pytest.approx(1.0, rel=1e-12)
    alloc = allocate([s.weight for s in f.strata], strata=[s.name for s in f.strata], n=2 * N_LAKES,
                     method="equal", min_per_stratum=2)
    draw = draw_sites(f, alloc, method="grts", reserve=0, seed=3, measure_balance=False)
    by = {s.name: p for s, p in zip(f.strata, lakes)}
    assert all(by[site.stratum].covers(shapely.Point(site.x, site.y)) for site in draw.sites)


def test_water_body_strata_unnamed_and_clipped_by_an_exclusion(lakes):
    layer = geopandas.GeoDataFrame(geometry=lakes[:80], crs=32616)
    cut = lakes[5].centroid.buffer(5000).intersection(shapely.box(lakes[5].centroid.x, 0, 1e7, 1e8))
    f = build_frame(layer, strata="water-bodies",
                    exclude=[("east half", geopandas.GeoDataFrame(geometry=[cut], crs=32616))])
    names = [s.name for s in f.strata]
    assert names[0] == "Water body 1" and all(n.startswith("Water body ") for n in names)
    # each lake's stratum is what the exclusion left of it, computed with shapely here
    left = {f"Water body {i + 1}": p.difference(cut).area for i, p in enumerate(lakes[:80])}
    for s in f.strata:
        assert s.area_m2 == pytest.approx(left[s.name], rel=1e-9)
    assert sum(s.area_m2 for s in f.strata) == pytest.approx(f.area_m2, rel=1e-9)


def test_unknown_name_field_is_a_layer_error(layer):
    with pytest.raises(LayerError, match="name_field.*'name'"):
        build_frame(layer, strata="water-bodies", name_field="lake_name")


def test_access_points_on_many_lakes_need_reach(layer, lakes):
    access = geopandas.GeoDataFrame({"name": ["Launch A", "Launch B"]},
                                    geometry=[lakes[0].centroid, lakes[1].centroid], crs=32616)
    with pytest.raises(SettingError, match="reach_m.*300 separate water bodies.*only 2"):
        build_frame(layer, access=access)
    f = build_frame(layer, access=access, reach_m=100_000)
    # over-water reach cannot leave a lake: the frame is the two lakes with launches
    assert f.area_m2 == pytest.approx(lakes[0].area + lakes[1].area, rel=1e-6)
    assert shapely.get_num_geometries(f.router.water) == 2


def _write_plan(tmp_path, lakes, **area):
    water = geopandas.GeoDataFrame({"name": [f"Lake {i + 1}" for i in range(len(lakes))]}, geometry=lakes,
                                   crs=32616).to_crs(4326)
    water.to_file(tmp_path / "lakes.geojson", driver="GeoJSON")
    extra = "".join(f"{k} = {json.dumps(v)}\n" for k, v in area.items())
    text = f"""
[survey]
title = "Invented lake district survey"
parameter = "E. coli"
units = "MPN/100 mL"
timezone = "America/Chicago"

[area]
water = "lakes.geojson"
{extra}
[size]
tolerance = 16
range = 80
confidence = 0.90
n = 40

[draw]
method = "grts"
reserve = 0.5
seed = 11

[time]
start = 2027-06-01
end = 2027-07-31
window = ["08:00", "16:00"]
per_day = 8
"""
    (tmp_path / "plan.toml").write_text(text, encoding="utf-8")
    return tmp_path / "plan.toml"


def test_geosample_plan_runs_on_a_300_lake_layer(tmp_path, lakes):
    from geosample.workflow import run_plan

    plan = _write_plan(tmp_path, lakes)
    out = tmp_path / "out"
    run_plan(plan, out, record=False)
    rows = list(csv.DictReader(open(out / "schedule.csv", encoding="utf-8")))
    assert sum(r["role"] == "primary" for r in rows) == 40 and sum(r["role"] == "reserve" for r in rows) == 20
    crs = pyproj.CRS.from_wkt(json.load(open(out / "manifest.json"))["crs"]["wkt"])
    water = geopandas.GeoSeries(lakes, crs=32616).to_crs(crs)
    region = shapely.multipolygons(list(water.values))
    xy = np.array([[float(r["x"]), float(r["y"])] for r in rows])
    assert shapely.contains_xy(region, xy[:, 0], xy[:, 1]).all()
    assert (out / "map.html").exists() and (out / "report.html").exists()


def test_water_body_strata_minimum_that_would_explode_the_total_is_refused(tmp_path, lakes):
    plan = load_plan(_write_plan(tmp_path, lakes, strata="water-bodies", name_field="name"))
    layer = geopandas.GeoDataFrame({"name": [f"Lake {i + 1}" for i in range(N_LAKES)]}, geometry=lakes, crs=32616)
    f = build_frame(layer, strata="water-bodies", name_field="name")
    with pytest.raises(InfeasibleError, match=r"300 strata.*min_per_stratum = 2.*600 primary samples.*size\.n = 40"):
        allocation_from_plan(plan, f)


def test_water_body_strata_minimum_refused_when_the_bound_sizes_the_total(tmp_path, lakes):
    text = _write_plan(tmp_path, lakes, strata="water-bodies").read_text().replace("n = 40\n", "")
    (tmp_path / "plan.toml").write_text(text)
    plan = load_plan(tmp_path / "plan.toml")
    f = build_frame(geopandas.GeoDataFrame(geometry=lakes, crs=32616), strata="water-bodies")
    # Chebyshev: n >= sigma^2 / (D^2 alpha) with sigma = L/2 = 40, D = 16, alpha = 0.10 -> 62.5 -> 63
    # (Chebyshev's inequality, CHECKS.md style; computed here)
    with pytest.raises(InfeasibleError, match=r"600 primary samples, more than the 63 samples the chebyshev"):
        allocation_from_plan(plan, f)


def test_geosample_plan_with_water_body_strata(tmp_path, lakes):
    from geosample.workflow import run_plan

    plan = _write_plan(tmp_path, lakes[:12], strata="water-bodies", name_field="name")
    run_plan(plan, tmp_path / "out", record=False)
    rows = list(csv.DictReader(open(tmp_path / "out" / "schedule.csv", encoding="utf-8")))
    prim = [r for r in rows if r["role"] == "primary"]
    assert len(prim) == 40 and {r["stratum"] for r in prim} == {f"Lake {i + 1}" for i in range(12)}
