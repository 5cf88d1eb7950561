"""``geosample plan PLAN.toml -o OUT``: the whole design and its field package."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command, echo_json


@command(group, "plan", short_help="Draw sites and field times from a plan file; write the field package.")
@click.argument("plan_file", metavar="PLAN.toml", type=click.Path(path_type=Path))
@click.option("-o", "--out", "out", required=True, type=click.Path(path_type=Path),
              help="Folder to write the design into (must not exist, unless --overwrite).")
@click.option("--overwrite", is_flag=True,
              help="Replace OUT if it is a design folder written by geosample and left as written (never a "
                   "folder holding the plan or its inputs, or anything else).")
@click.option("--bundle-inputs/--no-bundle-inputs", default=True, show_default=True,
              help="Copy the plan and its layers (a Shapefile with its own side files) into OUT/inputs/, so the "
                   "folder alone can be verified wherever it is copied.")
@click.option("--registration", type=click.Path(path_type=Path), default=None, metavar="REGISTRATION.json",
              help="Draw under this registration (written earlier by 'geosample register'); needs --public-value.")
@click.option("--public-value", default=None, metavar="TEXT",
              help="The public value the registration names, exactly as its source published it.")
@click.option("--json", "as_json", is_flag=True, help="Print a summary as JSON.")
def plan_command(plan_file: Path, out: Path, overwrite: bool, bundle_inputs: bool, registration: Path | None,
                 public_value: str | None, as_json: bool) -> None:
    """Build the sampling frame, size and allocate the effort, draw primary and
    reserve sites and the field days and times, plan the day routes, and write
    the field package into OUT: schedule.csv, sites.gpx, sites.geojson,
    sites.gpkg, map.html, report.html, days/ (per field day a GPX, a CSV and
    a one-page printable sheet) and manifest.json.

    Each run is added to the plan's draw history, kept by the plan's content (not
    its file name): OUT/draws.csv, a per-user store and PLAN.toml.draws.csv
    beside the plan. The report says how many draws this plan has had. Draw once.

    With --registration and --public-value the seed is made from the registration
    and the public value (see 'geosample register'); the plan and its layers must
    be the registered ones, the plan must not fix its own seed, and the public
    value's date must have begun.

    OUT is written whole or not at all (a hidden folder beside it is renamed into
    place), and a second run to the same OUT while one is working exits with
    code 2.
    """
    from ..workflow import run_plan
    from ._progress import steps

    with steps("geosample plan") as progress:
        run = run_plan(plan_file, out, overwrite=overwrite, progress=progress, bundle_inputs=bundle_inputs,
                       registration=registration, public_value=public_value)
    _summary(run, as_json)


def _summary(run, as_json: bool) -> None:
    from ..registration import printable

    d = run.design
    a = d.allocation
    primaries = sum(1 for s in d.draw.sites if s.role == "primary")
    reserves = len(d.draw.sites) - primaries
    days = sorted({v.visit_date for v in d.schedule.visits if v.visit_date})
    if as_json:
        echo_json({
            "out": str(run.folder), "seed": str(d.seed), "seed_source": d.seed_source, "draw_count": d.draw_count,
            "registration": d.registration,
            "n": a.total, "allocation": a.as_dict(), "bound": a.bound, "error_bound": a.error_bound,
            "achieved_tolerance": a.achieved_tolerance, "primary_sites": primaries, "reserve_sites": reserves,
            "field_days": len(days), "files": sorted(run.files),
        })
        return
    click.echo(f"Design written to {run.folder}/")
    click.echo(f"  {a.total} primary sites and {reserves} reserves in {len(a.strata)} strata "
               f"({', '.join(f'{k} {v}' for k, v in a.as_dict().items())}); {a.method} allocation, {a.bound} bound.")
    if days:
        click.echo(f"  {len(days)} field days from {days[0]} to {days[-1]}.")
    click.echo(f"  Seed {d.seed} ({d.seed_source}); draw {d.draw_count} for this plan.")
    if d.registration:
        click.echo(f"  Registered draw: registration {d.registration['sha256'][:16]}..., public value "
                   f"\"{printable(d.registration['public_value'])}\" ({printable(d.registration['public_source'])}, "
                   f"{d.registration['public_date']}).")
    else:
        click.echo("  Not registered: nothing shows the seed was chosen before the sites were seen "
                   "(see 'geosample register').")
    if d.draw_count > 1:
        click.echo("  Note: this plan has been drawn before. The report says so: re-drawing until the sites look "
                   "convenient defeats the randomisation.")
    top = sorted(n for n in run.files if "/" not in n)
    days = sorted({n.split("/", 1)[0] + "/" for n in run.files if "/" in n})
    click.echo("  Files: " + ", ".join(top + [f"{d} ({sum(1 for n in run.files if n.startswith(d))} files: a GPX, "
                                               "a CSV and a printable sheet per field day)" for d in days]))
    click.echo(f"  Check it any time with: geosample verify {run.folder}")
