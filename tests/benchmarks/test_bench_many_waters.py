"""Benchmark: a frame of 10,000 lakes in one layer (issue 7: under 30 s, cost growing about linearly).

The layers are invented: n round lakes (radius 50-400 m, 16-32 vertices each) on a jittered
1 km grid, from a fixed seed, in UTM 16N. One timed job is what ``geosample plan`` does with
them before the schedule: ``build_frame`` (projection, repair check, the disjointness check
and the MultiPolygon), then a ``balanced`` and a ``grts`` draw of 200 sites with half
reserves and 100 m spacing over the whole region.

Growth check (stated honestly): the job is timed at 1,000, 3,000 and 10,000 lakes in the same
run; the 10,000-lake time must be at most 5 times the 3,000-lake time (linear growth would be
3.3 times; 5 times allows growth up to about n^1.34, or a fixed cost that dominates at small n).
The reference for the frame step, a plain ``shapely.union_all`` of the same polygons, is timed
beside it.
"""
from __future__ import annotations

import time

import numpy as np
import pytest
import shapely

from conftest import invented_lakes
from geosample.geometry import build_frame
from geosample.randomizer import space
from geosample.stats.sizing import allocate

SIZES = (1000, 3000, 10_000)
TARGET_S = 30.0
GROWTH_10K_OVER_3K = 5.0


lakes = invented_lakes  # (tests/conftest.py; the regional benchmark imports it from here)


def frame_and_draws(layer):
    space._region_cached.cache_clear()
    frame = build_frame(layer)
    alloc = allocate([1.0], strata=[frame.strata[0].name], n=200, method="proportional")
    draws = [space.draw_sites(frame, alloc, method=m, reserve=0.5, spacing_m=100, seed=5) for m in ("balanced",
                                                                                                      "grts")]
    return frame, draws


def _best_of(fn, rounds=3):
    best = float("inf")
    for _ in range(rounds):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


@pytest.fixture(scope="module")
def layers():
    return {n: lakes(n) for n in SIZES}


def test_bench_frame_10000_lakes(benchmark, layers):
    layer = layers[10_000]
    frame, draws = benchmark.pedantic(lambda: frame_and_draws(layer), rounds=3, iterations=1)
    assert shapely.get_num_geometries(frame.water) == 10_000
    assert frame.area_m2 == pytest.approx(float(layer.area.sum()), rel=1e-9)
    assert all(len(d.sites) == 300 for d in draws)
    assert benchmark.stats.stats.median < TARGET_S


def test_bench_union_all_10000_lakes_reference(benchmark, layers):
    geoms = layers[10_000].geometry.values
    u = benchmark.pedantic(lambda: shapely.union_all(geoms), rounds=3, iterations=1)
    assert shapely.get_num_geometries(u) == 10_000


def test_many_lakes_cost_grows_about_linearly(benchmark, layers):
    times: dict[int, float] = {}

    def run():
        for n in SIZES:
            times[n] = _best_of(lambda: frame_and_draws(layers[n]))
        frames = {n: _best_of(lambda: build_frame(layers[n])) for n in SIZES}
        unions = {n: _best_of(lambda: shapely.union_all(layers[n].geometry.values)) for n in SIZES}
        return frames, unions

    frames, unions = benchmark.pedantic(run, rounds=1, iterations=1)
    print("\n" + "; ".join(f"{n} lakes: frame+draws {times[n]:.2f} s (frame {frames[n]:.2f} s, "
                            f"union_all {unions[n]:.2f} s)" for n in SIZES))
    benchmark.extra_info.update({f"frame_and_draws_{n}": times[n] for n in SIZES})
    benchmark.extra_info.update({f"build_frame_{n}": frames[n] for n in SIZES})
    benchmark.extra_info.update({f"union_all_{n}": unions[n] for n in SIZES})
    assert times[10_000] < TARGET_S
    assert times[10_000] <= GROWTH_10K_OVER_3K * times[3000]


def plain_loop_draw(region, n: int, seed: int = 5) -> np.ndarray:
    """The reference: uniform points in the bounding box, tested one at a time with ``region.contains``."""
    rng = np.random.default_rng(seed)
    x0, y0, x1, y1 = region.bounds
    out = []
    while len(out) < n:
        x, y = rng.uniform(x0, x1), rng.uniform(y0, y1)
        if region.contains(shapely.Point(x, y)):
            out.append((x, y))
    return np.array(out)


def test_bench_simple_draw_over_10000_lakes_against_a_plain_shapely_loop(benchmark, layers):
    frame = build_frame(layers[10_000])
    alloc = allocate([1.0], strata=[frame.strata[0].name], n=300, method="proportional")

    def ours():
        space._region_cached.cache_clear()
        return space.draw_sites(frame, alloc, method="simple", reserve=0, seed=5, measure_balance=False)

    def run():
        return _best_of(ours), _best_of(lambda: plain_loop_draw(frame.water, 300), rounds=1)

    t_ours, t_loop = benchmark.pedantic(run, rounds=1, iterations=1)
    print(f"\n300 simple sites over 10,000 lakes: draw_sites {t_ours:.3f} s (cold), plain shapely loop {t_loop:.3f} s")
    benchmark.extra_info.update({"draw_sites_simple_s": t_ours, "plain_shapely_loop_s": t_loop})
    assert t_ours < t_loop
