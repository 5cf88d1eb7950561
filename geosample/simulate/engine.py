"""Many simulated seasons on Dask, and what they say about the design.

:func:`simulate` cuts the replicates into batches (``batch`` replicates a task: the
scheduler costs about a millisecond a task), runs them on a
``dask.distributed`` cluster (an embedded ``LocalCluster`` of processes, or an
existing scheduler's address) or, with ``workers=0``, in this process, and returns a
:class:`Simulation`. Replicate ``i`` always uses ``SeedSequence(seed).spawn(N)[i]``,
so the figures are identical whatever the batching, the workers or the cluster.

Scenarios: scenario 0 is the population as given; the operating characteristic
re-runs the SAME replicates (same seeds: common random numbers) with the level
shifted so that the true mean moves across a range around the criterion.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

import numpy as np

from .population import Population
from .run import Setup, run_batch

__all__ = ["Simulation", "simulate", "summarize", "oc_shifts", "DEFAULT_BATCH"]

#: Replicates per Dask task.
DEFAULT_BATCH = 25


@dataclass(frozen=True)
class Simulation:
    """A finished simulation: every replicate's figures (``rows``) and the summary (``summary``)."""

    summary: dict
    rows: tuple[dict, ...] = field(repr=False)

    def to_frame(self) -> Any:
        """One row per replicate and scenario (pandas DataFrame): scenario, shift, replicate, true_mean,
        estimate, low, high, half_width, covered, decision, approximate, days, n, censored."""
        import pandas

        cols = ["scenario", "shift", "replicate", "true_mean", "estimate", "low", "high", "half_width", "covered",
                "decision", "approximate", "days", "n", "censored"]
        return pandas.DataFrame([{c: r.get(c) for c in cols} for r in self.rows], columns=cols)


def oc_shifts(setup: Setup, pop: Population, points: int) -> list[float]:
    """Level shifts that put the true mean at ``points`` values across the criterion (analysis scale).

    The span is the plan's tolerance on either side (else a quarter of its range, else 1),
    times 2, centred on the criterion; the shift is measured from the population's
    unclipped frame mean without day effects (exact: see :mod:`geosample.simulate.population`).
    """
    if points <= 0:
        return []
    s = setup.settings
    crit = s["survey"].get("criterion")
    if crit is None:
        return []
    geo = s["survey"]["statistic"] == "geomean"
    c = math.log10(crit) if geo else float(crit)
    size = s["size"]
    span = size.get("tolerance") or ((size.get("range") or 4.0) / 4)
    base = _base_mean(setup, pop)
    grid = np.linspace(c - 2 * span, c + 2 * span, points)
    return [float(v - base) for v in grid]


def _base_mean(setup: Setup, pop: Population) -> float:
    from .population import true_mean

    day = pop.wet_probability * pop.wet_effect
    no_noise = Population(level=pop.level, strata=pop.strata, per_km=pop.per_km, bearing_deg=pop.bearing_deg,
                          amplitude=pop.amplitude)
    return true_mean(no_noise, setup.truth, np.array([day]))


def _batches(n: int, batch: int) -> list[list[int]]:
    return [list(range(i, min(n, i + batch))) for i in range(0, n, batch)]


def _run_task(setup: Setup, pop: Population, seed: int, j: int, shift: float, indices: list[int]) -> list[dict]:
    rows = run_batch(setup, pop.shifted(shift) if shift else pop, seed, indices)
    return [dict(r, scenario=j, shift=shift) for r in rows]


def simulate(setup: Setup, pop: Population, *, replicates: int, seed: int, workers: int | None = None,
             scheduler: str | None = None, batch: int = DEFAULT_BATCH, oc_points: int = 0,
             oc_replicates: int | None = None, progress: Callable[[int, int], None] | None = None) -> Simulation:
    """Run the replicates and summarise them.

    Parameters
    ----------
    workers : int, optional
        Size of the embedded LocalCluster (processes, one thread each); default the
        machine's cores; 0 runs everything in this process (no Dask).
    scheduler : str, optional
        ``tcp://HOST:PORT`` of an existing ``dask scheduler`` (then ``workers`` is ignored).
    progress : callable(done, total), optional
        Called as tasks finish.
    """
    shifts = [0.0] + oc_shifts(setup, pop, oc_points)
    n_oc = oc_replicates if oc_replicates is not None else replicates
    # scenario 0: the population as given; 1..: the operating characteristic's shifted levels
    tasks = [(0, 0.0, idx) for idx in _batches(replicates, batch)]
    tasks += [(j, sh, idx) for j, sh in enumerate(shifts[1:], 1) for idx in _batches(n_oc, batch)]
    done = 0
    out: list[dict] = []
    if workers == 0 and scheduler is None:
        for t in tasks:
            out += _run_task(setup, pop, seed, *t)
            done += 1
            if progress:
                progress(done, len(tasks))
    else:
        out = _on_dask(setup, pop, seed, tasks, workers, scheduler, progress)
    out.sort(key=lambda r: (r["scenario"], r["replicate"]))
    return Simulation(summarize(out, setup, pop, seed, shifts), tuple(out))


def _on_dask(setup: Setup, pop: Population, seed: int, tasks: list, workers: int | None, scheduler: str | None,
             progress: Callable[[int, int], None] | None) -> list[dict]:
    from dask.distributed import Client, LocalCluster, as_completed

    cluster = None
    if scheduler:
        client = Client(scheduler, timeout="20s")
    else:
        cluster = LocalCluster(n_workers=workers or os.cpu_count() or 1, threads_per_worker=1, processes=True,
                               dashboard_address=":0")
        client = Client(cluster)
    try:
        shared = client.scatter(setup, broadcast=True)
        futures = [client.submit(_run_task, shared, pop, seed, j, s, idx, pure=False) for j, s, idx in tasks]
        out: list[dict] = []
        for k, fut in enumerate(as_completed(futures), 1):
            out += fut.result()
            if progress:
                progress(k, len(futures))
        return out
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _quantiles(v: np.ndarray) -> dict:
    if v.size == 0:
        return {}
    q = np.quantile(v, [0.0, 0.1, 0.5, 0.9, 1.0])
    return {"mean": float(v.mean()), "min": float(q[0]), "q10": float(q[1]), "median": float(q[2]),
            "q90": float(q[3]), "max": float(q[4])}


def _clopper_pearson(k: int, n: int, level: float = 0.95) -> list[float] | None:
    """The exact (Clopper-Pearson) interval for a proportion k/n: never of zero width at 0 or n,
    where the normal-approximation error is 0."""
    if not n:
        return None
    from scipy.stats import beta

    a = 1.0 - level
    lo = 0.0 if k == 0 else float(beta.ppf(a / 2, k, n - k + 1))
    hi = 1.0 if k == n else float(beta.ppf(1 - a / 2, k + 1, n - k))
    return [lo, hi]


def _scenario(rows: list[dict]) -> dict:
    n = len(rows)
    cov = sum(1 for r in rows if r["covered"]) / n if n else float("nan")
    decisions: dict[str, float] = {}
    for r in rows:
        decisions[r["decision"]] = decisions.get(r["decision"], 0) + 1
    below = decisions.get("below", 0) / n if n else float("nan")
    return {"replicates": n, "true_mean": float(np.mean([r["true_mean"] for r in rows])) if n else None,
            "coverage": cov, "coverage_mc_error": math.sqrt(cov * (1 - cov) / n) if n else None,
            "coverage_interval": _clopper_pearson(sum(1 for r in rows if r["covered"]), n),
            "below": below, "below_mc_error": math.sqrt(below * (1 - below) / n) if n else None,
            "decisions": {k: v / n for k, v in sorted(decisions.items())},
            "half_width": _quantiles(np.array([r["half_width"] for r in rows if r["half_width"] is not None],
                                              float)),
            "approximate": sum(1 for r in rows if r["approximate"]) / n if n else None}


def summarize(rows: list[dict], setup: Setup, pop: Population, seed: int, shifts: Sequence[float]) -> dict:
    """The JSON summary (analysis scale: log10 units for a geomean plan)."""
    s = setup.settings
    main = [r for r in rows if r["scenario"] == 0]
    first = _scenario(main)
    oc = []
    for j, shift in enumerate(shifts):
        part = [r for r in rows if r["scenario"] == j]
        if j == 0 and len(shifts) > 1:
            continue
        if part:
            sc = _scenario(part)
            oc.append({"shift": shift, "true_mean": sc["true_mean"], "below": sc["below"],
                       "below_mc_error": sc["below_mc_error"], "coverage": sc["coverage"],
                       "coverage_mc_error": sc["coverage_mc_error"], "replicates": sc["replicates"],
                       "decisions": sc["decisions"]})
    size, survey = s["size"], s["survey"]
    return {
        "format": "geosample-simulation/1",
        "seed": int(seed),
        "replicates": first["replicates"],
        "scale": "log10" if survey["statistic"] == "geomean" else "plan units",
        "plan": {"bound": size["bound"], "confidence": size["confidence"], "sides": size["sides"],
                 "statistic": survey["statistic"], "criterion": survey.get("criterion"),
                 "direction": survey.get("direction", "below"), "primary_samples": setup.allocation.total,
                 "field_days": setup.field_days, "allowed_days": len(setup.days)},
        "population": pop.as_dict(),
        "true_mean": first["true_mean"],
        "coverage": first["coverage"],
        "coverage_mc_error": first["coverage_mc_error"],
        "coverage_interval": first["coverage_interval"],
        "half_width": first["half_width"],
        "decisions": first["decisions"],
        "approximate": first["approximate"],
        "operating_characteristic": oc if len(shifts) > 1 else [],
        "method": ("per replicate: sites (randomizer.space.draw_sites), field days and planned times "
                   "(randomizer.time.schedule_visits) drawn as the plan draws them; results from the population; "
                   "assessed by stats.assessment.assess; day routes not rebuilt (planned times stay uniform over "
                   "the window); true mean computed over the frame, every allowed day and the windows; "
                   "operating characteristic on the same seeds with the level shifted"),
    }
