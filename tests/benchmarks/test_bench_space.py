"""Speed targets of the spatial draw (pytest-benchmark; not part of the default run).

Goal (issue 4): 10,000 ``balanced`` sites in a 20,000-vertex polygon with 50 holes at
least as fast as ``geopandas.GeoSeries.sample_points`` (uniform) for the same n in the
same run, and ``simple`` at least twice as fast.

Every timed draw starts cold (the module's cache of prepared strata is cleared). Two
levels are timed: the point draw alone (``_draw_simple`` / ``_draw_balanced``: the
coordinates in draw order, the same job as ``sample_points``), and ``draw_sites``,
which adds 10,000 site records with ids and WGS 84 coordinates. The Voronoi balance
measure, which ``sample_points`` has no counterpart for, is timed separately
(``measure_balance=True``).

Run: ``pytest tests/benchmarks/test_bench_space.py --benchmark-only``.
"""
from __future__ import annotations

import time

import numpy as np
import pyproj
import pytest
import shapely

from geosample.model import Allocation, Frame, Stratum
from geosample.randomizer import space

N = 10_000
X0, Y0 = 600_000.0, 4_800_000.0


def lake_polygon(vertices: int = 20_000, holes: int = 50, seed: int = 1) -> shapely.Polygon:
    """An invented lake: a wobbly outline of ``vertices`` vertices about 10 km across, with ``holes`` islands."""
    rng = np.random.default_rng(seed)
    th = np.linspace(0, 2 * np.pi, vertices, endpoint=False)
    r = 5000 * (1 + 0.25 * np.sin(5 * th) + 0.08 * np.sin(37 * th) + 0.004 * rng.standard_normal(vertices))
    outer = shapely.Polygon(np.column_stack([X0 + r * np.cos(th), Y0 + r * np.sin(th)]))
    inner = outer.buffer(-150)
    islands: list[shapely.Polygon] = []
    while len(islands) < holes:
        c = (X0, Y0) + rng.uniform(-4000, 4000, 2)
        island = shapely.Point(c).buffer(rng.uniform(40, 150), quad_segs=8)
        if inner.contains(island) and all(island.distance(o) > 30 for o in islands):
            islands.append(island)
    return shapely.Polygon(outer.exterior.coords, [i.exterior.coords for i in islands])


@pytest.fixture(scope="module")
def lake():
    poly = lake_polygon()
    assert poly.is_valid and len(poly.interiors) == 50 and len(poly.exterior.coords) == 20_001
    frame = Frame(crs=pyproj.CRS("EPSG:32616"), crs_reason="benchmark", water=poly, exclusions=None,
                  strata=(Stratum("Lake", "LK", poly, poly.area, 1.0),), water_area_m2=poly.area)
    alloc = Allocation(("Lake",), (N,), N, "proportional", "chebyshev", "two", 0.95, None, 0.05, None, (1.0,))
    return poly, frame, alloc


def _ours(frame, alloc, method, measure_balance=False):
    def run():
        space._region_cached.cache_clear()
        return space.draw_sites(frame, alloc, method=method, reserve=0, seed=2027, measure_balance=measure_balance)

    return run


def _theirs(poly):
    import geopandas as gpd

    series = gpd.GeoSeries([poly], crs="EPSG:32616")
    return lambda: series.sample_points(N, rng=2027)


def test_sample_points_reference(benchmark, lake):
    poly, _, _ = lake
    pts = benchmark(_theirs(poly))
    assert shapely.get_num_geometries(pts.iloc[0]) == N


@pytest.mark.parametrize("method", ["simple", "balanced", "grts"])
def test_draw_sites(benchmark, lake, method):
    _, frame, alloc = lake
    draw = benchmark(_ours(frame, alloc, method))
    assert len(draw.sites) == N


def test_draw_sites_with_balance_measure(benchmark, lake):
    _, frame, alloc = lake
    draw = benchmark.pedantic(_ours(frame, alloc, "balanced", measure_balance=True), rounds=3, iterations=1)
    assert draw.balance["Lake"] < 0.12


def _points(poly, method):
    """The point draw alone (what ``sample_points`` does): coordinates in draw order, cold cache."""
    drawer = space._method(method)

    def run():
        space._region_cached.cache_clear()
        return drawer(poly, N, np.random.default_rng(2027))

    return run


@pytest.mark.parametrize("method", ["simple", "balanced"])
def test_point_draw(benchmark, lake, method):
    poly, _, _ = lake
    assert benchmark(_points(poly, method)).shape == (N, 2)


def _best_of(fn, rounds=9):
    best = float("inf")
    for _ in range(rounds):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def test_goals_against_sample_points_in_the_same_run(benchmark, lake):
    """The issue's goals, timed in one run (best of 9, so background load counts least).

    Asserted on the point draw, the same job ``sample_points`` does; the whole
    ``draw_sites`` (points plus 10,000 site records with ids and WGS 84
    coordinates) is printed beside it.
    """
    poly, frame, alloc = lake

    def run():  # under --benchmark-only a test needs the benchmark fixture to run at all; it times the comparison
        theirs = _best_of(_theirs(poly))
        t = {m: _best_of(_points(poly, m)) for m in ("simple", "balanced")}
        full = {m: _best_of(_ours(frame, alloc, m)) for m in ("simple", "balanced")}
        return theirs, t, full

    theirs, t, full = benchmark.pedantic(run, rounds=1, iterations=1)
    benchmark.extra_info.update({"sample_points_s": theirs, "points_simple_s": t["simple"],
                                 "points_balanced_s": t["balanced"], "draw_sites_simple_s": full["simple"],
                                 "draw_sites_balanced_s": full["balanced"]})
    print(f"\nsample_points {theirs * 1e3:.1f} ms; points: simple {t['simple'] * 1e3:.1f} ms, "
          f"balanced {t['balanced'] * 1e3:.1f} ms; draw_sites: simple {full['simple'] * 1e3:.1f} ms, "
          f"balanced {full['balanced'] * 1e3:.1f} ms")
    assert t["balanced"] <= theirs
    assert t["simple"] * 2 <= theirs
