"""Legs over water from one search (router.WaterRouter.legs) and the day routes drawn from them.

Outside references: shapely (LineString.length, Polygon.covers) measures and checks every
drawn path independently of the router's raster; the way round a round island is plane
geometry worked by hand in tests/test_geometry.py.
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely

from geosample.design import load_layers, make_design
from geosample.plan import load_plan
from geosample.router import StraightLegs, WaterRouter
from geosample.workflow import copy_demo

X0, Y0 = 610000.0, 5100000.0


def two_island_lake():
    lake = shapely.box(X0, Y0, X0 + 4000, Y0 + 3000)
    for cx, cy, r in ((1200, 1500, 450), (2800, 1400, 500)):
        lake = lake.difference(shapely.Point(X0 + cx, Y0 + cy).buffer(r, quad_segs=32))
    return lake


def test_legs_matrix_equals_the_pairwise_matrix_and_each_path_has_its_length():
    lake = two_island_lake()
    router = WaterRouter(lake)
    rng = np.random.default_rng(7)
    pts = []
    while len(pts) < 12:
        p = rng.uniform([X0, Y0], [X0 + 4000, Y0 + 3000])
        if lake.contains(shapely.Point(p)):
            pts.append(p)
    pts = np.array(pts)
    legs = router.legs(pts)
    assert legs.dist.shape == (12, 12)
    np.testing.assert_allclose(legs.dist, legs.dist.T, rtol=1e-12)
    for i in range(12):
        for j in range(12):
            if i == j:
                continue
            path = legs.path(i, j)
            line = shapely.LineString(path)
            # the drawn leg is the leg the timetable measured (shapely measures it)
            assert line.length == pytest.approx(legs.dist[i, j], rel=1e-9)
            assert path[0] == tuple(pts[i]) and path[-1] == tuple(pts[j])
            assert lake.buffer(0.5).covers(line)
    # a pair looked up alone gives the same distance
    pair = router.distance_matrix(pts[[0, 5]])
    assert pair[0, 1] == pytest.approx(legs.dist[0, 5], rel=1e-9)


def test_straight_legs_are_euclidean():
    legs = StraightLegs([[0.0, 0.0], [3.0, 4.0]])
    assert legs.dist[0, 1] == 5.0 and legs.path(0, 1) == [(0.0, 0.0), (3.0, 4.0)]


def test_demo_routes_drawn_are_as_long_as_the_timetable_says(tmp_path):
    """The demo lake has two islands: every drawn route has the length the planned times used,
    and lies on the water (shapely, a few metres' tolerance for the snap to the routable water)."""
    folder = copy_demo(tmp_path / "demo")
    plan = load_plan(folder)
    layers = load_layers(plan)
    design = make_design(plan, layers=layers)
    assert design.schedule.routes
    for r in design.schedule.routes:
        line = shapely.LineString(r.coords_xy)
        assert line.length == pytest.approx(r.length_m, rel=1e-9, abs=1e-6), r.date
    wet = design.frame.water.buffer(25.0)
    assert all(wet.covers(shapely.LineString(r.coords_xy)) for r in design.schedule.routes)


PLAN = """[survey]
title = "Seed property"
parameter = "E. coli"
units = "MPN/100 mL"
timezone = "America/Chicago"
[area]
water = "water.gpkg"
access = "access.gpkg"
reach_m = 20000
[size]
tolerance = 20
range = 80
confidence = 0.9
n = 30
[draw]
method = "balanced"
reserve = 0
[time]
start = 2027-06-01
end = 2027-06-30
window = ["08:00", "17:00"]
per_day = 6
field_days = 5
speed_kmh = 10
minutes_on_site = 10
"""


def _bottle_lake():
    """A round basin and a round bay joined by an 8 m wide, 10 m long neck (a narrow channel)."""
    basin = shapely.Point(X0, Y0).buffer(600)
    neck = shapely.box(X0 + 590, Y0 - 4, X0 + 620, Y0 + 4)
    bay = shapely.Point(X0 + 760, Y0).buffer(150)
    return shapely.union_all([basin, neck, bay]), (X0 - 590, Y0)


def _island_lake():
    return two_island_lake(), (X0 + 50, Y0 + 1500)


@pytest.mark.slow
@pytest.mark.parametrize("make_lake", [_bottle_lake, _island_lake], ids=["narrow-channel", "two-islands"])
def test_a_plan_valid_for_one_seed_is_valid_for_every_seed(make_lake, tmp_path):
    """One launch, reach 20 km: every seed gives a design (no day whose sites no launch reaches)."""
    import geopandas

    lake, launch = make_lake()
    geopandas.GeoDataFrame({"name": ["Lake"]}, geometry=[lake], crs=32614).to_file(tmp_path / "water.gpkg")
    geopandas.GeoDataFrame({"name": ["Launch"]}, geometry=[shapely.Point(launch)], crs=32614).to_file(
        tmp_path / "access.gpkg")
    (tmp_path / "plan.toml").write_text(PLAN)
    plan = load_plan(tmp_path / "plan.toml")
    layers = load_layers(plan)
    for seed in range(8):
        design = make_design(plan, layers=layers, seed=seed)
        assert len(design.schedule.routes) >= 5
        for r in design.schedule.routes:
            assert np.isfinite(r.length_m)
