"""Progress on stderr for long steps (rich), silent with -q or when stderr is not a terminal."""
from __future__ import annotations

import contextlib
import logging
import sys
import time
from typing import Callable, Iterator


@contextlib.contextmanager
def steps(title: str) -> Iterator[Callable[[str], None]]:
    """Yield a ``progress(step_name)`` callable that shows the current step and its elapsed time."""
    quiet = logging.getLogger("geosample").level > logging.WARNING
    if quiet:
        yield lambda name: None
        return
    if not sys.stderr.isatty():
        start = time.perf_counter()
        log = logging.getLogger("geosample.progress")

        def plain(name: str) -> None:
            log.info("%s: %s (%.1f s)", title, name, time.perf_counter() - start)

        yield plain
        return
    from rich.console import Console

    console = Console(stderr=True)
    start = time.perf_counter()
    with console.status(f"{title}...") as status:
        def show(name: str) -> None:
            status.update(f"{title}: {name} ({time.perf_counter() - start:.1f} s)")

        yield show
