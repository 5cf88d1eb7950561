"""Speed and memory of the frame: a 50,000-vertex lake with 200 islands, reach from 3 launches.

Run with ``pytest tests/benchmarks/test_bench_frame.py --benchmark-only -s``.

Goal (issue 3): under 5 s and under 1 GB. The lake is invented: a rough shoreline
(harmonics up to order 400 with amplitudes falling as k^-1.3, 40,000 vertices,
about 10 km across) and 200 islands of 50 vertices each, written in WGS 84
lon/lat so the run includes choosing and projecting to the UTM zone.
"""
from __future__ import annotations

import math
import resource
import time
import tracemalloc

import geopandas
import numpy as np
import shapely
from pyproj import Transformer

from geosample.geometry import build_frame

TARGET_S = 5.0
TARGET_BYTES = 1 << 30
X0, Y0 = 610000.0, 5100000.0  # UTM 14N, open land near 46 N, 97.5 W


def rough_lake(n_outer: int = 40_000, n_islands: int = 200, island_vertices: int = 50,
               radius: float = 5000.0) -> shapely.Polygon:
    """The benchmark lake in UTM metres (deterministic: the harmonics come from a fixed-seed stream)."""
    from geosample.rng import stream

    rng = stream(3, "benchmark/lake")
    th = np.linspace(0, 2 * np.pi, n_outer, endpoint=False)
    k = np.arange(2, 400)
    amp = 0.35 * k ** -1.3 * rng.normal(size=k.size)
    phase = rng.uniform(0, 2 * np.pi, k.size)
    raw = 1 + (amp[:, None] * np.cos(k[:, None] * th[None, :] + phase[:, None])).sum(axis=0)
    norm = raw.max()
    r = radius * raw / norm

    def shore_radius(phi):
        return radius * (1 + (amp * np.cos(k * phi + phase)).sum()) / norm

    outer = np.c_[X0 + r * np.cos(th), Y0 + r * np.sin(th)]
    holes, placed = [], []
    side = int(math.ceil(math.sqrt(n_islands * 2.2)))
    grid = np.linspace(-0.75 * radius, 0.75 * radius, side)
    for gx in grid:
        for gy in grid:
            if len(holes) == n_islands:
                break
            cx, cy = gx + rng.uniform(-60, 60), gy + rng.uniform(-60, 60)
            rad = rng.uniform(30, 130)
            rho, phi = math.hypot(cx, cy), math.atan2(cy, cx)
            if rho + 2.5 * rad + 100 > shore_radius(phi):
                continue
            t2 = np.linspace(0, 2 * np.pi, island_vertices, endpoint=False)
            rr = rad * (1 + 0.25 * np.sin(3 * t2 + rng.uniform(0, 6)) + 0.05 * rng.normal(size=t2.size))
            holes.append(np.c_[X0 + cx + rr * np.cos(t2), Y0 + cy + rr * np.sin(t2)])
            placed.append((cx, cy))
    assert len(holes) == n_islands, len(holes)
    lake = shapely.make_valid(shapely.Polygon(outer, holes))
    return max(shapely.get_parts(lake), key=lambda p: p.area)


def layers():
    lake = rough_lake()
    to_ll = Transformer.from_crs(32614, 4326, always_xy=True)
    water = geopandas.GeoDataFrame({"name": ["Benchmark Lake"]}, geometry=[lake], crs=32614).to_crs(4326)
    pts = [(X0 - 3000, Y0), (X0 + 2500, Y0 + 2500), (X0 + 500, Y0 - 3500)]
    lonlat = [to_ll.transform(x, y) for x, y in pts]
    access = geopandas.GeoDataFrame({"name": ["West Launch", "North-east Launch", "South Launch"]},
                                    geometry=shapely.points(lonlat), crs=4326)
    return water, access, lake


def test_bench_frame_50k_vertices_200_islands(benchmark):
    water, access, lake = layers()
    n_vertices = shapely.get_num_coordinates(lake)
    assert n_vertices >= 50_000 and len(lake.interiors) == 200

    def run():
        return build_frame(water, access=access, reach_m=4000)

    frame = benchmark.pedantic(run, rounds=3, iterations=1, warmup_rounds=0)
    median = benchmark.stats.stats.median

    tracemalloc.start()
    t0 = time.perf_counter()
    run()
    once = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    maxrss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux reports KiB
    router = frame.router
    print(f"\nframe: {n_vertices} vertices, {len(lake.interiors)} islands; median {median:.2f} s "
          f"(under tracemalloc {once:.2f} s); Python/numpy peak {peak / 2**20:.0f} MiB; process max RSS "
          f"{maxrss / 2**20:.0f} MiB; router {router.n_nodes} nodes, {router.n_edges} edges, raster "
          f"{router.cell_m:.1f} m, error bound {router.error_m:.0f} m; removed {frame.removed[-1].detail}")
    benchmark.extra_info.update({"peak_traced_bytes": peak, "max_rss_bytes": maxrss, "router_nodes": router.n_nodes,
                                 "router_error_m": router.error_m})
    assert frame.area_m2 > 0
    assert median < TARGET_S
    assert maxrss < TARGET_BYTES
