"""Sensible bounds of every size setting, shared by the plan file and ``geosample size``.

A value past these bounds is a typing or unit mistake, never a survey: a tolerance
of 1e-200, a tolerance of 400 log10 units (a factor of 10^400), ``per_day =
10000000000`` (a 74 GiB allocation), a season of a thousand years. Each is refused
with the setting, the value, the bound and why, instead of a traceback or a
silent absurd design. This module imports nothing heavy (``geosample size`` must
start fast).

>>> check_value("time.per_day", 10_000_000_000)  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
geosample.errors.SettingError: time.per_day = 10000000000 is not accepted: expected at most 1000: ...
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .errors import SettingError

__all__ = ["Limit", "LIMITS", "GEOMEAN_MAX_LOG10", "MAX_SIZE_RATIO", "MAX_SEASON_DAYS", "YEARS",
           "check_value", "check_size_numbers", "limits_markdown"]

#: Largest tolerance, range or sd in log10 units for a geometric mean: a factor of 10^10.
GEOMEAN_MAX_LOG10 = 10.0
#: Largest ratio of the range (or sd) to the tolerance: beyond it no survey could take the samples.
MAX_SIZE_RATIO = 1e9
#: Longest season, in days (five years).
MAX_SEASON_DAYS = 1830
#: Years a season may lie in.
YEARS = (1900, 2199)

_EARTH_M = 20_000_000.0  # about half the Earth's circumference: no two places are farther apart (common practice)


@dataclass(frozen=True)
class Limit:
    """Bounds of one numeric setting (inclusive) and the reason, in words, for the message."""

    low: float | None
    high: float
    why: str


_MEASURE = Limit(1e-12, 1e12, "values this small or large are a unit mistake; results are written in their usual units")
_DIST = Limit(None, _EARTH_M, "no two places on Earth are farther apart than 20 000 km")

#: Plan key -> bounds. The same bounds apply to ``size.strata.NAME.KEY`` (as ``size.strata.*.KEY``).
LIMITS: dict[str, Limit] = {
    "size.tolerance": _MEASURE,
    "size.range": _MEASURE,
    "size.sd": _MEASURE,
    "size.strata.*.sd": _MEASURE,
    "size.lower": Limit(-1e12, 1e12, "values this large are a unit mistake"),
    "size.sd_between_days": _MEASURE,
    "size.sd_within_day": _MEASURE,
    "size.cost_day": Limit(1e-12, 1e12, "a relative cost; only the ratio of the day and visit costs matters"),
    "size.cost_visit": Limit(1e-12, 1e12, "a relative cost; only the ratio of the day and visit costs matters"),
    "size.strata.*.range": _MEASURE,
    "size.strata.*.cost": Limit(1e-12, 1e12, "a relative cost; 1 for every stratum alike"),
    "size.n": Limit(None, 100_000, "no survey takes more than 100 000 samples in one season"),
    "size.min_per_stratum": Limit(None, 10_000, "no survey takes more than 10 000 samples in one stratum"),
    "survey.criterion": Limit(-1e12, 1e12, "values this large are a unit mistake"),
    "area.reach_m": _DIST,
    "area.access_snap_m": _DIST,
    "area.shore_m": _DIST,
    "area.bands_m": _DIST,
    "area.zones": Limit(None, 500, "more zones than that leaves strata too small to sample twice"),
    "draw.reserve": Limit(None, 10, "ten reserves per primary site cover any loss of sites"),
    "draw.spacing_m": _DIST,
    "time.per_day": Limit(None, 1000, "one crew cannot make more than 1000 visits in a day"),
    "time.field_days": Limit(None, MAX_SEASON_DAYS, f"a season is at most {MAX_SEASON_DAYS} days"),
    "time.speed_kmh": Limit(0.1, 500, "boats and walkers travel between 0.1 and 500 km/h"),
    "time.minutes_on_site": Limit(None, 1440, "a day has 1440 minutes"),
    "time.lab_minutes": Limit(None, 1440, "a day has 1440 minutes"),
    "time.holding_h": Limit(None, 720, "no sample is held for more than 30 days"),
}


def _fmt(v: float) -> str:
    return f"{v:g}" if isinstance(v, float) else f"{v}"


def _limit_for(setting: str) -> Limit | None:
    if setting.startswith("size.strata."):
        return LIMITS.get("size.strata.*." + setting.rsplit(".", 1)[-1])
    return LIMITS.get(setting)


def check_value(setting: str, value: Any, *, name: str | None = None) -> None:
    """Refuse a number (or each number of a list) of ``setting`` outside its bounds.

    ``name`` is how the setting is shown (e.g. ``"--tolerance"``); by default the plan key.
    """
    limit = _limit_for(setting)
    if limit is None or value is None or isinstance(value, bool):
        return
    values = value if isinstance(value, list) else [value]
    for v in values:
        if not isinstance(v, (int, float)) or isinstance(v, bool):
            continue
        if not math.isfinite(v):
            raise SettingError(name or setting, value, "a finite number", fix="write a number such as 20")
        if limit.low is not None and limit.low > 0 and v <= 0:
            continue  # a positive setting: the caller's own check says "a positive number"
        if v > limit.high or (limit.low is not None and v < limit.low):
            span = (f"between {_fmt(limit.low)} and {_fmt(limit.high)}" if limit.low is not None
                    else f"at most {_fmt(limit.high)}")
            raise SettingError(name or setting, value, f"{span}: {limit.why}",
                               fix="check the value for a typing or unit mistake")
    if setting in ("area.bands_m",) and isinstance(value, list) and len(value) > 100:
        raise SettingError(name or setting, f"a list of {len(value)} edges", "at most 100 band edges",
                           fix="use fewer, wider bands")


def check_size_numbers(*, tolerance: float | None, range: float | None, sd: float | None,
                       statistic: str = "mean", names: dict[str, str] | None = None) -> None:
    """Cross-checks of the tolerance against the range and sd (plan ``[size]`` or ``geosample size``).

    - each is finite and within :data:`LIMITS`;
    - for a geometric mean (log10 units) none exceeds :data:`GEOMEAN_MAX_LOG10`;
    - the tolerance is at most the range: every mean lies within the range of every
      other, so a wider tolerance guarantees nothing;
    - the range and the sd are at most :data:`MAX_SIZE_RATIO` times the tolerance.

    ``names`` maps ``tolerance``/``range``/``sd`` to how they are shown (default ``size.KEY``).
    """
    names = {"tolerance": "size.tolerance", "range": "size.range", "sd": "size.sd", **(names or {})}
    given = {"tolerance": tolerance, "range": range, "sd": sd}
    for key, v in given.items():
        check_value(f"size.{key}", v, name=names[key])
        if v is not None and not isinstance(v, bool) and statistic == "geomean" and v > GEOMEAN_MAX_LOG10:
            raise SettingError(names[key], v, f"at most {GEOMEAN_MAX_LOG10:g} log10 units with statistic = "
                               f"\"geomean\" ({_fmt(v)} log10 units is a factor of 10^{_fmt(v)})",
                               fix="give it in log10 units: 0.3 is a factor of 2, 1 a factor of 10")
    if tolerance is None or not tolerance > 0:
        return  # the caller refuses a tolerance <= 0 with its own message
    if range is not None and range > 0 and tolerance > range:
        raise SettingError(names["tolerance"], tolerance, f"at most the range {names['range']} = {_fmt(range)}: "
                           "every mean lies within the range of every other, so a wider tolerance guarantees "
                           "nothing", fix=f"write the half-width you want, smaller than {_fmt(range)}")
    for key in ("range", "sd"):
        v = given[key]
        if v is not None and v > 0 and v / tolerance > MAX_SIZE_RATIO:
            raise SettingError(names["tolerance"], tolerance, f"at least {names[key]} / {MAX_SIZE_RATIO:g} = "
                               f"{v / MAX_SIZE_RATIO:.3g}: a smaller tolerance needs more samples than any survey "
                               "can take", fix="check the value and its units")


def limits_markdown() -> list[str]:
    """Lines of the plan-file reference that list the bounds (``docs/plan-file.md``)."""
    lines = ["## Limits", "",
             "Values past these bounds are refused as typing or unit mistakes.", "",
             "| key | accepted | why |", "|---|---|---|"]
    for key, lim in LIMITS.items():
        span = (f"{_fmt(lim.low)} to {_fmt(lim.high)}" if lim.low is not None else f"at most {_fmt(lim.high)}")
        lines.append(f"| `{key}` | {span} | {lim.why} |")
    lines += [f"| tolerance, range, sd with `statistic = \"geomean\"` | at most {GEOMEAN_MAX_LOG10:g} (log10 units) "
              f"| a factor of 10^{GEOMEAN_MAX_LOG10:g} |",
              "| `size.tolerance` | at most `size.range`, at least range / 1e9 and sd / 1e9 | a wider tolerance "
              "guarantees nothing; a narrower one needs more samples than any survey can take |",
              f"| `time.start` to `time.end` | at most {MAX_SEASON_DAYS} days, years {YEARS[0]} to {YEARS[1]} | "
              "a season, not a century |", ""]
    return lines
