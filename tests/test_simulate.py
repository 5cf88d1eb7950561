"""``geosample simulate`` (geosample/simulate/): population file, true mean, replicates, Dask.

External checks: the expectation of a clipped normal / lognormal value against numerical
integration (scipy.integrate.quad); the true mean's linear part against a dense-grid integral
over the strata polygons (shapely); t-bound coverage within Monte Carlo error of the nominal 90%
when days do not matter (the t interval's exact coverage for normal data, Student 1908; here
approximate, several strata with Welch-type df, so checked at 3 Monte Carlo standard errors);
the day-effect populations of issue 10 (tests/test_assessment_days.py: day-level bounds cover at
least nominally, the t on day units above 0.8) run through the full draw and assessment; the same
seed gives identical JSON in this process, on 1 and 2 LocalCluster workers, and on a cluster of one
``dask scheduler`` and two ``dask worker`` processes on 127.0.0.1.
"""
from __future__ import annotations

import json
import math
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, stats

import geosample
from geosample.cli import main
from geosample.errors import SettingError
from geosample.plan import load_plan
from geosample.simulate.engine import simulate
from geosample.simulate.population import Population, expected_clipped, population_from_dict, true_mean
from geosample.simulate.run import make_setup

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import at_least_nominal  # noqa: E402

ROOT = Path(geosample.__file__).resolve().parents[1]


def _plan(tmp: Path, edits: dict[str, str]) -> Path:
    from geosample.workflow import copy_demo

    plan = copy_demo(tmp / "demo")
    text = plan.read_text()
    for old, new in edits.items():
        assert old in text, old
        text = text.replace(old, new)
    plan.write_text(text)
    return plan


@pytest.fixture(scope="module")
def demo_setup(tmp_path_factory):
    plan = _plan(tmp_path_factory.mktemp("sim"), {})
    return make_setup(load_plan(plan)), plan


# --------------------------------------------------------------------------- population file
@pytest.mark.parametrize("raw, key", [
    ({"population": {}}, "population.level"),
    ({"population": {"level": "40"}}, "population.level"),
    ({"population": {"level": 40, "noise": {"sd": -1}}}, "population.noise.sd"),
    ({"population": {"level": 40, "noise": {"distribution": "gamma"}}}, "population.noise.distribution"),
    ({"population": {"level": 40, "day": {"wet_probability": 1.5}}}, "population.day.wet_probability"),
    ({"population": {"level": 40, "day": {"sdd": 3}}}, "population.day.sdd"),
    ({"population": {"level": 40, "gradient": {"bearing_deg": 400}}}, "population.gradient.bearing_deg"),
    ({"population": {"level": 40, "censoring": {"below": 10, "above": 5}}}, "population.censoring.above"),
    ({"population": {"level": 40, "strata": {"Nowhere": 3}}}, "population.strata.Nowhere"),
    ({"population": {"level": 40}, "extra": {}}, "top-level tables"),
    ({"population": {"level": 40, "colour": 1}}, "population.colour"),
])
def test_every_bad_population_key_names_file_key_and_value(raw, key):
    with pytest.raises(SettingError) as e:
        population_from_dict(raw, source="population file 'p.toml'", strata=["North Basin"])
    assert "'p.toml'" in str(e.value) and key in str(e.value)


def test_bad_population_file_exits_2_without_traceback(tmp_path, capsys):
    pop = tmp_path / "pop.toml"
    pop.write_text("[population]\nlevel = 40\n[population.noise]\nsd = -3\n")
    code = main(["simulate", str(tmp_path / "missing-plan.toml"), "--population", str(pop)])
    err = capsys.readouterr().err
    assert code == 2 or code is None
    assert "population.noise.sd" in err and "-3" in err and "Traceback" not in err


# --------------------------------------------------------------------------- true mean
@pytest.mark.parametrize("dist, m, s, lo, hi", [
    ("normal", 40.0, 8.0, 0.0, 80.0), ("normal", 5.0, 8.0, 0.0, 80.0), ("normal", 78.0, 8.0, 0.0, math.inf),
    ("lognormal", 40.0, 0.8, 0.0, 80.0), ("lognormal", 40.0, 0.8, 10.0, math.inf), ("lognormal", 3.0, 1.2, 1.0, 50.0),
])
def test_expected_clipped_value_matches_numerical_integration(dist, m, s, lo, hi):
    pop = Population(level=0.0, distribution=dist, noise_sd=s)
    if dist == "normal":
        x = stats.norm(m, s)
    else:
        x = stats.lognorm(s, scale=m * math.exp(-s * s / 2))  # mean m
    ref = integrate.quad(lambda v: min(max(v, lo), hi) * x.pdf(v), *x.support(), limit=200)[0] \
        if math.isinf(hi) else (lo * x.cdf(lo) + hi * x.sf(hi) + integrate.quad(lambda v: v * x.pdf(v), lo, hi)[0])
    got = float(expected_clipped(np.array([m]), pop, lo, hi)[0])
    assert got == pytest.approx(ref, rel=1e-6, abs=1e-8)


def test_true_mean_linear_terms_match_a_dense_grid_integral(demo_setup):
    import shapely

    setup, _ = demo_setup
    names = [s.name for s in setup.template.frame.strata]
    pop = Population(level=30.0, strata=((names[1], 12.0),), per_km=2.5, bearing_deg=60.0, amplitude=5.0)
    got = true_mean(pop, setup.truth, np.array([1.0, -3.0, 4.0]))
    # independent: a 25 m grid over each stratum polygon, area-weighted
    dx, dy = math.sin(math.radians(60)), math.cos(math.radians(60))
    total = 0.0
    for s in setup.template.frame.strata:
        x0, y0, x1, y1 = s.geometry.bounds
        gx, gy = np.meshgrid(np.arange(x0, x1, 25.0), np.arange(y0, y1, 25.0))
        keep = shapely.contains_xy(s.geometry, gx.ravel(), gy.ravel())
        xs, ys = gx.ravel()[keep], gy.ravel()[keep]
        along = ((xs - setup.truth.origin[0]) * dx + (ys - setup.truth.origin[1]) * dy) / 1000
        off = 12.0 if s.name == names[1] else 0.0
        total += s.weight * float(np.mean(30.0 + off + 2.5 * along + (1.0 - 3.0 + 4.0) / 3))
    assert got == pytest.approx(total, abs=0.05)


def test_true_mean_with_clipping_is_the_mean_of_clipped_expectations_over_all_days(demo_setup):
    setup, _ = demo_setup
    pop = Population(level=5.0, noise_sd=6.0)  # the demo plan's range is [0, 80]: clipping at 0 matters
    days = np.array([-4.0, 0.0, 3.0, 10.0])
    ref = float(np.mean([integrate.quad(lambda v: max(v, 0.0) * stats.norm(5.0 + d, 6.0).pdf(v), -60, 80)[0]
                         for d in days]))
    assert ref > 5.0 + days.mean() + 0.5  # the clipping correction is not negligible here
    assert true_mean(pop, setup.truth, days) == pytest.approx(ref, rel=1e-5)


# --------------------------------------------------------------------------- replicates
@pytest.mark.slow
def test_t_bound_covers_nominally_without_day_effects_and_true_mean_is_the_level(tmp_path):
    plan = _plan(tmp_path, {"tolerance = 16\nrange = 80": "n = 48\nrange = 1000\nsd = 8", 'bound = "chebyshev"':
                            'bound = "t"'})
    setup = make_setup(load_plan(plan))
    pop = population_from_dict({"population": {"level": 400, "noise": {"distribution": "normal", "sd": 8}}})
    reps = 300
    sim = simulate(setup, pop, replicates=reps, seed=11, workers=0)
    s = sim.summary
    assert s["true_mean"] == pytest.approx(400.0, abs=1e-9)
    se = math.sqrt(0.9 * 0.1 / reps)
    assert abs(s["coverage"] - 0.90) <= 3 * se, s["coverage"]
    assert s["coverage_mc_error"] == pytest.approx(math.sqrt(s["coverage"] * (1 - s["coverage"]) / reps))
    frame = sim.to_frame()
    assert len(frame) == reps and frame["covered"].mean() == s["coverage"]


@pytest.mark.slow
@pytest.mark.parametrize("bound, population", [
    # issue 10's "dominant" day effect (sd 20, noise 4) and its "stress" case (wet days near the top of the
    # range, dry days near 0), on the demo frame; range 80 as there
    ("chebyshev", {"level": 30, "strata": {"South Basin": 15}, "day": {"sd": 20}, "noise": {"sd": 4}}),
    ("hoeffding", {"level": -10, "strata": {"South Basin": 15}, "day": {"wet_probability": 0.25, "wet_effect": 100},
                   "noise": {"sd": 1}}),
])
def test_day_effect_populations_cover_at_least_nominally_as_in_issue_10(tmp_path, bound, population):
    plan = _plan(tmp_path, {'bound = "chebyshev"': f'bound = "{bound}"'})
    setup = make_setup(load_plan(plan))
    pop = population_from_dict({"population": population}, strata=[s.name for s in setup.template.frame.strata])
    reps = 150
    s = simulate(setup, pop, replicates=reps, seed=3, workers=0).summary
    assert at_least_nominal(s["coverage"], 0.90, reps), s["coverage"]


# --------------------------------------------------------------------------- same seed, any workers
def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture
def dask_cluster():
    """One ``dask scheduler`` and two ``dask worker`` processes on 127.0.0.1 (killed afterwards)."""
    port = _free_port()
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    dask = str(Path(sys.executable).with_name("dask"))
    procs = [subprocess.Popen([dask, "scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
                              env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    address = f"tcp://127.0.0.1:{port}"
    try:
        for _ in range(2):
            procs.append(subprocess.Popen([dask, "worker", address, "--nthreads", "1", "--no-dashboard",
                                           "--host", "127.0.0.1"], env=env, stdout=subprocess.DEVNULL,
                                          stderr=subprocess.DEVNULL))
        from dask.distributed import Client

        deadline = time.time() + 120
        while True:
            try:
                with Client(address, timeout="5s") as c:
                    c.wait_for_workers(2, timeout=120)
                break
            except OSError:
                if time.time() > deadline:
                    raise
                time.sleep(1)
        yield address
    finally:
        for p in procs:
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()


@pytest.mark.slow
def test_same_seed_gives_identical_json_in_process_on_1_and_2_workers_and_on_a_cluster(demo_setup, dask_cluster,
                                                                                      capsys):
    setup, plan = demo_setup
    pop = population_from_dict({"population": {"level": 40, "day": {"sd": 5, "wet_probability": 0.2,
                                                                     "wet_effect": 20}, "noise": {"sd": 6}}})
    kw = dict(replicates=7, seed=42, oc_points=2, oc_replicates=3)
    here = simulate(setup, pop, workers=0, batch=7, **kw)
    one = simulate(setup, pop, workers=1, batch=2, **kw)
    two = simulate(setup, pop, workers=2, batch=3, **kw)
    remote = simulate(setup, pop, scheduler=dask_cluster, batch=1, **kw)
    text = json.dumps(here.summary, sort_keys=True)
    assert json.dumps(one.summary, sort_keys=True) == text
    assert json.dumps(two.summary, sort_keys=True) == text
    assert json.dumps(remote.summary, sort_keys=True) == text
    assert here.rows == two.rows == remote.rows
    assert len(here.rows) == 7 + 2 * 3 and here.summary["coverage"] is not None
    # the command prints the same figures
    popfile = plan.parent / "pop.toml"
    popfile.write_text("[population]\nlevel = 40\n[population.day]\nsd = 5\nwet_probability = 0.2\nwet_effect = 20\n"
                       "[population.noise]\nsd = 6\n")
    capsys.readouterr()
    code = main(["simulate", str(plan), "--population", str(popfile), "--replicates", "7", "--seed", "42",
                 "--oc-points", "2", "--oc-replicates", "3", "--workers", "0", "--json"])
    assert not code
    out = json.loads(capsys.readouterr().out)
    assert json.dumps(out, sort_keys=True) == text


def test_coverage_interval_is_exact_and_never_of_zero_width():
    """Clopper-Pearson: with all n seasons covering, the lower end is (a/2)^(1/n) (closed form of the
    beta quantile, common practice); 0.025^(1/60) = 0.9404. Elsewhere checked against
    statsmodels.stats.proportion.proportion_confint(method="beta")."""
    from statsmodels.stats.proportion import proportion_confint

    from geosample.simulate.engine import _clopper_pearson

    lo, hi = _clopper_pearson(60, 60)
    assert hi == 1.0 and lo == pytest.approx(0.025 ** (1 / 60), rel=1e-9) and lo < 1.0
    ref = proportion_confint(271, 300, alpha=0.05, method="beta")
    assert _clopper_pearson(271, 300) == pytest.approx(list(ref), rel=1e-9)
