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
    "betting (the betting interval, sized by simulating it)."
)

_DAY_OPTIONS = ("lower", "sd_between", "sd_within", "per_day", "days", "cost_day", "cost_visit", "max_per_day")


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
@click.option("--lower", type=float, default=None, metavar="A",
              help="Smallest possible value: the range runs from A to A + L (recorded; the bounds need only L).")
@click.option("--sd-between-days", "sd_between", type=float, default=None, metavar="SB",
              help="Field days: sd of the day means (the between-day component), from a pilot or an earlier "
                   "season. With --sd-within-day, sizes days and visits per day.")
@click.option("--sd-within-day", "sd_within", type=float, default=None, metavar="SW",
              help="Field days: sd of visits around their day's mean (the within-day component).")
@click.option("--per-day", "per_day", type=int, default=None, metavar="M",
              help="Field days: visits per day (fixed); without it chosen from the sds and costs.")
@click.option("--days", "days", type=int, default=None, metavar="K",
              help="Field days: a fixed number of days; prints what K days of M visits promise.")
@click.option("--cost-day", "cost_day", type=float, default=None, metavar="C1",
              help="Field days: cost of one field day (travel, boat, crew), any unit.")
@click.option("--cost-visit", "cost_visit", type=float, default=None, metavar="C2",
              help="Field days: cost of one more visit on a day (sample, analysis), same unit.")
@click.option("--max-per-day", "max_per_day", type=int, default=None, metavar="M",
              help="Field days: most visits a crew can make in a day.")
@click.option("--json", "as_json", is_flag=True, help="Print the figures as JSON.")
def size_command(tolerance: float | None, range_: float | None, sd: float | None, confidence: float, bound: str,
                 sides: str | None, n: int | None, statistic: str, lower: float | None, sd_between: float | None,
                 sd_within: float | None, per_day: int | None, days: int | None, cost_day: float | None,
                 cost_visit: float | None, max_per_day: int | None, as_json: bool) -> None:
    """The number of random samples that puts the mean within ±D of the true mean
    with at least the stated confidence, under the bound's assumptions; or, with
    --n, what a given number of samples buys.

    \b
    Examples:
      geosample size --tolerance 15 --range 80 --confidence 0.90
      geosample size --tolerance 15 --range 80 --bound hoeffding --sides one
      geosample size --tolerance 10 --sd 30 --bound t
      geosample size --n 24 --range 80 --tolerance 15
      geosample size --tolerance 16 --range 80 --days 16 --per-day 4
      geosample size --tolerance 5 --range 80 --bound t --sd-between-days 6 \\
                     --sd-within-day 15 --cost-day 200 --cost-visit 20

    Without field-day options every sample counts as an independent unit (one
    visit a day). Visits that share a field day share its weather and time of
    day: with --per-day, --days or the sds, the field days are the units, and a
    guarantee from the range alone counts days, not visits.

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
    given = dict(lower=lower, sd_between=sd_between, sd_within=sd_within, per_day=per_day, days=days,
                 cost_day=cost_day, cost_visit=cost_visit, max_per_day=max_per_day)
    if any(v is not None for v in given.values()):
        for key, name, plan_key in (("lower", "--lower", "size.lower"),
                                    ("sd_between", "--sd-between-days", "size.sd_between_days"),
                                    ("sd_within", "--sd-within-day", "size.sd_within_day"),
                                    ("cost_day", "--cost-day", "size.cost_day"),
                                    ("cost_visit", "--cost-visit", "size.cost_visit"),
                                    ("per_day", "--per-day", "time.per_day"),
                                    ("max_per_day", "--max-per-day", "time.per_day"),
                                    ("days", "--days", "time.field_days")):
            check_value(plan_key, given[key], name=name)
        _days(tolerance, range_, sd, confidence, bound, sides, n, statistic, given, as_json)
        return
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
        click.echo("  note: every sample counts as an independent unit (one visit a day); for several visits a "
                   "day use --per-day (a guarantee from the range alone then counts days)")
        return
    a = sizing.achieved(n, tolerance=tolerance, confidence=confidence, **common)
    if as_json:
        echo_json({**a.as_dict(), "achieved_tolerance": a.half_width, "formula": FORMULAS[bound],
                   "statement": a.sentence()})
        return
    click.echo(a.sentence())
    for note in a.notes:
        click.echo(f"  note: {note}")


def _days(tolerance, range_, sd, confidence, bound, sides, n, statistic, given, as_json) -> None:
    """Size in field days and visits per day (:func:`geosample.stats.twostage.plan_days`)."""
    from ..stats import twostage

    if n is not None:
        raise SettingError("--n", n, "not with the field-day options", fix="use --days K and --per-day M instead")
    r = twostage.plan_days(tolerance, range=range_, sd=sd, confidence=confidence, bound=bound, sides=sides,
                           **given)
    if as_json:
        echo_json({**r.as_dict(), "statistic": statistic, "statement": r.sentence()})
        return
    click.echo(r.sentence())
    click.echo(f"  days: {r.days}, visits per day: {r.per_day}, visits: {r.visits}"
               + (f", cost: {r.cost:.6g}" if r.cost is not None else ""))
    if r.per_day_optimum is not None:
        click.echo(f"  cost-optimal visits per day (S_w / S_b) sqrt(c_day / c_visit) = {r.per_day_optimum:.4g}")
    click.echo(f"  rests on: {r.assumption}")
    if statistic == "geomean":
        click.echo("  geomean: the tolerance and range are in log10 units")
    for note in r.notes:
        click.echo(f"  note: {note}")
