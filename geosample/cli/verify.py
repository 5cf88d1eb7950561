"""``geosample verify OUT``: re-derive a design and compare it with what is in OUT."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command, echo_json


@command(group, "verify", short_help="Re-derive a design from its manifest and inputs; list any difference.")
@click.argument("out", metavar="OUT", type=click.Path(path_type=Path))
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON.")
def verify_command(out: Path, as_json: bool) -> None:
    """Re-run the design recorded in OUT/manifest.json from the input files, with
    the recorded seed, and compare every site, time and output file.

    Exit code 0 and "verified" only if everything matches; exit code 1 with each
    difference listed otherwise (an input layer changed, a site moved, an output
    edited, a library version that draws differently).
    """
    from ..audit import verify
    from ._progress import steps

    with steps("geosample verify") as progress:
        result = verify(out, progress=progress)
    if as_json:
        echo_json({"verified": result.ok, "differences": list(result.differences), "checked": result.checked,
                   "notes": list(result.notes)})
    elif result.ok:
        c = result.checked
        click.echo(f"verified: {c.get('sites', 0)} sites and times, {c.get('inputs', 0)} input files and "
                   f"{c.get('outputs', 0)} output files match the manifest in {out}/")
        for n in result.notes:
            click.echo(f"  note: {n}")
    else:
        click.echo(f"NOT verified: {len(result.differences)} difference(s) in {out}/", err=True)
        for d in result.differences:
            click.echo(f"  - {d}", err=True)
    if not result.ok:
        raise SystemExit(1)
