"""``geosample demo -o OUT``: the packaged demo plan on the invented demo lake."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command


@command(group, "demo", short_help="Run the packaged demo plan on an invented lake.")
@click.option("-o", "--out", "out", required=True, type=click.Path(path_type=Path),
              help="Folder to write the demo design into (must not exist, unless --overwrite).")
@click.option("--overwrite", is_flag=True,
              help="Replace OUT if it is a design folder written by geosample and left as written.")
@click.option("--json", "as_json", is_flag=True, help="Print a summary as JSON.")
def demo_command(out: Path, overwrite: bool, as_json: bool) -> None:
    """Design a survey of an invented lake with the packaged demo plan. The plan
    and layers are copied into OUT/inputs/ (a starting point for your own plan),
    and the design can be checked with 'geosample verify OUT'.
    """
    from ..workflow import run_demo
    from ._progress import steps
    from .plan import _summary

    with steps("geosample demo") as progress:
        run = run_demo(out, overwrite=overwrite, progress=progress)
    _summary(run, as_json)
    if not as_json:
        click.echo(f"  Open {run.folder / 'map.html'} in a browser; the report is {run.folder / 'report.html'}.")
        click.echo(f"  The demo plan to copy and edit: {run.folder / 'inputs' / 'plan.toml'}")
