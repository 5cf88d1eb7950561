"""A regional frame of a million lakes: local frame + draw, and the same draw from partitions.

Goals (issue "Speed at scale"): a 1M-lake frame plus a 500-site balanced draw in at most
60 s CPU and 4 GiB peak, growth about linear from 10k to 1M lakes; a draw from the frame
held in partitions (dask-geopandas) gives exactly the local draw's sites.

The lakes are invented (``tests/conftest.invented_lakes``: round, radius 50-400 m, on a
jittered 1 km grid, UTM 16N) and written once to GeoParquet. Each measured job runs in a
fresh Python process that reads the file, so CPU time (process time) and peak memory
(max RSS) are the job's own, not the generator's. Run with
``pytest tests/benchmarks/test_bench_regional.py --benchmark-only -s`` (several minutes).
"""
from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest


TARGET_CPU_S = 60.0
TARGET_RSS = 4 << 30
SIZES = (10_000, 100_000, 1_000_000)

JOB = textwrap.dedent('''
    import json, resource, sys, time
    import geopandas
    c0, w0 = time.process_time(), time.perf_counter()
    layer = geopandas.read_parquet(sys.argv[1])
    from geosample.geometry import build_frame
    from geosample.randomizer import space
    from geosample.stats.sizing import allocate
    frame = build_frame(layer)
    c1 = time.process_time()
    alloc = allocate([1.0], strata=[frame.strata[0].name], n=500, method="proportional")
    draw = space.draw_sites(frame, alloc, method="balanced", reserve=0.5, seed=5)
    c2 = time.process_time()
    print(json.dumps({"cpu": c2 - c0, "frame_cpu": c1 - c0, "draw_cpu": c2 - c1, "wall": time.perf_counter() - w0,
                      "rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                      "sites": [[s.x, s.y] for s in draw.sites], "name": frame.strata[0].name,
                      "crs": frame.crs.to_wkt()}))
''')

PARTITIONED = textwrap.dedent('''
    import json, resource, sys, time
    import dask, dask_geopandas
    c0, w0 = time.process_time(), time.perf_counter()
    from geosample.randomizer.partitioned import draw_partitioned, partitioned_frame
    with dask.config.set(scheduler="threads"):
        ddf = dask_geopandas.read_parquet(sys.argv[1], npartitions=int(sys.argv[2]))
        frame = partitioned_frame(ddf, crs=sys.argv[4])  # the frame CRS the local run chose
        draw = draw_partitioned(frame, 500, method="balanced", reserve=0.5, seed=5, name=sys.argv[3])
    print(json.dumps({"cpu": time.process_time() - c0, "wall": time.perf_counter() - w0,
                      "rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                      "sites": [[s.x, s.y] for s in draw.sites]}))
''')


def _run(code: str, *args: str) -> dict:
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


MAKE = textwrap.dedent('''
    import os, sys
    sys.path[:0] = [sys.argv[3], os.path.dirname(sys.argv[3])]
    from conftest import invented_lakes
    invented_lakes(int(sys.argv[1])).to_parquet(sys.argv[2], row_group_size=50_000)
    print("{}")
''')


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The lakes written by a child process: this process stays small, since a child's max RSS
    on Linux starts from its parent's RSS at the fork."""
    folder = tmp_path_factory.mktemp("regional")
    paths = {}
    for n in SIZES:
        paths[n] = folder / f"lakes{n}.parquet"
        _run(MAKE, str(n), str(paths[n]), str(Path(__file__).parent))
    return paths


def test_regional_frame_and_draw_grow_linearly(benchmark, files):
    results = {}

    def run():
        for n in SIZES:
            results[n] = _run(JOB, str(files[n]))

    benchmark.pedantic(run, rounds=1, iterations=1)
    for n in SIZES:
        r = results[n]
        print(f"\n{n:>9,} lakes: CPU {r['cpu']:.1f} s (frame {r['frame_cpu']:.1f}, draw {r['draw_cpu']:.1f}), "
              f"wall {r['wall']:.1f} s, max RSS {r['rss'] / 2**20:.0f} MiB")
    benchmark.extra_info.update({str(n): {k: v for k, v in r.items() if k != "sites"} for n, r in results.items()})
    big = results[SIZES[-1]]
    files["local_sites"], files["name"], files["crs"] = big["sites"], big["name"], big["crs"]
    assert big["cpu"] <= TARGET_CPU_S
    assert big["rss"] <= TARGET_RSS
    # about linear: 100x the lakes may cost at most 150x the CPU of the 10k run
    assert big["cpu"] <= 150 * results[SIZES[0]]["cpu"]


def test_partitioned_draw_of_a_million_lakes_equals_the_local_draw(benchmark, files):
    if "local_sites" not in files:
        local = _run(JOB, str(files[SIZES[-1]]))
        files["local_sites"], files["name"], files["crs"] = local["sites"], local["name"], local["crs"]
    box = {}

    def run():
        box["r"] = _run(PARTITIONED, str(files[SIZES[-1]]), "16", files["name"], files["crs"])

    benchmark.pedantic(run, rounds=1, iterations=1)
    r = box["r"]
    print(f"\npartitioned (16 partitions, threads): CPU {r['cpu']:.1f} s, wall {r['wall']:.1f} s, "
          f"max RSS {r['rss'] / 2**20:.0f} MiB")
    assert r["sites"] == files["local_sites"]
