"""What every command shares: logging options, error handling, JSON output.

Output folders are checked and replaced atomically in :mod:`geosample.workflow`."""
from __future__ import annotations

import functools
import json
import logging
import math
import sys
from typing import Any, Callable

import click

from ..errors import GeosampleError

CONTEXT_SETTINGS = {"help_option_names": ["-h", "--help"], "max_content_width": 100}

log = logging.getLogger("geosample")


class GeosampleGroup(click.Group):
    """Lists commands in the order they are used, not alphabetically."""

    order = ["size", "register", "plan", "verify", "assess", "simulate", "demo"]

    def list_commands(self, ctx: click.Context) -> list[str]:
        names = list(self.commands)
        return sorted(names, key=lambda n: (self.order.index(n) if n in self.order else 99, n))


def _setup_logging(verbose: int, quiet: int) -> None:
    level = logging.WARNING - 10 * verbose + 10 * quiet
    level = max(logging.DEBUG, min(logging.CRITICAL, level))
    root = logging.getLogger("geosample")
    for h in list(root.handlers):
        if getattr(h, "_geosample", False):
            root.removeHandler(h)
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("%(levelname)s: %(message)s"))
    handler._geosample = True  # type: ignore[attr-defined]
    root.addHandler(handler)
    root.setLevel(level)


def command(group: click.Group, name: str, **kwargs: Any) -> Callable:
    """Declare a command: adds -v/-q and turns GeosampleError into exit code 2."""

    def decorate(fn: Callable) -> click.Command:
        @functools.wraps(fn)
        def wrapper(*args: Any, verbose: int = 0, quiet: int = 0, **kw: Any) -> Any:
            _setup_logging(verbose, quiet)
            try:
                return fn(*args, **kw)
            except GeosampleError as exc:
                fail(str(exc), getattr(exc, "exit_code", 2))

        wrapper = click.option(
            "-q", "--quiet", count=True, help="Print less (warnings off with -q, errors only with -qq)."
        )(wrapper)
        wrapper = click.option(
            "-v", "--verbose", count=True, help="Print more about each step (-vv for debugging)."
        )(wrapper)
        kwargs.setdefault("context_settings", CONTEXT_SETTINGS)
        return group.command(name, **kwargs)(wrapper)

    return decorate


def fail(message: str, code: int = 2) -> None:
    """Print ``message`` as one paragraph on stderr and exit with ``code``."""
    click.echo(f"geosample: error: {message}", err=True)
    raise SystemExit(code)


def _clean(obj: Any) -> Any:
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item") and callable(obj.item):  # numpy scalars
        return _clean(obj.item())
    if hasattr(obj, "isoformat"):
        return obj.isoformat()
    return obj


def echo_json(obj: Any) -> None:
    """Print ``obj`` as JSON on stdout (NaN/inf become null; dates ISO 8601)."""
    click.echo(json.dumps(_clean(obj), indent=2, ensure_ascii=False))
