"""Benchmark: the demo plan end to end (frame, sizing, draw, times, routes, package, manifest).

Target (issue "The draw"): under 3 s on these machines (2 cores). Run with
``pytest tests/benchmarks --benchmark-only``.
"""
from __future__ import annotations

import itertools
import shutil

from geosample.workflow import copy_demo, run_plan

TARGET_S = 3.0


def test_demo_plan_end_to_end(benchmark, tmp_path):
    plan = copy_demo(tmp_path / "inputs")
    counter = itertools.count()

    def run():
        out = tmp_path / f"out{next(counter)}"
        run_plan(plan, out, record=False)
        shutil.rmtree(out)

    benchmark.pedantic(run, rounds=3, iterations=1, warmup_rounds=1)
    assert benchmark.stats.stats.median < TARGET_S, f"demo took {benchmark.stats.stats.median:.2f} s"


def test_verify_demo(benchmark, tmp_path):
    plan = copy_demo(tmp_path / "inputs")
    out = tmp_path / "out"
    run_plan(plan, out, record=False)
    from geosample.audit import verify

    result = benchmark.pedantic(lambda: verify(out), rounds=3, iterations=1)
    assert result.ok
