"""``geosample simulate PLAN.toml --population POP.toml``: what the design does across many simulated seasons."""
from __future__ import annotations

import contextlib
import logging
import sys
from pathlib import Path
from typing import Callable, Iterator

import click

from . import cli as group
from ._common import command, echo_json


@contextlib.contextmanager
def _bar(title: str) -> Iterator[Callable[[int, int], None]]:
    """A rich progress bar on stderr (only on a terminal, and not with -q)."""
    if logging.getLogger("geosample").level > logging.WARNING or not sys.stderr.isatty():
        yield lambda done, total: None
        return
    from rich.console import Console
    from rich.progress import Progress

    with Progress(console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(title, total=None)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        yield update


@command(group, "simulate", short_help="Run the design over many simulated seasons: coverage, widths, decisions.")
@click.argument("plan", metavar="PLAN.toml", type=click.Path(path_type=Path))
@click.option("--population", "population", required=True, type=click.Path(path_type=Path),
              help="The population file (TOML, docs/population-file.md).")
@click.option("--replicates", type=click.IntRange(1, 1_000_000), default=1000, show_default=True,
              help="Simulated seasons.")
@click.option("--workers", type=click.IntRange(0, 512), default=None,
              help="Processes of the embedded Dask cluster [default: the machine's cores]; 0 runs in this process.")
@click.option("--scheduler", default=None, metavar="tcp://HOST:PORT",
              help="Send the work to an existing 'dask scheduler' instead of starting a cluster.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Root seed of the simulation (replicate i uses SeedSequence(seed).spawn(N)[i]).")
@click.option("--oc-points", type=click.IntRange(0, 50), default=7, show_default=True,
              help="Points of the operating characteristic (level shifted across the criterion); 0: none.")
@click.option("--oc-replicates", type=click.IntRange(1, 1_000_000), default=None,
              help="Simulated seasons per operating-characteristic point [default: --replicates / 4, at least 50].")
@click.option("--batch", type=click.IntRange(1, 10_000), default=25, show_default=True,
              help="Replicates per Dask task.")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
def simulate_command(plan: Path, population: Path, replicates: int, workers: int | None, scheduler: str | None,
                     seed: int, oc_points: int, oc_replicates: int | None, batch: int, as_json: bool) -> None:
    """Draw the plan's sites, field days and times afresh for each simulated
    season, make results from the population file, assess them exactly as
    'geosample assess' would, and report how often the interval covers the
    season's true mean (with its Monte Carlo error), the half-widths, the share
    of each decision, and the operating characteristic: how often the design
    concludes "below" as the population's level is shifted across the criterion.

    \b
    The same --seed gives the same figures with any --workers, --batch or
    --scheduler. Figures are on the analysis scale (log10 units for a geomean
    plan). The plan's own seed is not used and nothing is written.
    """
    from ..design import load_layers
    from ..plan import load_plan
    from ..simulate.engine import simulate
    from ..simulate.population import load_population
    from ..simulate.run import make_setup
    from ._progress import steps

    pop = load_population(population)  # checked before the frame is built
    p = load_plan(plan)
    with steps("building the frame") as progress:
        setup = make_setup(p, load_layers(p), progress=progress)
    pop = load_population(population, strata=[s.name for s in setup.template.frame.strata])
    n_oc = oc_replicates if oc_replicates is not None else max(50, replicates // 4)
    with _bar("simulating") as bar:
        sim = simulate(setup, pop, replicates=replicates, seed=seed, workers=workers, scheduler=scheduler,
                       batch=batch, oc_points=oc_points, oc_replicates=n_oc, progress=bar)
    if as_json:
        echo_json(sim.summary)
        return
    click.echo(summary_text(sim.summary))


def summary_text(s: dict) -> str:
    """The terminal table."""
    plan = s["plan"]
    conf = plan["confidence"]
    lines = [
        f"{s['replicates']} simulated seasons, seed {s['seed']} ({plan['bound']} bound, {conf:.0%} confidence, "
        f"{plan['sides']}-sided; {plan['primary_samples']} primary samples on {plan['field_days']} field days "
        f"of {plan['allowed_days']} allowed)",
        f"  true mean (average over seasons)  {s['true_mean']:.4g} ({s['scale']})",
        f"  coverage of the true mean         {s['coverage']:.3f} (95% Clopper-Pearson interval "
        f"{s['coverage_interval'][0]:.3f} to {s['coverage_interval'][1]:.3f} over the seasons; nominal {conf:g})",
    ]
    hw = s["half_width"]
    lines.append(f"  half-width                        median {hw['median']:.4g}, 10-90% {hw['q10']:.4g} to "
                 f"{hw['q90']:.4g}, max {hw['max']:.4g}")
    lines.append("  decisions                         " + ", ".join(f"{k} {v:.1%}" for k, v in s["decisions"].items()))
    if s["approximate"]:
        lines.append(f"  approximate (range voided)        {s['approximate']:.1%} of seasons")
    if s["operating_characteristic"]:
        lines += ["", "Operating characteristic (same seasons, level shifted):",
                  f"  {'true mean':>12}  {'P(below)':>9}  {'± MC 95%':>9}  {'coverage':>9}"]
        for r in s["operating_characteristic"]:
            lines.append(f"  {r['true_mean']:>12.4g}  {r['below']:>9.3f}  {1.96 * r['below_mc_error']:>9.3f}  "
                         f"{r['coverage']:>9.3f}")
        if plan["criterion"] is not None:
            lines.append(f"  criterion {plan['criterion']:g} ({s['scale']} on the plan's scale; log10 taken for a "
                         "geomean plan)" if s["scale"] == "log10" else f"  criterion {plan['criterion']:g}")
    return "\n".join(lines)
