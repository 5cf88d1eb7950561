"""Random field days and times: the calendar, temporal strata, and a random time for each visit.

The stages, each a pure function (``docs/methods.md``, "Field days and times"):

- :func:`parse_window` reads the daily sampling window: clock times (``"07:00"``)
  or offsets in whole minutes from sunrise and sunset (``"sunrise+60"``,
  ``"sunset-120"``).
- :func:`field_days` lists the days the crew may go out (allowed weekdays
  between ``start`` and ``end``, minus ``skip``), each with its window as
  timezone-aware datetimes and its temporal stratum (ISO week, month or the
  whole season). Sunrise and sunset come from ``astral`` (NOAA's solar
  equations), computed only when the window refers to them.
- :func:`plan_days` draws the field days, the primary units of time, each with a
  known inclusion probability (stratified by temporal stratum, see
  :mod:`geosample.randomizer.days`), and spreads the visits over them, at most
  ``per_day`` a day; :func:`assign_days` gives the day of each visit.
- :func:`draw_times` draws a uniform random whole minute inside each visit's window.
- :func:`schedule_visits` puts it together for a :class:`~geosample.model.SiteDraw`
  with the stream ``geosample.rng.stream(seed, "time")``. Its job is *random
  times*: ``itinerary.build_itinerary`` later replaces times and route order
  with a routed order.
- :func:`time_of_day_summary` summarises the planned hours per stratum.

Time arithmetic is done in UTC and converted to the local zone at the end, so a
window or a draw that spans a daylight-saving change has its true length.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import math
import re
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np

from ..errors import InfeasibleError, SettingError
from ..model import FieldDay, Schedule, SiteDraw, Visit
from ..rng import stream
from .days import DayDraw, allocate_days, draw_days, spread_visits

__all__ = [
    "WEEKDAYS",
    "TEMPORAL",
    "WindowEdge",
    "Window",
    "FieldCalendar",
    "parse_window",
    "field_days",
    "DayDraw",
    "allocate_days",
    "draw_days",
    "spread_visits",
    "plan_days",
    "assign_days",
    "draw_times",
    "schedule_visits",
    "time_of_day_summary",
    "temporal_label",
]

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_FULL_WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")
TEMPORAL = ("week", "month", "season")
MORNING_HOUR = 10.0
_UTC = dt.timezone.utc

_WINDOW_ACCEPTED = (
    'two texts [start, end], each a clock time "HH:MM" (e.g. "07:00", "15:30") or "sunrise" / '
    '"sunset" with an optional offset in whole minutes ("sunrise+60", "sunset-120")'
)
_WINDOW_FIX = 'write for example window = ["sunrise+60", "sunset-120"] or window = ["07:00", "15:00"]'
_CLOCK_RE = re.compile(r"^(\d{1,2}):(\d{2})$")
_SUN_RE = re.compile(r"^(sunrise|sunset)(?:([+-])(\d{1,4}))?$")


# --------------------------------------------------------------------------- window
@dataclass(frozen=True)
class WindowEdge:
    """One end of the daily window.

    Attributes
    ----------
    anchor : str
        ``"clock"``, ``"sunrise"`` or ``"sunset"``.
    minutes : int
        For ``"clock"``: minutes after local midnight. Otherwise the offset from
        the sun event in minutes (negative = before it).
    """

    anchor: str
    minutes: int

    @property
    def uses_sun(self) -> bool:
        return self.anchor != "clock"

    def __str__(self) -> str:
        if self.anchor == "clock":
            return f"{self.minutes // 60:02d}:{self.minutes % 60:02d}"
        return self.anchor if self.minutes == 0 else f"{self.anchor}{self.minutes:+d}"

    def at(self, date: dt.date, tz: dt.tzinfo, sun: dict[str, dt.datetime] | None) -> dt.datetime:
        """This edge on ``date`` in zone ``tz`` (``sun`` holds that day's sunrise/sunset)."""
        if self.anchor == "clock":
            local = dt.datetime.combine(date, dt.time(self.minutes // 60, self.minutes % 60), tzinfo=tz)
            # A clock time in a spring-forward gap does not exist: the round trip
            # through UTC moves it to the real instant (02:30 -> 03:30 daylight time).
            return local.astimezone(_UTC).astimezone(tz)
        assert sun is not None
        return (sun[self.anchor].astimezone(_UTC) + dt.timedelta(minutes=self.minutes)).astimezone(tz)


@dataclass(frozen=True)
class Window:
    """The daily sampling window, as parsed by :func:`parse_window`."""

    start: WindowEdge
    end: WindowEdge

    @property
    def uses_sun(self) -> bool:
        """True when sunrise or sunset must be computed."""
        return self.start.uses_sun or self.end.uses_sun

    def __str__(self) -> str:
        return f'["{self.start}", "{self.end}"]'


def _parse_edge(text: Any, window: Any) -> WindowEdge:
    if not isinstance(text, str):
        raise SettingError("time.window", window, _WINDOW_ACCEPTED, fix=_WINDOW_FIX)
    s = re.sub(r"\s+", "", text).lower()
    m = _CLOCK_RE.match(s)
    if m:
        h, mi = int(m.group(1)), int(m.group(2))
        if h > 23 or mi > 59:
            raise SettingError("time.window", window, _WINDOW_ACCEPTED + f"; {text!r} is not a clock time "
                               "(hours 00-23, minutes 00-59)", fix=_WINDOW_FIX)
        return WindowEdge("clock", 60 * h + mi)
    m = _SUN_RE.match(s)
    if m:
        offset = int(m.group(3) or 0) * (-1 if m.group(2) == "-" else 1)
        if abs(offset) >= 24 * 60:
            raise SettingError("time.window", window, _WINDOW_ACCEPTED + f", with an offset of less than 1440 "
                               f"minutes: {text!r} is a whole day or more from the sun event, so it falls on "
                               "another date; both ends must fall on the same day as the field day",
                               fix=_WINDOW_FIX)
        return WindowEdge(m.group(1), offset)
    raise SettingError("time.window", window, _WINDOW_ACCEPTED + f"; {text!r} is neither", fix=_WINDOW_FIX)


def parse_window(window: Sequence[str] | Window) -> Window:
    """Read the daily sampling window.

    Parameters
    ----------
    window : sequence of two str
        ``[start, end]``. Each is a clock time ``"HH:MM"`` (local time, 24-hour)
        or ``"sunrise"`` / ``"sunset"`` followed by an optional ``+N`` or ``-N``
        whole minutes (spaces and case are ignored). Offsets are at most 1440 min.

    Returns
    -------
    Window

    Raises
    ------
    SettingError
        (``time.window``) text in neither form, not exactly two texts, or a window
        that is empty every day (a clock end not after a clock start, an end at
        sunrise with a start at sunset, the same sun event with the end offset not
        after the start offset).

    Examples
    --------
    >>> w = parse_window(["sunrise+60", "sunset - 120"])
    >>> w.start, w.end.minutes, w.uses_sun
    (WindowEdge(anchor='sunrise', minutes=60), -120, True)
    >>> str(parse_window(["7:00", "15:30"]))
    '["07:00", "15:30"]'
    """
    if isinstance(window, Window):
        return window
    if isinstance(window, str) or not isinstance(window, Sequence) or len(window) != 2:
        raise SettingError("time.window", window, _WINDOW_ACCEPTED, fix=_WINDOW_FIX)
    start, end = (_parse_edge(t, list(window)) for t in window)
    empty = (
        (start.anchor == end.anchor and end.minutes <= start.minutes)
        or (start.anchor == "sunset" and end.anchor == "sunrise")
    )
    if empty:
        raise SettingError(
            "time.window", list(window), "a window whose end comes after its start on the same day",
            fix="swap the two ends, or " + _WINDOW_FIX,
        )
    return Window(start, end)


# --------------------------------------------------------------------------- calendar
@dataclass(frozen=True)
class FieldCalendar:
    """The field days of a season, and what was left out.

    Iterating over it, ``len`` and indexing behave as for ``days``, so a
    FieldCalendar can be passed wherever a tuple of FieldDay is expected.

    Attributes
    ----------
    days : tuple of FieldDay
        The allowed days, in date order.
    warnings : tuple of str
        Days dropped because their window was empty (or shorter than ``min_minutes``).
    dropped : tuple of datetime.date
        The dates of those days.
    window : Window
        The window used.
    timezone : str
        The IANA zone name.
    counts : dict
        ``season_days`` (calendar days start..end), ``weekday_days`` (on allowed
        weekdays), ``skipped`` (allowed weekdays listed in ``skip``), ``dropped``, ``field_days``.
    """

    days: tuple[FieldDay, ...]
    warnings: tuple[str, ...] = ()
    dropped: tuple[dt.date, ...] = ()
    window: Window | None = None
    timezone: str = ""
    counts: dict[str, int] = dataclasses.field(default_factory=dict)

    def __iter__(self) -> Iterator[FieldDay]:
        return iter(self.days)

    def __len__(self) -> int:
        return len(self.days)

    def __getitem__(self, i: int) -> FieldDay:
        return self.days[i]


def _weekday_numbers(weekdays: Iterable[str]) -> set[int]:
    accepted = "weekday names " + ", ".join(WEEKDAYS) + " or full names (monday...), any case"
    if isinstance(weekdays, str):
        weekdays = [weekdays]
    names = list(weekdays)
    if not names:
        raise SettingError("time.days", names, "at least one " + accepted.replace("names", "name", 1),
                           fix='write days = ["mon", "tue", "wed", "thu", "fri"]')
    out = set()
    for name in names:
        key = name.strip().lower() if isinstance(name, str) else name
        if key in WEEKDAYS:
            out.add(WEEKDAYS.index(key))
        elif key in _FULL_WEEKDAYS:
            out.add(_FULL_WEEKDAYS.index(key))
        else:
            raise SettingError("time.days", name, accepted, fix='write days = ["mon", "tue", "wed", "thu", "fri"]')
    return out


def _as_date(value: Any, setting: str) -> dt.date:
    if isinstance(value, dt.datetime):
        raise SettingError(setting, value.isoformat(), "a date without a time of day, e.g. 2027-06-01")
    if isinstance(value, dt.date):
        return value
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise SettingError(setting, value, "a date written 2027-06-01", fix="write the date as YYYY-MM-DD")


def _zone(timezone: str | dt.tzinfo) -> dt.tzinfo:
    if isinstance(timezone, dt.tzinfo):
        return timezone
    try:
        if not isinstance(timezone, str) or not timezone.strip():
            raise ValueError(timezone)
        return ZoneInfo(timezone.strip())
    except (ZoneInfoNotFoundError, ValueError, TypeError, OSError):
        raise SettingError(
            "survey.timezone", timezone, 'an IANA time zone name such as "America/Chicago" or "Europe/Berlin"',
            fix="use the zone of the field work from the IANA time zone database (not an abbreviation like CST)",
        ) from None


def temporal_label(date: dt.date, temporal: str) -> str:
    """The temporal stratum of ``date``: ISO week ``"2027-W23"``, month ``"2027-06"`` or ``"season"``.

    Examples
    --------
    >>> temporal_label(dt.date(2027, 6, 9), "week"), temporal_label(dt.date(2027, 6, 9), "month")
    ('2027-W23', '2027-06')
    """
    if temporal == "week":
        iso = date.isocalendar()
        return f"{iso.year}-W{iso.week:02d}"
    if temporal == "month":
        return f"{date.year}-{date.month:02d}"
    return "season"


def _check_same_day(date: dt.date, win: Window, w0: dt.datetime, w1: dt.datetime) -> None:
    """Refuse a window whose edge falls on another local date than the field day (a large sun offset)."""
    for edge, t in ((win.start, w0), (win.end, w1)):
        if t.date() != date:
            raise SettingError(
                "time.window", str(win),
                f"window ends that fall on the same day as the field day: on {date.isoformat()} \"{edge}\" is "
                f"{t.isoformat(timespec='minutes')}, on {t.date().isoformat()}",
                fix="use a smaller offset from the sun (or a clock time), e.g. " + _WINDOW_FIX[len("write for example "):])


def _sun_times(observer: Any, date: dt.date, tz: dt.tzinfo) -> dict[str, dt.datetime]:
    import astral.sun

    return {"sunrise": astral.sun.sunrise(observer, date, tzinfo=tz),
            "sunset": astral.sun.sunset(observer, date, tzinfo=tz)}


def _polar_error(failures: list[tuple[dt.date, str]], lat: float, lon: float, window: Window, tz_name: str
                 ) -> InfeasibleError:
    first, reason = failures[0]
    reason = reason[:1].lower() + reason[1:]
    last = failures[-1][0]
    kind = ""
    low = reason.lower()
    if "always above" in low:
        kind = " (polar day)"
    elif "always below" in low:
        kind = " (polar night)"
    span = first.isoformat() if first == last else f"{first.isoformat()} to {last.isoformat()}"
    return InfeasibleError(
        f"time.window = {window} needs sunrise and sunset, but at latitude {lat:.2f}, longitude {lon:.2f} "
        f"({tz_name}) there is none on {len(failures)} field day(s), {span}: on {first.isoformat()} "
        f"{reason.rstrip('.')}{kind}. Use clock times instead, e.g. time.window = [\"07:00\", \"15:00\"], "
        "or move the season (time.start, time.end) away from the polar day or night."
    )


def field_days(
    start: dt.date | str,
    end: dt.date | str,
    *,
    weekdays: Iterable[str] = ("mon", "tue", "wed", "thu", "fri"),
    skip: Iterable[dt.date | str] = (),
    window: Sequence[str] | Window = ("sunrise+60", "sunset-120"),
    timezone: str | dt.tzinfo,
    lat: float | None = None,
    lon: float | None = None,
    temporal: str = "week",
    min_minutes: float = 0.0,
) -> FieldCalendar:
    """The days the crew may go out, each with its sampling window and temporal stratum.

    Parameters
    ----------
    start, end : datetime.date or ISO date text
        First and last day of the season (both included).
    weekdays : iterable of str
        Allowed weekdays: ``mon`` .. ``sun`` or full names, any case.
    skip : iterable of dates
        Dates with no field work (dates outside the season have no effect).
    window : two texts or Window
        See :func:`parse_window`.
    timezone : str
        IANA zone name of the field work (``survey.timezone``).
    lat, lon : float, optional
        WGS 84 position for sunrise and sunset (the frame's centre). Needed only
        when the window refers to the sun; a clock-time window computes no sun.
    temporal : str
        Temporal strata: ``"week"`` (ISO week, ``"2027-W23"``), ``"month"``
        (``"2027-06"``) or ``"season"`` (one stratum).
    min_minutes : float
        Days whose window is shorter than this (in real elapsed minutes) are
        dropped with a warning; with the default 0, days with an empty or
        negative window are dropped.

    Returns
    -------
    FieldCalendar
        ``days`` (tuple of FieldDay in date order, windows as aware datetimes in
        the zone), ``warnings`` and ``dropped``. It iterates and indexes like
        ``days``.

    Raises
    ------
    SettingError
        A bad date, weekday, window, temporal or timezone value; ``start`` after
        ``end``; a sun window without ``lat``/``lon``.
    InfeasibleError
        No sunrise or sunset on a field day (polar day or night; message names
        the dates and the latitude), or no field day left (message gives the counts).

    Examples
    --------
    >>> cal = field_days("2027-06-01", "2027-06-07", window=["07:00", "15:00"], timezone="America/Chicago")
    >>> [d.date.day for d in cal], cal[0].window_start.isoformat(), cal[0].temporal_stratum
    ([1, 2, 3, 4, 7], '2027-06-01T07:00:00-05:00', '2027-W22')
    """
    start_d = _as_date(start, "time.start")
    end_d = _as_date(end, "time.end")
    if start_d > end_d:
        raise SettingError("time.end", end_d.isoformat(),
                           f"a date on or after time.start = {start_d.isoformat()}",
                           fix=f"the dates look reversed: time.start = {start_d.isoformat()} comes after "
                               f"time.end = {end_d.isoformat()}; swap them")
    allowed = _weekday_numbers(weekdays)
    skip_set = {_as_date(d, "time.skip") for d in skip}
    win = parse_window(window)
    if temporal not in TEMPORAL:
        raise SettingError("time.temporal", temporal, '"week", "month" or "season"', fix='write temporal = "week"')
    tz = _zone(timezone)
    tz_name = getattr(tz, "key", str(tz))

    observer = None
    if win.uses_sun:
        if lat is None or lon is None or not (-90 <= lat <= 90) or not (-180 <= lon <= 180):
            raise SettingError("lat, lon", (lat, lon), "a WGS 84 position (latitude -90..90, longitude -180..180)",
                               fix="pass the frame's centre, or use a clock-time time.window")
        from astral import Observer

        observer = Observer(latitude=float(lat), longitude=float(lon))

    counts = {"season_days": (end_d - start_d).days + 1, "weekday_days": 0, "skipped": 0}
    days: list[FieldDay] = []
    dropped: list[dt.date] = []
    warnings: list[str] = []
    failures: list[tuple[dt.date, str]] = []
    for k in range(counts["season_days"]):
        date = start_d + dt.timedelta(days=k)
        if date.weekday() not in allowed:
            continue
        counts["weekday_days"] += 1
        if date in skip_set:
            counts["skipped"] += 1
            continue
        sun = None
        if observer is not None:
            try:
                sun = _sun_times(observer, date, tz)
            except ValueError as exc:
                failures.append((date, str(exc)))
                continue
        w0, w1 = win.start.at(date, tz, sun), win.end.at(date, tz, sun)
        _check_same_day(date, win, w0, w1)
        length = (w1.astimezone(_UTC) - w0.astimezone(_UTC)).total_seconds() / 60.0
        if length <= 0 or length < min_minutes:
            dropped.append(date)
            need = f"at least {min_minutes:g} min" if min_minutes > 0 else "a window that is not empty"
            warnings.append(
                f"{date.isoformat()} dropped: time.window = {win} runs from {w0:%H:%M} to {w1:%H:%M} "
                f"({length:.0f} min) that day, and a field day needs {need}."
            )
            continue
        days.append(FieldDay(
            date=date, window_start=w0, window_end=w1,
            sunrise=sun["sunrise"] if sun else None, sunset=sun["sunset"] if sun else None,
            temporal_stratum=temporal_label(date, temporal),
        ))
    if failures:
        raise _polar_error(failures, float(lat), float(lon), win, tz_name)  # type: ignore[arg-type]
    counts["dropped"] = len(dropped)
    counts["field_days"] = len(days)
    if not days:
        names = ", ".join(WEEKDAYS[i] for i in sorted(allowed))
        raise InfeasibleError(
            f"No field day between time.start = {start_d.isoformat()} and time.end = {end_d.isoformat()}: "
            f"{counts['season_days']} calendar day(s), {counts['weekday_days']} on time.days = [{names}], "
            f"{counts['skipped']} of them in time.skip, {counts['dropped']} with an empty time.window = {win}. "
            "Lengthen the season, allow more weekdays, skip fewer dates or widen the window."
        )
    return FieldCalendar(tuple(days), tuple(warnings), tuple(dropped), win, tz_name, counts)


# --------------------------------------------------------------------------- days
def plan_days(n_visits: int, days: Sequence[FieldDay], *, per_day: int, rng: np.random.Generator,
              field_days: int | None = None) -> DayDraw:
    """Draw the field days (primary units) and spread ``n_visits`` over them.

    ``k`` days are drawn: ``field_days`` when given (a crew-day budget), else
    ``len(days)``, but never more days than visits (one visit a day when the
    season allows it; no drawn day without a visit). The days come from
    :func:`~geosample.randomizer.days.draw_days` (stratified by temporal
    stratum, each day with a known inclusion probability ``k_s / K_s``) and the
    visits from :func:`~geosample.randomizer.days.spread_visits`
    (``floor(n / k)`` or one more a day).

    Parameters
    ----------
    n_visits : int
    days : sequence of FieldDay
        The allowed days, in date order.
    per_day : int
        Most visits a day.
    rng : numpy.random.Generator
        Draws, in order: the days of each temporal stratum, then the days that get one more visit.
    field_days : int, optional
        The number of field days ``k`` (``time.field_days``).

    Returns
    -------
    DayDraw

    Raises
    ------
    SettingError
        ``per_day`` not a whole number >= 1, ``n_visits`` negative, ``field_days``
        out of range (see :func:`~geosample.randomizer.days.draw_days`).
    InfeasibleError
        More visits than ``k * per_day`` (message gives the figures and the fixes).
    """
    if isinstance(per_day, bool) or not isinstance(per_day, (int, np.integer)) or per_day < 1:
        raise SettingError("time.per_day", per_day, "a whole number >= 1", fix="write per_day = 8")
    if isinstance(n_visits, bool) or not isinstance(n_visits, (int, np.integer)) or n_visits < 0:
        raise SettingError("n_visits", n_visits, "a whole number >= 0")
    n = int(n_visits)
    days = tuple(days)
    capacity = len(days) * int(per_day)
    if n > capacity:
        first = days[0].date.isoformat() if days else "-"
        last = days[-1].date.isoformat() if days else "-"
        raise InfeasibleError(
            f"{n} primary visits do not fit the season: {len(days)} field day(s) ({first} to {last}) "
            f"x time.per_day = {per_day} = {capacity} visits at most. Lengthen the season (time.start, "
            f"time.end), allow more days (time.days, time.skip), raise time.per_day to at least "
            f"{math.ceil(n / max(len(days), 1))}, or take fewer samples."
        )
    if n == 0:
        return DayDraw(tuple(dataclasses.replace(d, inclusion_p=0.0, drawn=False) for d in days), (), ())
    k = min(int(field_days), n) if field_days is not None else min(n, len(days))
    if field_days is not None and k * int(per_day) < n:
        raise InfeasibleError(
            f"{n} visits do not fit in time.field_days = {k} days of at most time.per_day = {per_day} "
            f"visits ({k * per_day} visits). Raise field_days to at least {-(-n // per_day)}, "
            "raise per_day, or plan fewer samples."
        )
    drawn = draw_days(days, k, rng=rng)
    return spread_visits(drawn, n, per_day=int(per_day), rng=rng)


def assign_days(n_visits: int, days: Sequence[FieldDay], *, per_day: int, rng: np.random.Generator,
                field_days: int | None = None) -> np.ndarray:
    """Field days for ``n_visits`` visits: one day index per visit, ascending (see :func:`plan_days`).

    Examples
    --------
    >>> cal = field_days("2027-06-07", "2027-06-18", window=["07:00", "15:00"], timezone="UTC")
    >>> idx = assign_days(4, cal.days, per_day=1, rng=np.random.default_rng(1))
    >>> sorted(np.bincount([cal[i].temporal_stratum == "2027-W23" for i in idx]).tolist())
    [2, 2]
    """
    return plan_days(n_visits, days, per_day=per_day, rng=rng, field_days=field_days).day_indices()


# --------------------------------------------------------------------------- times
def _epoch_minutes(t: dt.datetime, *, up: bool) -> int:
    s = t.timestamp() / 60.0
    return math.ceil(s - 1e-9) if up else math.floor(s + 1e-9)


def draw_times(
    day_indices: Sequence[int] | np.ndarray,
    days: Sequence[FieldDay],
    *,
    rng: np.random.Generator,
    minutes_on_site: float = 0,
) -> list[dt.datetime]:
    """A uniform random planned time for each visit inside its day's window.

    The time is a whole minute drawn uniformly from those in
    ``[window_start, window_end - minutes_on_site]`` (so the sampling ends
    inside the window), measured in real elapsed time (UTC), and returned in the
    window's zone: ``.isoformat()`` gives ISO 8601 with the UTC offset.

    Parameters
    ----------
    day_indices : sequence of int
        Index into ``days`` for each visit.
    days : sequence of FieldDay
    rng : numpy.random.Generator
        One integer is drawn per visit, in the order of ``day_indices``.
    minutes_on_site : float
        Minutes the sampling takes; the latest start is ``window_end - minutes_on_site``.

    Returns
    -------
    list of datetime.datetime

    Raises
    ------
    SettingError
        ``minutes_on_site`` negative.
    InfeasibleError
        A day whose window holds no whole minute to start at (figures in the message).

    Examples
    --------
    >>> cal = field_days("2027-06-01", "2027-06-01", window=["07:00", "07:10"], timezone="Europe/Berlin")
    >>> t = draw_times([0], cal.days, rng=np.random.default_rng(3), minutes_on_site=5)[0]
    >>> t.isoformat()[:11], "07:00" <= t.strftime("%H:%M") <= "07:05", t.isoformat()[-6:]
    ('2027-06-01T', True, '+02:00')
    """
    if not (isinstance(minutes_on_site, (int, float, np.integer, np.floating)) and minutes_on_site >= 0):
        raise SettingError("time.minutes_on_site", minutes_on_site, "a number of minutes >= 0",
                           fix="write minutes_on_site = 15")
    idx = np.asarray(day_indices, dtype=int)
    if idx.size == 0:
        return []
    lo = np.empty(len(days), dtype=np.int64)
    hi = np.empty(len(days), dtype=np.int64)
    for i, d in enumerate(days):
        lo[i] = _epoch_minutes(d.window_start, up=True)
        # in real time: an aware datetime minus a timedelta is wall-clock arithmetic (wrong across DST)
        hi[i] = math.floor((d.window_end.timestamp() - 60.0 * float(minutes_on_site)) / 60.0 + 1e-9)
    used = np.unique(idx)
    bad = [int(i) for i in used if hi[i] < lo[i]]
    if bad:
        d = days[bad[0]]
        length = (d.window_end.astimezone(_UTC) - d.window_start.astimezone(_UTC)).total_seconds() / 60
        raise InfeasibleError(
            f"{len(bad)} field day(s) with visits have no time to start sampling: on {d.date.isoformat()} the "
            f"window {d.window_start:%H:%M}-{d.window_end:%H:%M} lasts {length:.0f} min, less than "
            f"time.minutes_on_site = {minutes_on_site:g}. Widen time.window, lower time.minutes_on_site, or "
            "drop such days with field_days(..., min_minutes=minutes_on_site)."
        )
    minutes = rng.integers(lo[idx], hi[idx] + 1)
    return [
        dt.datetime.fromtimestamp(int(m) * 60, tz=_UTC).astimezone(days[i].window_start.tzinfo)
        for m, i in zip(minutes, idx)
    ]


# --------------------------------------------------------------------------- schedule
def _visit(site: Any, **kw: Any) -> Visit:
    return Visit(site_id=site.site_id, stratum=site.stratum, role=site.role, reserve_rank=site.reserve_rank,
                 x=site.x, y=site.y, lat=site.lat, lon=site.lon, **kw)


def schedule_visits(
    draw: SiteDraw,
    days: Sequence[FieldDay] | FieldCalendar,
    *,
    per_day: int,
    seed: int | np.random.SeedSequence,
    minutes_on_site: float = 0,
    field_days: int | None = None,
) -> Schedule:
    """Random field days, and random dates and times, for the primary sites of a draw.

    :func:`plan_days` draws the field days (each allowed day with a known
    inclusion probability, stored on the day) and the number of visits on
    each; the primaries are shuffled over those visits (which site goes on which
    day is random too), and :func:`draw_times` gives each a uniform random time
    in its window. ``itinerary.build_itinerary`` later replaces times and
    ``route_order`` with a routed order whose times are uniform over the window too.

    Parameters
    ----------
    draw : SiteDraw
    days : sequence of FieldDay or FieldCalendar
        All allowed days; they are all stored in ``Schedule.days`` with their
        ``inclusion_p`` and ``drawn`` set, and ``Visit.day_index`` refers to them.
    per_day : int
        Most visits a day.
    seed : int or SeedSequence
        The design's root seed; the stream ``stream(seed, "time")`` draws, in
        order: the field days and their numbers of visits (:func:`plan_days`),
        the shuffle of the primaries over them, then the times.
    minutes_on_site : float
    field_days : int, optional
        The number of field days (``time.field_days``); by default as many as
        there are primaries, at most every allowed day.

    Returns
    -------
    Schedule
        Primaries sorted by (date, planned time, site id) with ``route_order`` the
        order of planned time within the day (1-based); then reserves, with no
        date, by stratum (in draw order) and ``reserve_rank``. ``time_of_day``
        from :func:`time_of_day_summary`; ``warnings`` those of a FieldCalendar;
        ``day_draw`` the day draw's record (:meth:`DayDraw.record`).

    Raises
    ------
    SettingError, InfeasibleError
        As :func:`plan_days` and :func:`draw_times`.
    """
    warnings = tuple(getattr(days, "warnings", ()))
    rng = stream(seed, "time")
    primaries = draw.primaries()
    plan = plan_days(len(primaries), tuple(getattr(days, "days", days)), per_day=per_day, rng=rng,
                     field_days=field_days)
    day_tuple = plan.days
    slots = plan.day_indices()
    who = rng.permutation(len(primaries))
    times = draw_times(slots, day_tuple, rng=rng, minutes_on_site=minutes_on_site)

    placed = sorted(
        ((int(slots[k]), times[k], primaries[int(who[k])]) for k in range(len(primaries))),
        key=lambda r: (day_tuple[r[0]].date, r[1], r[2].site_id),
    )
    visits: list[Visit] = []
    order: dict[int, int] = {}
    for day_i, t, site in placed:
        order[day_i] = order.get(day_i, 0) + 1
        visits.append(_visit(site, visit_date=day_tuple[day_i].date, planned_time=t, day_index=day_i,
                             route_order=order[day_i]))
    strata_order = {name: i for i, name in enumerate(dict.fromkeys(s.stratum for s in draw.sites))}
    reserves = sorted(draw.reserves(), key=lambda s: (strata_order[s.stratum], s.reserve_rank, s.site_id))
    visits.extend(_visit(s) for s in reserves)
    return Schedule(visits=tuple(visits), days=day_tuple, time_of_day=time_of_day_summary(visits),
                    warnings=warnings, calendar_days=len(day_tuple), day_draw=plan.record())


def time_of_day_summary(visits: Iterable[Visit]) -> dict[str, dict[str, float]]:
    """Per stratum: when in the day the primary visits are planned (local clock hours).

    Sunlight inactivates faecal indicator bacteria, so morning counts tend to be
    higher than afternoon counts at the same place (Whitman et al. 2004, Appl.
    Environ. Microbiol. 70:4276, memory). A stratum sampled mostly in the
    morning and another mostly in the afternoon are then not comparable; the
    share before 10:00 shows it.

    Parameters
    ----------
    visits : iterable of Visit
        Reserves and visits without a planned time are ignored.

    Returns
    -------
    dict
        Stratum name -> ``{"n", "earliest_h", "median_h", "latest_h",
        "share_before_10"}``; hours are local decimal hours (7.5 = 07:30).

    Examples
    --------
    >>> from zoneinfo import ZoneInfo
    >>> tz = ZoneInfo("America/Chicago")
    >>> vs = [Visit(f"A-{h}", "A", "primary", 0, 0, 0, 0, 0, planned_time=dt.datetime(2027, 6, 1, h, 30, tzinfo=tz))
    ...       for h in (8, 9, 14)]
    >>> time_of_day_summary(vs)["A"]["median_h"]
    9.5
    """
    hours: dict[str, list[float]] = {}
    for v in visits:
        if v.role == "primary" and v.planned_time is not None:
            t = v.planned_time
            hours.setdefault(v.stratum, []).append(t.hour + t.minute / 60 + t.second / 3600)
    out: dict[str, dict[str, float]] = {}
    for name, hs in hours.items():
        h = np.asarray(hs, dtype=float)
        out[name] = {
            "n": float(h.size),
            "earliest_h": float(h.min()),
            "median_h": float(np.median(h)),
            "latest_h": float(h.max()),
            "share_before_10": float(np.mean(h < MORNING_HOUR)),
        }
    return out
