"""The plan file: schema, defaults, validation and path resolution.

A plan is a TOML file with the sections ``[survey]``, ``[area]``, ``[size]``,
``[draw]`` and ``[time]`` (``docs/plan-file.md`` lists every key; it is
generated from :data:`SCHEMA`, so the two cannot drift apart). Loading checks
every key: an unknown key is an error with a did-you-mean, a wrong type or
value names the key, the value and what is accepted. Paths are relative to the
plan file.

>>> plan = load_plan_text('''
... [survey]
... title = "Example"
... timezone = "UTC"
... [area]
... water = "lake.geojson"
... [size]
... tolerance = 15
... range = 80
... [time]
... start = 2027-06-01
... end = 2027-06-30
... ''', base_dir=".")
>>> plan.settings["size"]["bound"], plan.settings["draw"]["method"]
('chebyshev', 'balanced')
"""
from __future__ import annotations

import datetime as dt
import difflib
import hashlib
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from .errors import InputFileError, PlanError, SettingError
from .names import check_unique, stratum_name
from .limits import MAX_SEASON_DAYS, YEARS, check_size_numbers, check_value, limits_markdown
from .randomizer.space import METHODS as DRAW_METHODS  # the choices are defined once, in their modules
from .stats.sizing import ALLOCATION_METHODS as ALLOCATIONS
from .stats.sizing import BOUNDS

__all__ = ["SCHEMA", "Plan", "Key", "load_plan", "load_plan_text", "plan_from_settings"]

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
GENERATED_STRATA = ("shore-bands", "zones", "water-bodies")


# --------------------------------------------------------------------------- value checks
def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _positive(v: Any) -> bool:
    return _is_number(v) and v > 0


def _nonneg(v: Any) -> bool:
    return _is_number(v) and v >= 0


def _prob(v: Any) -> bool:
    return _is_number(v) and 0 < v < 1


def _posint(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool) and v >= 1


def _nonnegint(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool) and v >= 0


def _text(v: Any) -> bool:
    return isinstance(v, str)


def _nonempty_text(v: Any) -> bool:
    return isinstance(v, str) and v.strip() != ""


def _choice(options: tuple[str, ...]) -> Callable[[Any], bool]:
    return lambda v: isinstance(v, str) and v in options


def _date(v: Any) -> bool:
    return isinstance(v, dt.date) and not isinstance(v, dt.datetime)


def _date_list(v: Any) -> bool:
    return isinstance(v, list) and all(_date(x) for x in v)


def _text_list(v: Any) -> bool:
    return isinstance(v, list) and all(_nonempty_text(x) for x in v)


def _path_or_list(v: Any) -> bool:
    return _nonempty_text(v) or _text_list(v)


def _band(v: Any) -> bool:
    return isinstance(v, list) and len(v) == 2 and all(_nonneg(x) for x in v)


def _bands(v: Any) -> bool:
    return isinstance(v, list) and len(v) >= 1 and all(_nonneg(x) for x in v)


def _window(v: Any) -> bool:
    return isinstance(v, list) and len(v) == 2 and all(_nonempty_text(x) for x in v)


def _weekdays(v: Any) -> bool:
    return isinstance(v, list) and len(v) >= 1 and all(isinstance(x, str) for x in v)


@dataclass(frozen=True)
class Key:
    """One plan key: its check, its default, and its description (for messages and docs)."""

    check: Callable[[Any], bool]
    accepted: str
    default: Any = None
    required: bool = False
    help: str = ""
    example: str = ""


_ABSENT = object()

SCHEMA: dict[str, dict[str, Key]] = {
    "survey": {
        "title": Key(_nonempty_text, "a text", "Untitled survey", help="Title shown on the map and report."),
        "parameter": Key(_text, "a text", "", help='What is measured, e.g. "E. coli".'),
        "units": Key(_text, "a text", "", help='Units of the results, e.g. "MPN/100 mL".'),
        "statistic": Key(
            _choice(("mean", "geomean")),
            '"mean" (arithmetic) or "geomean" (geometric mean, computed on log10 values)',
            "mean",
            help="The statistic compared with the criterion.",
        ),
        "criterion": Key(_is_number, "a number", None, help="The value the mean is compared with (optional)."),
        "direction": Key(
            _choice(("below", "above")),
            '"below" or "above"',
            "below",
            help="Whether the program must show the mean is below (usual) or above the criterion.",
        ),
        "timezone": Key(
            _nonempty_text,
            'an IANA time zone name such as "America/Chicago" or "Europe/Berlin"',
            required=True,
            help="Local time zone of the field work; planned times carry its UTC offset.",
        ),
    },
    "area": {
        "water": Key(_nonempty_text, "a path to a polygon layer", required=True,
                     help="Polygon layer of the water body (GeoJSON, GeoPackage, Shapefile...)."),
        "water_layer": Key(_nonempty_text, "a layer name", None, help="Layer name inside a GeoPackage."),
        "name_field": Key(_nonempty_text, "an attribute name", None, help="Attribute naming water bodies (optional)."),
        "crs": Key(_nonempty_text, 'a CRS such as "EPSG:4326"', None,
                   help="CRS to assume for layers that do not declare one (use with care)."),
        "exclude": Key(_path_or_list, "a path or a list of paths to polygon layers", [],
                       help="Polygon layers removed from the frame (closed zones, marinas...)."),
        "access": Key(_nonempty_text, "a path to a point layer", None,
                      help="Point layer of launches / shore access points (a 'name' attribute is used)."),
        "reach_m": Key(_positive, "a positive number of metres", None,
                       help="Keep water within this over-water travel distance of the nearest access point."),
        "access_snap_m": Key(_nonneg, "a number of metres >= 0", 200.0,
                             help="Access points on land within this distance snap to the nearest water."),
        "shore_m": Key(_band, "two numbers [min, max] in metres, min <= max", None,
                       help="Keep only water whose distance from shore lies in [min, max]."),
        "strata": Key(_nonempty_text, 'a path to a polygon layer, "shore-bands", "zones" or "water-bodies"', None,
                      help="Strata: a polygon layer, or generated shore bands, compact zones, or one stratum per "
                           "water body of the water layer (named from name_field)."),
        "strata_layer": Key(_nonempty_text, "a layer name", None, help="Layer name inside a GeoPackage."),
        "strata_field": Key(_nonempty_text, "an attribute name", None, help="Attribute naming each stratum."),
        "bands_m": Key(_bands, "a list of distances from shore in metres, e.g. [0, 100, 500]", None,
                       help='Band edges for strata = "shore-bands".'),
        "zones": Key(_posint, "a whole number >= 1", None, help='Number of zones for strata = "zones".'),
        "remainder": Key(_nonempty_text, "a stratum name", None,
                         help="Name of a stratum for water in no stratum polygon (else that is an error)."),
    },
    "size": {
        "tolerance": Key(_positive, "a positive number (log10 units for geomean)", None,
                         help="Half-width D of the interval, in the units of the results."),
        "range": Key(_positive, "a positive number", None,
                     help="L: the largest possible difference between two measurements."),
        "sd": Key(_positive, "a positive number", None, help="A standard deviation known from a pilot (optional). "
                  "Without the two sds below it is taken as the sd of a whole field day's contribution (all variation "
                  "between days, the worst case); the chebyshev, cantelli and hoeffding bounds do not use it in a "
                  "plan (their promise rests on the range alone, as the assessment does)."),
        "lower": Key(_is_number, "a number", None,
                     help="The smallest possible value: results run from lower to lower + range (0 when absent; "
                          "log10 units for geomean). The betting interval uses it."),
        "sd_between_days": Key(_nonneg, "a number >= 0", None,
                               help="S_b: sd of the field-day means (the between-day variance component), from a "
                                    "pilot or an earlier season; with sd_within_day it sizes field days and visits "
                                    "per day (an assumption the report names)."),
        "sd_within_day": Key(_nonneg, "a number >= 0", None,
                             help="S_w: sd of visits around their day's mean (the within-day component)."),
        "cost_day": Key(_positive, "a positive number", None,
                        help="Cost of one field day (travel, boat, crew), any unit; with cost_visit it chooses the "
                             "visits per day, (S_w / S_b) sqrt(cost_day / cost_visit)."),
        "cost_visit": Key(_positive, "a positive number", None,
                          help="Cost of one more visit on a day (sample, analysis), in the unit of cost_day."),
        "confidence": Key(_prob, "a number strictly between 0 and 1, e.g. 0.95", 0.95, help="Confidence level."),
        "bound": Key(_choice(BOUNDS), " | ".join(BOUNDS), "chebyshev", help="The bound the sample size comes from."),
        "sides": Key(_choice(("two", "one")), '"two" or "one"', "two", help="Two-sided interval or one-sided bound."),
        "allocation": Key(_choice(ALLOCATIONS), " | ".join(ALLOCATIONS), "proportional",
                          help="How the total is split across strata."),
        "min_per_stratum": Key(_posint, "a whole number >= 1", 2, help="Fewest primary samples in any stratum."),
        "n": Key(_posint, "a whole number >= 1", None,
                 help="A fixed total; the report then states what it guarantees."),
        "strata": Key(lambda v: isinstance(v, dict), "a table of per-stratum tables", {},
                      help="[size.strata.NAME] tables with sd, range and cost for that stratum."),
    },
    "draw": {
        "method": Key(_choice(DRAW_METHODS), " | ".join(DRAW_METHODS), "balanced", help="How sites are drawn."),
        "reserve": Key(_nonneg, "a number >= 0 (reserves per primary site, e.g. 0.5)", 0.5,
                       help="Ordered reserve sites per primary site."),
        "spacing_m": Key(_positive, "a positive number of metres", None, help="Least distance between two sites."),
        "seed": Key(_nonnegint, "a whole number >= 0", None,
                    help="Seed of the draw; without one a seed is drawn from the OS and recorded."),
        "seed_text": Key(_nonempty_text, "a text", None,
                         help="A text announced before the draw; the seed is its SHA-256."),
    },
    "time": {
        "start": Key(_date, "a date written 2027-06-01 (no quotes)", required=True, help="First day of the season."),
        "end": Key(_date, "a date written 2027-08-31 (no quotes)", required=True, help="Last day of the season."),
        "days": Key(_weekdays, 'a list of weekdays, e.g. ["mon", "tue", "wed", "thu", "fri"]',
                    ["mon", "tue", "wed", "thu", "fri"], help="Weekdays the crew may go out."),
        "skip": Key(_date_list, "a list of dates, e.g. [2027-07-05]", [], help="Dates with no field work."),
        "window": Key(_window, 'two times, e.g. ["sunrise+60", "sunset-120"] or ["07:00", "15:00"]',
                      ["sunrise+60", "sunset-120"], help="When sampling may happen each day."),
        "temporal": Key(_choice(("week", "month", "season")), '"week", "month" or "season"', "week",
                        help="Temporal strata the visits are spread over."),
        "per_day": Key(_posint, "a whole number >= 1", 8, help="Most visits one crew makes in a day."),
        "field_days": Key(_posint, "a whole number >= 1", None,
                          help="Crew days the season can afford (optional; at least one per temporal stratum): "
                               "that many days are drawn at random within the temporal strata, each day with a "
                               "known probability, and the visits go on them. Without it, one day per visit while the season has days."),
        "speed_kmh": Key(_positive, "a positive number", 15.0, help="Travel speed over water, km/h."),
        "minutes_on_site": Key(_nonneg, "a number of minutes >= 0", 15.0, help="Time spent at each site."),
        "holding_h": Key(_positive, "a positive number of hours", 6.0, help="Most hours from collection to the lab."),
        "lab_minutes": Key(_nonneg, "a number of minutes >= 0", 40.0, help="Travel time from access point to lab."),
    },
    "export": {
        "gpx_symbols": Key(_choice(("geosample", "none")), '"geosample" or "none"', "geosample",
                           help='Waypoint symbols in the GPX files: "geosample" writes the neutral names '
                                '"Sample site", "Reserve site" and "Access point" (a GPS that does not know a name '
                                'shows its default mark); "none" writes no symbol.'),
    },
}

STRATUM_KEYS: dict[str, Key] = {
    "sd": Key(_positive, "a positive number", None, help="Standard deviation in this stratum (pilot or last season)."),
    "range": Key(_positive, "a positive number", None, help="Range bound in this stratum."),
    "cost": Key(_positive, "a positive number", None, help="Relative cost of one sample here (e.g. minutes)."),
}

PATH_KEYS = ("water", "exclude", "access", "strata")


@dataclass(frozen=True)
class Plan:
    """A validated plan.

    Attributes
    ----------
    settings : dict
        Every section with defaults filled in; paths as written in the file.
    base_dir : Path
        Folder the paths are relative to (the plan file's folder).
    path : Path or None
        The plan file, when loaded from one.
    sha256 : str
        SHA-256 of the plan file's bytes (of the settings text when built otherwise).
    warnings : tuple of str
    """

    settings: dict
    base_dir: Path
    path: Path | None = None
    sha256: str = ""
    warnings: tuple[str, ...] = ()

    def resolve(self, relpath: str) -> Path:
        """A plan path made absolute against :attr:`base_dir`."""
        p = Path(relpath).expanduser()
        return p if p.is_absolute() else (self.base_dir / p)

    def input_names(self) -> dict[str, str]:
        """Label -> path as written in the plan, for every input layer the plan names."""
        area = self.settings["area"]
        out: dict[str, str] = {"water": area["water"]}
        for i, p in enumerate(area["exclude"]):
            out[f"exclude[{i}]"] = p
        if area.get("access"):
            out["access"] = area["access"]
        if area.get("strata") and area["strata"] not in GENERATED_STRATA:
            out["strata"] = area["strata"]
        return out

    def input_paths(self) -> dict[str, Path]:
        """Label -> resolved path of every input layer the plan names."""
        return {label: self.resolve(p) for label, p in self.input_names().items()}


# --------------------------------------------------------------------------- loading
def load_plan(path: str | Path) -> Plan:
    """Read and validate a plan file.

    Raises
    ------
    InputFileError
        The file does not exist or cannot be read.
    PlanError
        TOML syntax errors, unknown sections or keys (with a did-you-mean).
    SettingError
        A key has a value of the wrong type or out of range.
    """
    path = Path(path)
    if not path.exists():
        raise InputFileError(f"plan file {str(path)!r} does not exist. Check the path, or run 'geosample demo -o DIR' "
                             "to see a complete example plan.")
    if path.is_dir():
        raise InputFileError(f"plan file {str(path)!r} is a folder; give the path of the .toml file.")
    try:
        data = path.read_bytes()
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise PlanError(f"plan file {str(path)!r} is not UTF-8 text ({exc.reason} at byte {exc.start}). "
                        "Save it as UTF-8.") from None
    except OSError as exc:
        raise InputFileError(f"plan file {str(path)!r} cannot be read: {exc.strerror}.") from None
    plan = load_plan_text(text, base_dir=path.resolve().parent, source=str(path))
    return Plan(plan.settings, plan.base_dir, path.resolve(), hashlib.sha256(data).hexdigest(), plan.warnings)


def load_plan_text(text: str, *, base_dir: str | Path, source: str = "plan") -> Plan:
    """Validate plan TOML given as text (paths relative to ``base_dir``)."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlanError(f"{source} is not valid TOML: {exc}. Dates are written 2027-06-01 without quotes, "
                        'texts in double quotes, lists in [brackets].') from None
    settings, warnings = validate(raw, source=source)
    return Plan(settings, Path(base_dir).resolve(), None, hashlib.sha256(text.encode()).hexdigest(), warnings)


def plan_from_settings(settings: dict, *, base_dir: str | Path) -> Plan:
    """A Plan from already-resolved settings (as stored in a manifest), validated again."""
    resolved, warnings = validate(_strip_none(settings), source="manifest settings")
    return Plan(resolved, Path(base_dir).resolve(), None, "", warnings)


def _strip_none(d: dict) -> dict:
    out: dict = {}
    for k, v in d.items():
        if v is None:
            continue
        out[k] = _strip_none(v) if isinstance(v, dict) else v
    return out


def _did_you_mean(word: str, options: list[str]) -> str:
    close = difflib.get_close_matches(word, options, n=1, cutoff=0.6)
    if close:
        return f"Did you mean {close[0]!r}?"
    return "Accepted keys: " + ", ".join(options) + "."


def validate(raw: dict, *, source: str = "plan") -> tuple[dict, tuple[str, ...]]:
    """Check every section and key of ``raw``; return settings with defaults and warnings."""
    warnings: list[str] = []
    for section in raw:
        if section not in SCHEMA:
            if not isinstance(raw[section], dict):
                raise PlanError(f"{source}: {section!r} is not inside a section. Put keys under a [section] header; "
                                f"sections are {', '.join('[' + s + ']' for s in SCHEMA)}.")
            raise PlanError(f"{source}: unknown section [{section}]. {_did_you_mean(section, list(SCHEMA))}")
    settings: dict[str, dict] = {}
    for section, keys in SCHEMA.items():
        given = raw.get(section, {})
        if not isinstance(given, dict):
            raise PlanError(f"{source}: {section} must be a [section] table, not {given!r}.")
        for key in given:
            if key not in keys:
                raise PlanError(f"{source}: unknown key {section}.{key}. {_did_you_mean(key, list(keys))}")
        out: dict[str, Any] = {}
        for key, spec in keys.items():
            value = given.get(key, _ABSENT)
            if value is _ABSENT:
                if spec.required:
                    raise PlanError(f"{source}: [{section}] needs {key} ({spec.accepted}). {spec.help}")
                value = spec.default
                out[key] = list(value) if isinstance(value, list) else (dict(value) if isinstance(value, dict)
                                                                         else value)
                continue
            if not spec.check(value):
                raise SettingError(f"{section}.{key}", value, spec.accepted,
                                   fix=f"change it in {source} ({key}: {spec.help.rstrip('.')})")
            check_value(f"{section}.{key}", value)
            out[key] = value
        settings[section] = out
    _cross_check(settings, source, warnings)
    return settings, tuple(warnings)


def _cross_check(s: dict, source: str, warnings: list[str]) -> None:
    area, size, draw, time = s["area"], s["size"], s["draw"], s["time"]
    if isinstance(area["exclude"], str):
        area["exclude"] = [area["exclude"]]
    if area["shore_m"] is not None and area["shore_m"][0] > area["shore_m"][1]:
        raise SettingError("area.shore_m", area["shore_m"], "[min, max] with min <= max",
                           fix=f"write [{area['shore_m'][1]}, {area['shore_m'][0]}]")
    strata = area["strata"]
    if strata == "shore-bands" and not area["bands_m"]:
        raise SettingError("area.bands_m", None, "a list of band edges in metres, e.g. [0, 100, 500]",
                           fix='strata = "shore-bands" needs bands_m')
    if strata == "zones" and not area["zones"]:
        raise SettingError("area.zones", None, "a whole number of zones >= 1", fix='strata = "zones" needs zones = k')
    if strata and strata not in GENERATED_STRATA and not area["strata_field"]:
        raise SettingError("area.strata_field", None, "the attribute of the strata layer that names each stratum",
                           fix='add strata_field = "zone" (or whichever attribute names the strata)')
    if area["reach_m"] is not None and not area["access"]:
        raise SettingError("area.reach_m", area["reach_m"], "reach_m together with an access point layer",
                           fix="add access = \"launches.geojson\", or remove reach_m")
    check_size_numbers(tolerance=size["tolerance"], range=size["range"], sd=size["sd"],
                       statistic=s["survey"]["statistic"])
    if s["survey"]["statistic"] == "geomean" and s["survey"]["criterion"] is not None and s["survey"]["criterion"] <= 0:
        raise SettingError("survey.criterion", s["survey"]["criterion"], 'a number above 0 with statistic = "geomean" '
                           "(a geometric mean is always above 0)", fix="write the criterion in the results' units")
    if size["n"] is None and size["tolerance"] is None:
        raise PlanError(f"{source}: [size] needs tolerance (the half-width D you want), or a fixed total n.")
    if size["bound"] in ("chebyshev", "cantelli", "hoeffding", "bernstein", "betting"):
        per = size["strata"]
        all_ranges = bool(per) and all(isinstance(v, dict) and v.get("range") for v in per.values())
        if size["range"] is None and not all_ranges:
            raise SettingError("size.range", None, f"a positive number: the {size['bound']} bound needs the range L",
                               fix="add range = L, the largest possible difference between two measurements")
    for a_key, b_key, what in (("sd_between_days", "sd_within_day", "sds"), ("cost_day", "cost_visit", "costs")):
        if (size[a_key] is None) != (size[b_key] is None):
            missing = b_key if size[b_key] is None else a_key
            raise SettingError(f"size.{missing}", None, f"a number: the between-day and within-day {what} go "
                               "together" if what == "sds" else "a positive number: the day and visit costs go "
                               "together", fix=f"add size.{missing}, or remove size.{a_key if missing == b_key else b_key}")
    if size["sd_between_days"] == 0 and size["sd_within_day"] == 0:
        raise SettingError("size.sd_between_days", 0, "sds that are not both 0",
                           fix="give the sds observed in a pilot or an earlier season")
    if size["bound"] in ("t", "bernstein"):
        per = size["strata"]
        all_sd = bool(per) and all(isinstance(v, dict) and v.get("sd") for v in per.values())
        if size["sd"] is None and not all_sd and size["sd_between_days"] is None:
            raise SettingError("size.sd", None, f"a positive number: the {size['bound']} bound needs a pilot sd",
                               fix="add sd = S from a pilot study or an earlier season")
    if size["bound"] == "cantelli" and size["sides"] == "two":
        raise SettingError("size.sides", "two", '"one" with bound = "cantelli" (a one-sided bound)',
                           fix='write sides = "one", or use bound = "chebyshev" for a two-sided interval')
    names = {name: stratum_name(name, setting=f"size.strata.{name}") for name in size["strata"]}
    check_unique([(n, f"[size.strata.{raw}]") for raw, n in names.items()], setting="size.strata",
                 fix="give each stratum one [size.strata.NAME] table")
    size["strata"] = {names[raw]: table for raw, table in size["strata"].items()}
    if area["remainder"] is not None:
        area["remainder"] = stratum_name(area["remainder"], setting="area.remainder")
    for name, table in size["strata"].items():
        if not isinstance(table, dict):
            raise PlanError(f"{source}: size.strata.{name} must be a table, e.g. [size.strata.{name}] with sd = 12.")
        for key, value in table.items():
            if key not in STRATUM_KEYS:
                raise PlanError(f"{source}: unknown key size.strata.{name}.{key}. "
                                f"{_did_you_mean(key, list(STRATUM_KEYS))}")
            if not STRATUM_KEYS[key].check(value):
                raise SettingError(f"size.strata.{name}.{key}", value, STRATUM_KEYS[key].accepted)
            check_value(f"size.strata.{name}.{key}", value)
            if key in ("sd", "range"):
                check_size_numbers(tolerance=None, range=None, sd=value, statistic=s["survey"]["statistic"],
                                   names={"sd": f"size.strata.{name}.{key}"})
    if size["allocation"] == "optimal":
        if not size["strata"] or not all(t.get("cost") for t in size["strata"].values()):
            warnings.append('size.allocation = "optimal" without a cost for every stratum: missing costs count as 1.')
    if draw["seed"] is not None and draw["seed_text"] is not None:
        raise SettingError("draw.seed_text", draw["seed_text"], "either seed or seed_text, not both",
                           fix="remove one of them")
    if time["start"] > time["end"]:
        raise SettingError("time.end", time["end"].isoformat(), f"a date on or after time.start = "
                           f"{time['start'].isoformat()}", fix="the dates look reversed: swap start and end")
    for key in ("start", "end"):
        if not YEARS[0] <= time[key].year <= YEARS[1]:
            raise SettingError(f"time.{key}", time[key].isoformat(), f"a date in the years {YEARS[0]} to {YEARS[1]}",
                               fix="check the year")
    span = (time["end"] - time["start"]).days + 1
    if span > MAX_SEASON_DAYS:
        raise SettingError("time.end", time["end"].isoformat(), f"a season of at most {MAX_SEASON_DAYS} days "
                           f"(five years); from time.start = {time['start'].isoformat()} it is {span} days",
                           fix="plan one season at a time: check the years of start and end")
    days = []
    for d in time["days"]:
        short = d.strip().lower()[:3]
        if short not in WEEKDAYS or d.strip().lower() not in (short, _FULL.get(short)):
            raise SettingError("time.days", d, "weekday names: " + ", ".join(WEEKDAYS) + " (or full names)")
        days.append(short)
    time["days"] = days
    for d in time["skip"]:
        if not (time["start"] <= d <= time["end"]):
            warnings.append(f"time.skip date {d.isoformat()} lies outside the season; it has no effect.")
    _check_timezone(s["survey"]["timezone"])


_FULL = {"mon": "monday", "tue": "tuesday", "wed": "wednesday", "thu": "thursday", "fri": "friday",
         "sat": "saturday", "sun": "sunday"}


def _check_timezone(name: str) -> None:
    """Refuse a name that is not a tz database zone, with the nearest names (a region such as "America" too)."""
    from zoneinfo import ZoneInfo, available_timezones

    accepted = 'an IANA time zone name such as "America/Chicago"'
    if len(name) > 64 or not name.isprintable():
        shown = name if len(name) <= 64 else name[:40] + f"... ({len(name)} characters)"
        raise SettingError("survey.timezone", shown, accepted, fix="a zone name is short and printable, e.g. "
                           '"Europe/Berlin"; see the list of tz database names')
    try:
        ZoneInfo(name)
        return
    except Exception:  # not found, a folder of the database (a region), an invalid name: all say the same below
        pass
    zones = available_timezones()
    region = sorted(z for z in zones if z.startswith(name.strip("/") + "/"))
    if region:
        examples = ", ".join(repr(z) for z in region[:3])
        raise SettingError("survey.timezone", name, accepted, fix=f"{name.strip('/')!r} is a region, not a zone: "
                           f"write the zone of the survey's place, e.g. {examples}")
    close = difflib.get_close_matches(name, sorted(zones), n=3, cutoff=0.6)
    hint = f"did you mean {', '.join(repr(z) for z in close)}? " if close else ""
    raise SettingError("survey.timezone", name, accepted,
                       fix=f"{hint}see the list of tz database names; UTC offsets like +02:00 are not zones")


# --------------------------------------------------------------------------- docs
def schema_markdown() -> str:
    """The plan-file reference (docs/plan-file.md) generated from :data:`SCHEMA`."""
    lines = ["# Plan file reference", "",
             "A plan is a TOML file. Paths are relative to the plan file. This page is generated from",
             "`geosample.plan.SCHEMA` (`python -m geosample.plan > docs/plan-file.md`).", ""]
    for section, keys in SCHEMA.items():
        lines += [f"## [{section}]", "", "| key | accepted | default | meaning |", "|---|---|---|---|"]
        for key, spec in keys.items():
            default = "required" if spec.required else ("" if spec.default is None else f"`{spec.default!r}`")
            lines.append(f"| `{key}` | {spec.accepted} | {default} | {spec.help} |")
        lines.append("")
    lines += ["## [size.strata.NAME]", "", "Optional knowledge about one stratum (NAME as in the strata layer).", "",
              "| key | accepted | meaning |", "|---|---|---|"]
    for key, spec in STRATUM_KEYS.items():
        lines.append(f"| `{key}` | {spec.accepted} | {spec.help} |")
    lines += [""] + limits_markdown()
    return "\n".join(lines).rstrip("\n") + "\n"


if __name__ == "__main__":  # pragma: no cover
    print(schema_markdown(), end="")
