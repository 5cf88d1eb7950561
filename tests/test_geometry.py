"""The sampling frame: CRS choice, areas, constraints, over-water reach, strata, refusals.

Outside references: pyproj.Geod(ellps="WGS84") for areas on the ellipsoid (CHECKS.md,
"Sun and geodesy"); elementary plane geometry, worked by hand in the tests, for the
ways around an island and a peninsula; shapely for overlaps computed independently.
"""
from __future__ import annotations

import math
from pathlib import Path

import geopandas
import numpy as np
import pyproj
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import LAT0, LON0, lonlat_box
from geosample.errors import InfeasibleError, LayerError, SettingError
from geosample.geometry import (
    GRID_RELATIVE_ERROR,
    WaterRouter,
    build_frame,
    choose_crs,
    compact_zones,
    stratum_codes,
    to_lonlat,
    to_xy,
)
from geosample.layers import read_layer

DEMO = Path(__file__).resolve().parents[1] / "geosample" / "data" / "demo"
GEOD = pyproj.Geod(ellps="WGS84")


def geod_area(lonlat_geom) -> float:
    """Area on the WGS 84 ellipsoid (reference library: pyproj.Geod.geometry_area_perimeter)."""
    return abs(GEOD.geometry_area_perimeter(shapely.segmentize(lonlat_geom, 0.002))[0])


def utm_gdf(geoms, **cols):
    return geopandas.GeoDataFrame(cols or None, geometry=list(geoms), crs=32614)


X0, Y0 = 610000.0, 5100000.0


# =========================================================================== CRS
def test_geographic_lake_gets_its_utm_zone(lake_lonlat):
    choice = choose_crs(lake_lonlat)
    # -97.55 lies in UTM zone 14 (-102..-96 degrees): common practice (UTM zone = floor((lon+180)/6)+1)
    assert choice.crs.to_epsg() == 32600 + math.floor((LON0 + 180) / 6) + 1 == 32614
    assert "geographic" in choice.reason and "UTM zone 14N" in choice.reason


def test_wide_frame_gets_an_equal_area_projection_centred_on_it():
    wide = geopandas.GeoDataFrame(geometry=[shapely.box(-104.0, 44.0, -94.0, 48.0)], crs=4326)
    choice = choose_crs(wide)
    assert not choice.crs.to_epsg() and "equal-area" in choice.crs.name.lower()
    params = {p.name: p.value for p in choice.crs.coordinate_operation.params}
    assert params["Latitude of natural origin"] == pytest.approx(46.0)
    assert params["Longitude of natural origin"] == pytest.approx(-99.0)
    assert "spans 10.00 degrees" in choice.reason


def test_frame_straddling_a_zone_edge_by_much_gets_equal_area():
    # 5 degrees wide, centred on the 96 W zone boundary: 5.5 degrees from either central meridian
    g = geopandas.GeoDataFrame(geometry=[shapely.box(-98.5, 46.0, -93.5, 46.5)], crs=4326)
    choice = choose_crs(g)
    assert "equal-area" in choice.crs.name.lower() and "degrees from the central meridian" in choice.reason


def test_projected_metric_crs_is_kept(square_lake):
    choice = choose_crs(square_lake)
    assert choice.crs.to_epsg() == 32614 and "kept" in choice.reason


def test_projected_in_feet_is_reprojected_to_utm(lake_lonlat):
    feet = lake_lonlat.to_crs(2266)  # NAD83 / North Dakota South (ft)
    choice = choose_crs(feet)
    assert choice.crs.to_epsg() == 32614 and "foot" in choice.reason and "metres" in choice.reason


def test_web_mercator_is_reprojected_because_of_its_area_scale(lake_lonlat):
    choice = choose_crs(lake_lonlat.to_crs(3857))
    assert choice.crs.to_epsg() == 32614
    # Web Mercator scales areas by 1/cos^2(lat), about 2.07 at 46 N (common practice)
    scale = float(choice.reason.split("scales areas by ")[1].split(" ")[0])
    assert scale == pytest.approx(1 / math.cos(math.radians(LAT0 + 0.005)) ** 2, rel=0.01)


def test_lonlat_round_trip_and_a_known_value():
    # UTM zone 16's central meridian is 87 W and its false easting 500000 m (UTM definition, common practice)
    lon, lat = to_lonlat("EPSG:32616", [500000.0], [5_100_000.0])
    assert lon[0] == pytest.approx(-87.0, abs=1e-9)
    x, y = to_xy("EPSG:32616", lon, lat)
    assert x[0] == pytest.approx(500000.0, abs=1e-6) and y[0] == pytest.approx(5_100_000.0, abs=1e-6)


# =========================================================================== areas vs the ellipsoid
def test_demo_areas_agree_with_geodesic_areas():
    water = read_layer(DEMO / "water.geojson")
    strata = read_layer(DEMO / "zones.geojson", what="strata")
    frame = build_frame(water, strata=strata, strata_field="zone")
    # reference: pyproj.Geod(ellps="WGS84").geometry_area_perimeter of the input lon/lat polygon
    assert frame.water_area_m2 == pytest.approx(geod_area(water.geometry.iloc[0]), rel=0.005)
    for s in frame.strata:
        # the same stratum clipped in lon/lat, measured on the ellipsoid
        zone = strata[strata["zone"] == s.name].geometry.iloc[0]
        expected = geod_area(zone.intersection(water.geometry.iloc[0]))
        assert s.area_m2 == pytest.approx(expected, rel=0.005), s.name


@settings(max_examples=25, deadline=None)
@given(lat=st.floats(-70, 70), lon=st.floats(-179, 170), size_km=st.floats(0.5, 40), wide=st.booleans())
def test_frame_area_agrees_with_geod_anywhere(lat, lon, size_km, wide):
    dlat = size_km / 111.0
    dlon = (9.0 if wide else size_km / (111.0 * math.cos(math.radians(lat))))
    poly = shapely.box(lon, lat, lon + dlon, lat + dlat)
    frame = build_frame(geopandas.GeoDataFrame(geometry=[poly], crs=4326))
    # reference: pyproj.Geod geodesic area of the same lon/lat polygon (edges densified to 0.002 degrees)
    assert frame.area_m2 == pytest.approx(geod_area(poly), rel=0.005)


# =========================================================================== over-water distances
ISLAND_R, ISLAND_D = 400.0, 800.0  # island radius; access point and target 800 m from its centre


def island_lake():
    centre = (X0 + 1500, Y0 + 1500)
    lake = shapely.box(X0, Y0, X0 + 3000, Y0 + 3000).difference(
        shapely.Point(centre).buffer(ISLAND_R, quad_segs=64))
    a = np.array([centre[0], centre[1] - ISLAND_D])
    b = np.array([centre[0], centre[1] + ISLAND_D])
    return lake, a, b


def around_island(r: float, d: float) -> tuple[float, float]:
    """Shortest way between two points at distance d on opposite sides of a disk of radius r.

    Plane geometry (by hand): two tangent segments of length sqrt(d^2 - r^2) and the arc
    between the tangent points, of angle pi - 2 acos(r / d). Returns (length, arc angle).
    """
    arc = math.pi - 2 * math.acos(r / d)
    return 2 * math.sqrt(d * d - r * r) + r * arc, arc


def test_router_goes_around_a_round_island():
    lake, a, b = island_lake()
    router = WaterRouter(lake)
    d = router.distance_matrix(np.array([a, b]))
    expected, arc = around_island(ISLAND_R, ISLAND_D)
    straight = 2 * ISLAND_D
    assert d[0, 1] > straight + 100
    # never shorter than the true way (the island polygon is inscribed in the circle: 0.1 m slack)
    assert d[0, 1] >= expected - 0.1
    assert d[0, 1] - expected <= router.error_m
    # the tighter per-path bound: clearance * (2 + total turning), the turning being the arc angle
    assert d[0, 1] - expected <= router.clearance_m * (2 + arc)
    assert d[0, 0] == d[1, 1] == 0.0 and d[0, 1] == d[1, 0]


def test_router_path_stays_on_water_and_has_the_right_ends():
    lake, a, b = island_lake()
    router = WaterRouter(lake)
    path = router.path(a, b)
    assert path[0] == tuple(a) and path[-1] == tuple(b)
    line = shapely.LineString(path)
    assert lake.covers(line)  # checked by shapely, independently of the router's raster
    assert line.length == pytest.approx(router.distance_matrix(np.array([a, b]))[0, 1], rel=1e-9)


def test_router_goes_around_a_peninsula():
    lake = shapely.box(X0, Y0, X0 + 3000, Y0 + 2000).difference(shapely.box(X0 + 1450, Y0 - 1, X0 + 1550, Y0 + 1400))
    a, b = np.array([X0 + 1000, Y0 + 500]), np.array([X0 + 2000, Y0 + 500])
    router = WaterRouter(lake)
    d = router.distance_matrix(np.array([a, b]))[0, 1]
    # by hand: over the two tip corners (1450, 1400) and (1550, 1400)
    leg = math.hypot(450, 900)
    expected = 2 * leg + 100
    turning = 2 * math.atan2(900, 450)
    assert expected - 0.1 <= d <= expected + router.clearance_m * (2 + turning)


def test_points_on_the_shore_or_slightly_outside_still_route():
    lake, a, b = island_lake()
    router = WaterRouter(lake)
    on_shore = np.array([X0, Y0 + 1500.0])  # on the west shore
    outside = np.array([X0 - 5.0, Y0 + 1000.0])  # 5 m on land
    d = router.distance_matrix(np.array([on_shore, outside, b]))
    assert np.all(np.isfinite(d))
    assert d[0, 1] >= math.hypot(5.0, 500.0) - 0.1
    assert len(router.path(outside, b)) >= 2


def test_reach_zone_follows_the_way_around_not_the_straight_line():
    lake, a, b = island_lake()
    access = geopandas.GeoDataFrame({"name": ["Ferry Steps"]}, geometry=[shapely.Point(a)], crs=32614)
    water = utm_gdf([lake])
    expected, _ = around_island(ISLAND_R, ISLAND_D)
    straight = 2 * ISLAND_D
    target = shapely.Point(b)

    def reached(reach_m):
        frame = build_frame(water, access=access, reach_m=reach_m)
        return frame.strata[0].geometry.distance(target) == 0.0, frame

    # a straight-line reach would include the target; over water it is not reached
    assert not reached(straight + 60)[0]
    ok, frame = reached(expected + 40)
    row = frame.removed[-1]
    assert row.constraint == "reach_m" and "stated error" in row.detail
    stated = float(row.detail.split("at most ")[1].split(" m")[0])
    assert stated >= frame.router.error_m + GRID_RELATIVE_ERROR * (expected + 40)
    assert ok
    assert not reached(expected - 15)[0]


# =========================================================================== constraints
def test_exclusions_shore_band_and_reach_are_recorded_in_order(square_lake):
    closed = utm_gdf([shapely.box(X0 - 100, Y0 - 100, X0 + 300, Y0 + 300)])  # 300 x 300 m of it is water
    access = utm_gdf([shapely.Point(X0 + 1000, Y0 + 2000)], name=["North Ramp"])
    frame = build_frame(square_lake, exclude=[("marina.geojson", closed)], access=access, reach_m=1500,
                        shore_m=(0, 400))
    names = [r.constraint for r in frame.removed]
    assert names == ["exclude: marina.geojson", "shore_m", "reach_m"]
    assert frame.removed[0].area_m2 == pytest.approx(300 * 300, rel=1e-9)
    assert frame.removed[0].percent_of_water == pytest.approx(100 * 90000 / 4e6)
    # by hand: the 400 m band of a 2 km square minus the marina square inside it
    assert frame.removed[1].area_m2 == pytest.approx(1200 * 1200, rel=1e-9)
    assert frame.removed[2].area_m2 > 0
    assert frame.access[0].name == "North Ramp" and frame.router is not None
    assert frame.area_m2 == pytest.approx(4e6 - sum(r.area_m2 for r in frame.removed), rel=1e-9)


def test_router_is_kept_without_reach_and_names_default(square_lake):
    access = utm_gdf([shapely.Point(X0 + 10, Y0 + 10), shapely.Point(X0 + 1990, Y0 + 10)])
    frame = build_frame(square_lake, access=access)
    assert [a.name for a in frame.access] == ["Access 1", "Access 2"]
    assert frame.router is not None and frame.removed == ()
    assert frame.strata[0].name == "Square Pond"  # the water layer's single name


def test_access_point_on_land_nearby_snaps_with_a_warning(square_lake):
    access = utm_gdf([shapely.Point(X0 - 60.0, Y0 + 1000.0)], name=["Gravel Pull-off"])
    frame = build_frame(square_lake, access=access)
    p = frame.access[0]
    assert p.snapped_m == pytest.approx(60.0) and p.x == pytest.approx(X0)
    assert any("Gravel Pull-off" in w and "60.0 m" in w for w in frame.warnings)


def test_access_point_too_far_is_an_error_naming_it(square_lake):
    access = utm_gdf([shapely.Point(X0 - 450.0, Y0 + 1000.0)], name=["Hilltop Lot"])
    with pytest.raises(LayerError) as err:
        build_frame(square_lake, access=access, reach_m=1000)
    msg = str(err.value)
    assert "'Hilltop Lot'" in msg and "450 m" in msg and "access_snap_m = 200" in msg


def test_reach_without_access_is_a_setting_error(square_lake):
    with pytest.raises(SettingError, match="area.reach_m = 1000.*access"):
        build_frame(square_lake, reach_m=1000)


def test_exclusions_that_remove_everything_list_the_removals(square_lake):
    everything = utm_gdf([shapely.box(X0 - 10, Y0 - 10, X0 + 2010, Y0 + 2010)])
    with pytest.raises(InfeasibleError) as err:
        build_frame(square_lake, exclude=[("everything.geojson", everything)])
    msg = str(err.value)
    assert "nothing is left" in msg and "water 4.000 km²" in msg
    assert "exclude: everything.geojson removed 4.000 km² (100.0 %)" in msg


def test_progress_is_called_for_each_long_step(square_lake):
    steps = []
    access = utm_gdf([shapely.Point(X0 + 10, Y0 + 10)])
    build_frame(square_lake, access=access, reach_m=800, strata="zones", zones=2, progress=steps.append)
    assert "building the over-water router" in steps and "cutting compact zones" in steps
    assert any("reach" in s for s in steps)


# =========================================================================== bad layers
def test_layer_without_crs_is_refused(square_lake):
    no_crs = geopandas.GeoDataFrame(geometry=list(square_lake.geometry))
    with pytest.raises(LayerError, match='no CRS.*crs = "EPSG:4326"'):
        build_frame(no_crs)


def test_lines_instead_of_polygons_are_refused():
    lines = utm_gdf([shapely.LineString([(X0, Y0), (X0 + 100, Y0)])])
    with pytest.raises(LayerError, match="LineString.*polygons are needed"):
        build_frame(lines)


def test_empty_layer_is_refused(square_lake):
    with pytest.raises(LayerError, match="no features with a geometry"):
        build_frame(square_lake.iloc[0:0])


def test_invalid_water_polygon_is_repaired_with_a_warning():
    bowtie = shapely.Polygon([(X0, Y0), (X0 + 1000, Y0 + 1000), (X0 + 1000, Y0), (X0, Y0 + 1000)])
    frame = build_frame(utm_gdf([bowtie], name=["Knot Pond"]))
    assert frame.water_area_m2 == pytest.approx(2 * 0.5 * 1000 * 500)  # two triangles, by hand
    assert any("feature 0" in w and "Knot Pond" in w and "make_valid" in w for w in frame.warnings)


# =========================================================================== strata
def halves(field="zone"):
    west = shapely.box(X0 - 500, Y0 - 500, X0 + 1000, Y0 + 2500)
    east = shapely.box(X0 + 1000, Y0 - 500, X0 + 2500, Y0 + 2500)
    return utm_gdf([west, east], **{field: ["West Arm", "East Arm"], "depth": [3, 9]})


def test_strata_layer_is_clipped_with_codes_and_weights(square_lake):
    frame = build_frame(square_lake, strata=halves(), strata_field="zone")
    assert [(s.name, s.code) for s in frame.strata] == [("West Arm", "WA"), ("East Arm", "EA")]
    assert [s.area_m2 for s in frame.strata] == pytest.approx([2e6, 2e6])
    assert [s.weight for s in frame.strata] == pytest.approx([0.5, 0.5])


def test_stratum_names_are_normalised_once(square_lake):
    # a trailing space, a no-break space (U+00A0) and a decomposed accent (e + U+0301; NFC composes it: Unicode
    # Standard Annex #15) would not survive a spreadsheet round trip of schedule.csv
    g = halves()
    g["zone"] = ["West\u00a0Arm ", "Cafe\u0301  Arm"]
    frame = build_frame(square_lake, strata=g, strata_field="zone")
    assert [s.name for s in frame.strata] == ["West Arm", "Caf\u00e9 Arm"]


@pytest.mark.parametrize("bad, words", [("West\nArm", "line break"), ("West\tArm", "tab"),
                                        ("West\x07Arm", "U+0007")])
def test_a_stratum_name_with_a_control_character_is_refused(square_lake, bad, words):
    g = halves()
    g["zone"] = [bad, "East Arm"]
    with pytest.raises(SettingError) as err:
        build_frame(square_lake, strata=g, strata_field="zone")
    assert words in str(err.value) and "feature 0" in str(err.value)


@pytest.mark.parametrize("names", [["Arm", "Arm"], ["Arm", " Arm\u00a0"], ["Arm", "ARM"]])
def test_two_strata_features_with_one_name_are_refused_not_merged(square_lake, names):
    g = halves()
    g["zone"] = names
    with pytest.raises(SettingError) as err:
        build_frame(square_lake, strata=g, strata_field="zone")
    msg = str(err.value).lower()
    assert "feature 0" in msg and "feature 1" in msg and "merge those features" in msg


def test_a_remainder_named_like_a_stratum_is_refused(square_lake):
    part = utm_gdf([shapely.box(X0 - 10, Y0 - 10, X0 + 500, Y0 + 2010)], zone=["Inlet"])
    with pytest.raises(SettingError, match="area.remainder"):
        build_frame(square_lake, strata=part, strata_field="zone", remainder="inlet ")


def test_unknown_strata_field_lists_the_fields(square_lake):
    with pytest.raises(LayerError) as err:
        build_frame(square_lake, strata=halves(), strata_field="basin")
    msg = str(err.value)
    assert "no field 'basin'" in msg and "'zone'" in msg and "'depth'" in msg


def test_overlapping_strata_are_an_error(square_lake):
    a = shapely.box(X0 - 10, Y0 - 10, X0 + 1200, Y0 + 2010)
    b = shapely.box(X0 + 1000, Y0 - 10, X0 + 2010, Y0 + 2010)
    with pytest.raises(LayerError, match="'A' and 'B' overlap by 400,000 m²"):
        build_frame(square_lake, strata=utm_gdf([a, b], zone=["A", "B"]), strata_field="zone")


def test_water_in_no_stratum_is_an_error_stating_how_much_unless_remainder(square_lake):
    part = utm_gdf([shapely.box(X0 - 10, Y0 - 10, X0 + 500, Y0 + 2010)], zone=["Inlet"])
    with pytest.raises(LayerError, match=r"3\.000 km² of the frame \(75\.00 % of it\) lies in no stratum"):
        build_frame(square_lake, strata=part, strata_field="zone")
    frame = build_frame(square_lake, strata=part, strata_field="zone", remainder="Open Water")
    assert [(s.name, s.code) for s in frame.strata] == [("Inlet", "IN"), ("Open Water", "OW")]
    assert frame.stratum("Open Water").area_m2 == pytest.approx(3e6)


def test_shore_bands(square_lake):
    frame = build_frame(square_lake, strata="shore-bands", bands_m=[0, 100, 500])
    got = {s.name: s.area_m2 for s in frame.strata}
    # by hand for a 2 km square: inner squares of side 1800 m and 1000 m
    assert got == pytest.approx({"0-100 m": 2000**2 - 1800**2, "100-500 m": 1800**2 - 1000**2,
                                 "500 m+": 1000**2})
    assert [s.code for s in frame.strata] == ["S1", "S2", "S3"]


def test_zones_on_a_square_are_four_squares(square_lake):
    frame = build_frame(square_lake, strata="zones", zones=4)
    for s in frame.strata:
        x0, y0, x1, y1 = s.geometry.bounds
        assert s.area_m2 == pytest.approx(1e6, rel=1e-6)
        assert (x1 - x0, y1 - y0) == pytest.approx((1000.0, 1000.0), abs=1e-3)  # a 1 km square each
        assert s.geometry.symmetric_difference(shapely.box(x0, y0, x1, y1)).area < 1e-3


def isoperimetric(g) -> float:
    """4 pi A / P^2 of the convex hull: 1 for a disk, pi/4 for a square (common practice)."""
    h = g.convex_hull
    return 4 * math.pi * h.area / h.length**2


def test_zones_on_the_demo_lake_are_equal_and_compact():
    water = read_layer(DEMO / "water.geojson")
    frame = build_frame(water, strata="zones", zones=5)
    areas = np.array([s.area_m2 for s in frame.strata])
    # stated tolerance: equal within a relative 1e-6 (geometry.compact_zones)
    assert np.ptp(areas) <= 1e-6 * areas.mean() * 5
    assert areas.sum() == pytest.approx(frame.water_area_m2, rel=1e-9)
    assert min(isoperimetric(s.geometry) for s in frame.strata) >= 0.5
    assert [s.code for s in frame.strata] == ["Z1", "Z2", "Z3", "Z4", "Z5"]


def test_zones_are_deterministic():
    lake = shapely.Point(X0, Y0).buffer(1500, quad_segs=32)
    a, b = compact_zones(lake, 3), compact_zones(lake, 3)
    assert all(x.equals_exact(y, 0.0) for x, y in zip(a, b))


def test_stratum_codes():
    assert stratum_codes(["North Basin", "South Basin", "Nettle Bay", "Île aux Pins", "Zone 12", "Zone 1"]) == \
        ["NB", "SB", "NB2", "IAP", "Z12", "Z1"]
    assert stratum_codes(["A", "A", "7"]) == ["A", "A2", "7"]


def test_demo_frame():
    def read(name, **kw):
        return read_layer(DEMO / name, **kw)

    frame = build_frame(
        read("water.geojson"),
        exclude=[("closed.geojson", read("closed.geojson", what="exclude")),
                 ("swim.geojson", read("swim.geojson", what="exclude"))],
        access=read("access.geojson", what="access", kind="point"), reach_m=2000, shore_m=(20, 1500),
        strata=read("zones.geojson", what="strata"), strata_field="zone")
    assert [s.code for s in frame.strata] == ["NB", "SB", "AB"]
    assert sum(s.weight for s in frame.strata) == pytest.approx(1.0)
    assert [r.constraint for r in frame.removed] == ["exclude: closed.geojson", "exclude: swim.geojson",
                                                     "shore_m", "reach_m"]
    assert all(r.area_m2 > 0 for r in frame.removed)
    birch = next(a for a in frame.access if a.name == "Birch Landing")
    assert 0 < birch.snapped_m <= 18.0 + 1e-6  # drawn 18 m inland along a ray from the centre
    assert frame.crs.to_epsg() == 32614


# =========================================================================== properties
@st.composite
def lakes_with_holes(draw):
    n = draw(st.integers(5, 14))
    radii = draw(st.lists(st.floats(600, 1500), min_size=n, max_size=n))
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    outer = shapely.Polygon(np.c_[X0 + np.array(radii) * np.cos(th), Y0 + np.array(radii) * np.sin(th)])
    holes = []
    for _ in range(draw(st.integers(0, 3))):
        cx, cy = draw(st.floats(-500, 500)), draw(st.floats(-500, 500))
        r = draw(st.floats(20, 120))
        holes.append(shapely.Point(X0 + cx, Y0 + cy).buffer(r, quad_segs=4))
    lake = outer.difference(shapely.union_all(holes)) if holes else outer
    return shapely.make_valid(lake)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lake=lakes_with_holes(), ex=st.tuples(st.floats(-1600, 1600), st.floats(-1600, 1600), st.floats(50, 1500)),
       kind=st.sampled_from(["none", "zones", "bands", "layer"]), k=st.integers(1, 4))
def test_frame_properties(lake, ex, kind, k):
    water = utm_gdf([lake])
    box = shapely.box(X0 + ex[0], Y0 + ex[1], X0 + ex[0] + ex[2], Y0 + ex[1] + ex[2])
    overlap = lake.intersection(box).area  # computed by shapely, independently of build_frame
    kw = {}
    if kind == "zones":
        kw = {"strata": "zones", "zones": k}
    elif kind == "bands":
        kw = {"strata": "shore-bands", "bands_m": [0, 50 * k], "remainder": None}
    elif kind == "layer":
        edges = np.linspace(X0 - 2000, X0 + 2000, k + 1)
        slabs = [shapely.box(a, Y0 - 2000, b, Y0 + 2000) for a, b in zip(edges[:-1], edges[1:])]
        kw = {"strata": utm_gdf(slabs, zone=[f"Slab {i}" for i in range(k)]), "strata_field": "zone"}
    if overlap >= lake.area * (1 - 1e-9):
        with pytest.raises(InfeasibleError):
            build_frame(water, exclude=[("box", utm_gdf([box]))], **kw)
        return
    frame = build_frame(water, exclude=[("box", utm_gdf([box]))], **kw)
    assert frame.area_m2 <= frame.water_area_m2 * (1 + 1e-12)
    assert frame.removed[0].area_m2 == pytest.approx(overlap, rel=1e-6, abs=1e-3)
    expected_frame = lake.difference(box).area
    assert sum(s.area_m2 for s in frame.strata) == pytest.approx(expected_frame, rel=1e-6)
    assert sum(s.weight for s in frame.strata) == pytest.approx(1.0, rel=1e-12)
    if kind == "zones" and len(frame.strata) == k:
        areas = [s.area_m2 for s in frame.strata]
        assert max(areas) - min(areas) <= 1e-5 * expected_frame


def test_reach_keeps_the_whole_connected_lake_and_none_of_a_separate_one():
    lake_a = shapely.box(X0, Y0, X0 + 1000, Y0 + 1000)
    lake_b = shapely.box(X0 + 1500, Y0, X0 + 2500, Y0 + 1000)
    access = utm_gdf([shapely.Point(X0 + 10, Y0 + 500)])
    frame = build_frame(utm_gdf([lake_a, lake_b]), access=access, reach_m=5000)
    # every place in lake A is within 1.5 km by water; lake B cannot be reached at all
    assert frame.area_m2 == pytest.approx(lake_a.area, rel=1e-9)
    d = frame.router.distance_matrix(np.array([[X0 + 500, Y0 + 500], [X0 + 2000, Y0 + 500]]))
    assert np.isinf(d[0, 1])
    with pytest.raises(InfeasibleError, match="do not connect"):
        frame.router.path((X0 + 500, Y0 + 500), (X0 + 2000, Y0 + 500))


@pytest.mark.parametrize("bad", [0, -100.0, float("nan")])
def test_reach_must_be_a_positive_distance(square_lake, bad):
    access = utm_gdf([shapely.Point(X0 + 10, Y0 + 10)])
    with pytest.raises(SettingError, match="area.reach_m.*a positive number of metres"):
        build_frame(square_lake, access=access, reach_m=bad)


def test_shore_m_past_the_middle_of_a_narrow_lake_names_the_half_width():
    # a 30 m wide channel: no place is more than 15 m from the shore (half its width: geometry, common practice),
    # so shore_m = [20, 100] keeps nothing; the message says how far the middle is instead of "widen shore_m"
    channel = utm_gdf([shapely.box(X0, Y0, X0 + 3000, Y0 + 30)], name=["Long Cut"])
    with pytest.raises(SettingError) as err:
        build_frame(channel, shore_m=(20, 100))
    msg = str(err.value)
    assert "area.shore_m" in msg and "nowhere more than 15 m from its shore" in msg
    assert "below 15 m" in msg
