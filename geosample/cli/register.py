"""``geosample register PLAN.toml -o REGISTRATION.json``: commit to a plan before the draw."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command, echo_json


@command(group, "register", short_help="Before the draw: fix the plan, its layers and the seed rule in a file.")
@click.argument("plan_file", metavar="PLAN.toml", type=click.Path(path_type=Path))
@click.option("-o", "--out", "out", required=True, type=click.Path(path_type=Path),
              help="The registration file to write (.json; never replaced if it exists).")
@click.option("--public-source", required=True, metavar="TEXT",
              help="Where and how the public random value will be published (e.g. a lottery's main draw, the "
                   "numbers in draw order; a public randomness beacon's value for a stated time).")
@click.option("--public-date", required=True, metavar="YYYY-MM-DD",
              help="The date the value will be published; it must not have begun anywhere on Earth yet.")
@click.option("--json", "as_json", is_flag=True, help="Print the registration's digest and terms as JSON.")
def register_command(plan_file: Path, out: Path, public_source: str, public_date: str, as_json: bool) -> None:
    """Register PLAN.toml before any draw. The registration file records the
    SHA-256 of the plan and of every input layer, and how the seed will be made:
    from the registration's own SHA-256 and a public random value that does not
    exist yet (named by --public-source and --public-date).

    Send the file to the regulator before that date; they keep it. After the date,
    draw with 'geosample plan PLAN.toml -o OUT --registration REGISTRATION.json
    --public-value "..."' and let them check with 'geosample verify OUT
    --registration REGISTRATION.json'. The plan must not fix draw.seed or
    draw.seed_text. The plan is designed once with a throwaway seed first, so a
    plan that cannot be drawn is refused before it is registered (nothing of that
    trial is shown or kept). See docs/registration.md.
    """
    from ..registration import printable, write_registration

    from ._progress import steps

    with steps("geosample register") as progress:
        reg = write_registration(plan_file, out, public_source=public_source, public_date=public_date,
                                 progress=progress)
    if as_json:
        echo_json({"registration": str(out), "sha256": reg.sha256, "plan_sha256": reg.plan_sha256,
                   "inputs": reg.inputs, "content_sha256": reg.content_sha256,
                   "public_source": reg.public_source, "public_date": reg.public_date.isoformat()})
        return
    click.echo(f"Registration written to {out}")
    click.echo(f"  SHA-256 of the registration: {reg.sha256}")
    click.echo(f"  Plan {plan_file} (SHA-256 {reg.plan_sha256[:16]}...) and {len(reg.inputs)} input layers fixed.")
    click.echo(f"  Public value: published by {printable(reg.public_source)} on {reg.public_date}.")
    click.echo(f"  Now: send {out} (or at least its SHA-256 above) to the regulator before {reg.public_date}, and")
    click.echo("  change neither the plan nor its layers. After the value is published, draw with:")
    click.echo(f"    geosample plan {plan_file} -o DESIGN --registration {out} --public-value \"...\"")
