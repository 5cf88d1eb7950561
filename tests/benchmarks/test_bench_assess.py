"""Speed targets of `geosample assess` (pytest-benchmark; not part of the default run).

Goals (issue 6): assess 10,000 results in under 2 s; the betting interval for n = 1,000 in under 1 s.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))

from test_results import fill, write_csv, write_design_folder  # noqa: E402

from geosample.export.assessment import write_assessment  # noqa: E402
from geosample.results import read_results  # noqa: E402
from geosample.stats.assessment import assess  # noqa: E402
from geosample.stats.betting import betting_interval, betting_sequence  # noqa: E402


@pytest.fixture(scope="module", params=["chebyshev", "betting"])
def big_design(request, tmp_path_factory):
    tmp = tmp_path_factory.mktemp(f"bench-{request.param}")
    manifest, rows = write_design_folder(tmp / "design", n=(4000, 3500, 2500), reserves=2, range=400,
                                         bound=request.param)
    rng = np.random.default_rng(1)
    vals = {r["site_id"]: f"{rng.uniform(5, 300):.1f}" for r in rows if r["role"] == "primary"}
    res = write_csv(tmp / "results.csv", fill(rows, vals))
    return tmp / "design", manifest, rows, res


def test_assess_10000_results(benchmark, big_design):
    folder, manifest, rows, res = big_design

    def run():
        r = read_results(res, manifest, rows)
        a = assess(r, manifest)
        write_assessment(a, folder, results_path=res)
        return a

    a = benchmark.pedantic(run, rounds=3, iterations=1)
    assert a.n == 10000
    assert benchmark.stats["max"] < 2.0, f"assess of 10,000 results took {benchmark.stats['max']:.2f} s (goal < 2 s)"


def test_betting_interval_n_1000(benchmark):
    rng = np.random.default_rng(2)
    v = 400 * rng.beta(2, 6, size=1000)
    iv = benchmark.pedantic(lambda: betting_interval(v, lower=0, range=400), rounds=5, iterations=1)
    assert iv.low < v.mean() < iv.high
    assert benchmark.stats["max"] < 1.0, f"betting interval n=1000 took {benchmark.stats['max']:.2f} s (goal < 1 s)"


def test_betting_sequence_path_n_1000(benchmark):
    # the whole confidence sequence (interval after every sample), as assess computes it for "established after k"
    rng = np.random.default_rng(3)
    x = rng.beta(2, 6, size=1000)
    seq = benchmark.pedantic(lambda: betting_sequence(x, alpha=0.05), rounds=5, iterations=1)
    assert seq.low.size == 1001
    assert benchmark.stats["max"] < 1.0, f"betting sequence n=1000 took {benchmark.stats['max']:.2f} s (goal < 1 s)"
