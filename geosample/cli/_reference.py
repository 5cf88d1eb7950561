"""Writes docs/cli.md from the commands' own --help texts: ``python -m geosample.cli._reference``."""
from __future__ import annotations

import click


def cli_markdown() -> str:
    from . import cli

    ctx = click.Context(cli, info_name="geosample", max_content_width=100, terminal_width=100)
    parts = ["# Command-line reference", "",
             "Generated from the commands' `--help` (`python -m geosample.cli._reference > docs/cli.md`).", "",
             "Every command: errors on stderr with exit code 2 for bad input; `-v`/`-q` for more or less logging;",
             "an existing output is never replaced without `--overwrite`.", "",
             "## geosample", "", "```", cli.get_help(ctx), "```", ""]
    for name in cli.list_commands(ctx):
        cmd = cli.get_command(ctx, name)
        sub = click.Context(cmd, info_name=f"geosample {name}", parent=None, max_content_width=100,
                            terminal_width=100)
        parts += [f"## geosample {name}", "", "```", cmd.get_help(sub), "```", ""]
    return "\n".join(parts)


if __name__ == "__main__":  # pragma: no cover
    print(cli_markdown(), end="")
