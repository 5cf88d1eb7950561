"""Speed of ``geosample size`` as a whole process (run with ``pytest tests/benchmarks --benchmark-only``).

Target (DESIGN.md / DEVELOPERS.md): under 0.5 s wall for the whole process, which
means scipy, geopandas and folium must not be imported for it.
"""
from __future__ import annotations

import subprocess
import sys

TARGET_S = 0.5  # goal: `geosample size` starts, sizes and prints in under 0.5 s


def _size(*args: str) -> str:
    done = subprocess.run([sys.executable, "-m", "geosample", "size", *args], check=True, capture_output=True,
                          text=True)
    return done.stdout


def test_bench_size_process(benchmark):
    out = benchmark.pedantic(_size, args=("--tolerance", "15", "--range", "80", "--confidence", "0.9"),
                             rounds=10, iterations=1, warmup_rounds=1)
    assert out.startswith("72 samples")
    assert benchmark.stats.stats.median < TARGET_S


def test_bench_size_process_t_bound(benchmark):
    # the t bound imports scipy.special (not scipy.stats) for the t distribution: about 0.35 s here
    out = benchmark.pedantic(_size, args=("--tolerance", "10", "--sd", "30", "--bound", "t"), rounds=5,
                             iterations=1, warmup_rounds=1)
    assert out.startswith("38 samples")
    assert benchmark.stats.stats.median < TARGET_S


def test_bench_stratified_allocation(benchmark):
    from geosample.stats.sizing import allocate

    weights = [1.0 + (h % 7) for h in range(20)]
    ranges = [20.0 + 5 * (h % 5) for h in range(20)]
    a = benchmark(allocate, weights, tolerance=1.0, range=ranges, method="neyman", bound="hoeffding")
    assert a.error_bound <= 0.05 * (1 + 1e-9)


def test_size_does_not_import_heavy_libraries(benchmark):
    # the benchmark fixture makes --benchmark-only run this check (it times the one process)
    code = ("import sys; from geosample.cli import main; main(['size', '--tolerance', '15', '--range', '80']); "
            "print(sorted(m for m in ('scipy', 'geopandas', 'folium', 'pandas', 'shapely') if m in sys.modules))")
    out = benchmark.pedantic(lambda: subprocess.run([sys.executable, "-c", code], check=True, capture_output=True,
                                                    text=True).stdout, rounds=1, iterations=1)
    assert out.strip().splitlines()[-1] == "[]"
