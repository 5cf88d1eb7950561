"""The ``geosample`` command line.

A thin layer: each command (one module each in this package) parses options,
calls one library function and prints. Heavy libraries (scipy.stats,
geopandas, folium) are imported inside the commands, so ``geosample size``
and ``--help`` start fast.

Errors: a :class:`geosample.errors.GeosampleError` becomes a one-paragraph
message on stderr and exit code 2; anything else is a bug (exit 1, traceback).
"""
from __future__ import annotations

import logging
import sys

import click

from ._common import CONTEXT_SETTINGS, GeosampleGroup

__all__ = ["main", "cli"]


@click.group(cls=GeosampleGroup, context_settings=CONTEXT_SETTINGS)
@click.version_option(package_name="geosample", prog_name="geosample")
def cli() -> None:
    """Design randomized sampling of a water body in space and time.

    \b
    Typical use:
      geosample size --tolerance 15 --range 80      how many samples?
      geosample register plan.toml -o reg.json ...  (optional) commit before the draw
      geosample plan plan.toml -o design/           draw sites and field days
      geosample verify design/                      re-check a design
      geosample assess design/ results.csv          estimate and statement
      geosample simulate plan.toml --population p.toml   the design over many seasons
      geosample demo -o demo-design/                try it on invented data

    Run 'geosample COMMAND --help' for each command's options.
    """


def _register() -> None:
    from . import size as _size  # noqa: F401  (each module adds its command)

    for name in ("register", "plan", "verify", "assess", "simulate", "demo"):
        try:
            __import__(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:  # a command not built yet
            if exc.name != f"{__name__}.{name}":
                raise


_register()


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script; returns the exit code."""
    try:
        cli.main(args=argv, prog_name="geosample", standalone_mode=False)
    except SystemExit as exc:  # raised by --help / --version / ctx.exit
        return int(exc.code or 0)
    except click.exceptions.Abort:
        click.echo("Aborted.", err=True)
        return 1
    except click.ClickException as exc:  # usage errors: bad option, missing argument
        exc.show()
        return 2
    except click.exceptions.Exit as exc:
        return exc.exit_code
    return 0


def run() -> None:  # pragma: no cover - used by __main__
    sys.exit(main())


logging.getLogger("geosample").addHandler(logging.NullHandler())
