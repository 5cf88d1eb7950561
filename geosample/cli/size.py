"""``geosample size``: how many samples for a mean within ±D, or what N samples buy.

A thin layer over :mod:`geosample.stats.sizing`: the ``--bound``, ``--sides`` and
``--statistic`` choices come from there. scipy is imported only by the ``t`` bound,
inside the library, so the command starts fast.
"""
from __future__ import annotations

import click

from ..errors import SettingError
from ..stats.sizing import BOUNDS, CLI_NAMES, FORMULAS, SIDES, STATISTICS
from . import cli as group
from ._common import command, echo_json

_BOUND_HELP = (
    "chebyshev (default; pairwise independent samples, sd from --sd or range/2), "
    "cantelli (one-sided Chebyshev), hoeffding (independent samples inside a known range), "
    "bernstein (known range and sd), t (pilot sd; assumes an approximately normal mean), "
    "betting (sized as hoeffding; assessed with the betting interval)."
)


@command(group, "size", short_help="How many samples for a mean within ±D, and what they guarantee.")
@click.option("--tolerance", type=float, default=None, metavar="D",
              help="Half-width wanted: the mean should be within ±D of the true mean (log10 units with "
                   "--statistic geomean). Needed unless --n is given.")
@click.option("--range", "range_", type=float, default=None, metavar="L",
              help="Largest possible difference between two measurements (e.g. 80 for values between 0 and 80).")
@click.option("--sd", type=float, default=None, metavar="S",
              help="Standard deviation of one measurement, from a pilot or an earlier season.")
@click.option("--confidence", type=float, default=0.95, show_default=True, metavar="C",
              help="Confidence level, strictly between 0 and 1 (0.95 for 95%).")
@click.option("--bound", type=click.Choice(BOUNDS), default="chebyshev", show_default=True, help=_BOUND_HELP)
@click.option("--sides", type=click.Choice(SIDES), default=None,
              help="two: within ±D; one: not more than D off in the direction that matters "
                   "[default: two; one for cantelli].")
@click.option("--n", "n", type=int, default=None, metavar="N",
              help="Instead of sizing: what N samples buy (the confidence for --tolerance, and the tolerance "
                   "at --confidence).")
@click.option("--statistic", type=click.Choice(STATISTICS), default="mean", show_default=True,
              help="mean, or geomean (the same on log10 values; the tolerance is also given as a factor 10^D).")
@click.option("--json", "as_json", is_flag=True, help="Print the figures as JSON.")
def size_command(tolerance: float | None, range_: float | None, sd: float | None, confidence: float, bound: str,
                 sides: str | None, n: int | None, statistic: str, as_json: bool) -> None:
    """The number of random samples that puts the mean within ±D of the true mean
    with at least the stated confidence, under the bound's assumptions; or, with
    --n, what a given number of samples buys.

    \b
    Examples:
      geosample size --tolerance 15 --range 80 --confidence 0.90
      geosample size --tolerance 15 --range 80 --bound hoeffding --sides one
      geosample size --tolerance 10 --sd 30 --bound t
      geosample size --n 24 --range 80 --tolerance 15

    The guarantee is about the sampling procedure: before the samples are drawn,
    the chance that their mean misses the true mean by D or more is at most the
    error probability printed.
    """
    from ..limits import check_size_numbers, check_value
    from ..stats import sizing

    check_size_numbers(tolerance=tolerance, range=range_, sd=sd, statistic=statistic,
                       names={"tolerance": "--tolerance", "range": "--range", "sd": "--sd"})
    check_value("size.n", n, name="--n")
    if sides is None:
        sides = "one" if bound == "cantelli" else "two"
    common = dict(range=range_, sd=sd, bound=bound, sides=sides, statistic=statistic, names=CLI_NAMES)
    if n is None:
        if tolerance is None:
            raise SettingError("--tolerance", None, "a positive number: the half-width D you want",
                               fix="give --tolerance D, or --n N to see what N samples buy")
        r = sizing.sample_size(tolerance, confidence=confidence, **common)
        if as_json:
            echo_json({**r.as_dict(), "achieved_tolerance": r.half_width, "statement": r.sentence()})
            return
        click.echo(r.sentence())
        click.echo(f"  formula: {r.formula}")
        if r.tolerance_factor is not None:
            click.echo(f"  geomean: ±{r.tolerance:g} in log10 units is a factor of {r.tolerance_factor:.4g} "
                       "(x or ÷)")
        for note in r.notes:
            click.echo(f"  note: {note}")
        return
    a = sizing.achieved(n, tolerance=tolerance, confidence=confidence, **common)
    if as_json:
        echo_json({**a.as_dict(), "achieved_tolerance": a.half_width, "formula": FORMULAS[bound],
                   "statement": a.sentence()})
        return
    click.echo(a.sentence())
    for note in a.notes:
        click.echo(f"  note: {note}")
