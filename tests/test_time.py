"""Tests for geosample.randomizer.time: field days, windows, sun times, random days and times."""
from __future__ import annotations

import datetime as dt
import math
from collections import Counter
from fractions import Fraction
from zoneinfo import ZoneInfo

import astral
import astral.sun
import numpy as np
import pytest
import scipy.stats
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from geosample.errors import InfeasibleError, SettingError
from geosample.model import FieldDay, Site, SiteDraw
from geosample.randomizer.time import (
    FieldCalendar,
    assign_days,
    draw_times,
    field_days,
    parse_window,
    schedule_visits,
    time_of_day_summary,
)

UTC = dt.timezone.utc
CLOCK = ["07:00", "15:00"]


# --------------------------------------------------------------------------- helpers
def usno_sun_event_ut(day_of_year: int, lat: float, lon: float, rising: bool, zenith: float = 90 + 50 / 60) -> float:
    """Sunrise or sunset in decimal hours UT by the USNO Almanac for Computers (1990) algorithm.

    Written here from the published algorithm (memory), independent of the code under test.
    """
    rad, deg = math.radians, math.degrees
    lng_hour = lon / 15
    t = day_of_year + ((6 if rising else 18) - lng_hour) / 24
    m = 0.9856 * t - 3.289
    true_long = (m + 1.916 * math.sin(rad(m)) + 0.020 * math.sin(rad(2 * m)) + 282.634) % 360
    ra = deg(math.atan(0.91764 * math.tan(rad(true_long)))) % 360
    ra = (ra + (math.floor(true_long / 90) * 90 - math.floor(ra / 90) * 90)) / 15
    sin_dec = 0.39782 * math.sin(rad(true_long))
    cos_dec = math.cos(math.asin(sin_dec))
    cos_h = (math.cos(rad(zenith)) - sin_dec * math.sin(rad(lat))) / (cos_dec * math.cos(rad(lat)))
    h = (360 - deg(math.acos(cos_h))) if rising else deg(math.acos(cos_h))
    local_mean = h / 15 + ra - 0.06571 * t - 6.622
    return (local_mean - lng_hour) % 24


def ut_hours(t: dt.datetime) -> float:
    u = t.astimezone(UTC)
    return u.hour + u.minute / 60 + u.second / 3600 + u.microsecond / 3.6e9


def clock_days(start: dt.date, n_days: int, temporal: str = "week", tz: str = "UTC") -> tuple[FieldDay, ...]:
    end = start + dt.timedelta(days=n_days - 1)
    return field_days(start, end, weekdays=("mon", "tue", "wed", "thu", "fri", "sat", "sun"), window=CLOCK,
                      timezone=tz, temporal=temporal).days


def make_draw(n_primary: dict[str, int], n_reserve: dict[str, int]) -> SiteDraw:
    """A SiteDraw built by hand (no geometry needed)."""
    sites = []
    for code, n in n_primary.items():
        for i in range(n + n_reserve.get(code, 0)):
            role = "primary" if i < n else "reserve"
            sites.append(Site(f"{code}-{i + 1:03d}", code, role, 0 if i < n else i - n + 1, i,
                              1000.0 * i, 2000.0, 45.0, -93.0))
    return SiteDraw(tuple(sites), "balanced", 0.5, None, {})


# --------------------------------------------------------------------------- windows
@pytest.mark.parametrize("text, anchor, minutes", [
    ("07:00", "clock", 420), ("7:05", "clock", 425), ("15:30", "clock", 930),
    ("sunrise", "sunrise", 0), ("sunrise+60", "sunrise", 60), ("Sunset - 120", "sunset", -120),
    (" sunset+0 ", "sunset", 0),
])
def test_parse_window_forms(text, anchor, minutes):
    other = "23:59" if anchor != "sunset" else "sunset+600"
    w = parse_window([text, other])
    assert (w.start.anchor, w.start.minutes) == (anchor, minutes)


@pytest.mark.parametrize("window", [
    ["7am", "15:00"], ["25:00", "26:00"], ["07:60", "08:00"], ["noon", "sunset"], ["sunrise+1h30", "sunset"],
    ["07:00"], "07:00-15:00", ["07:00", "15:00", "16:00"], ["15:00", "07:00"], ["sunset-30", "sunrise+30"],
    ["sunrise+60", "sunrise+30"], ["07:00", 15],
])
def test_parse_window_refuses_bad_text(window):
    with pytest.raises(SettingError) as err:
        parse_window(window)
    msg = str(err.value)
    assert "time.window" in msg and "sunrise+60" in msg and "07:00" in msg  # names setting and an example


# --------------------------------------------------------------------------- sun
def test_sunrise_sunset_usno_worked_example():
    # USNO Almanac for Computers (1990) worked example: 40.9 N, 74.3 W, 25 June 1990, zenith 90 deg 50 min,
    # sunrise 9.441 h UT = 05:26 EDT, sunset about 20:33 EDT (memory + computed). astral uses a slightly
    # different zenith (apparent radius + refraction) and NOAA's equations: allow 2 minutes.
    ref_rise = usno_sun_event_ut(176, 40.9, -74.3, rising=True)
    ref_set = usno_sun_event_ut(176, 40.9, -74.3, rising=False)
    assert ref_rise == pytest.approx(9.441, abs=0.0005)  # the algorithm as written reproduces the published value
    cal = field_days(dt.date(1990, 6, 25), dt.date(1990, 6, 25), weekdays=["monday"], window=["sunrise", "sunset"],
                     timezone="America/New_York", lat=40.9, lon=-74.3)
    day = cal[0]
    assert ut_hours(day.window_start) == pytest.approx(ref_rise, abs=2 / 60)
    assert ut_hours(day.window_end) == pytest.approx(ref_set, abs=2 / 60)
    assert day.window_start.strftime("%H:%M%z") in {"05:25-0400", "05:26-0400", "05:27-0400"}
    assert day.window_end.utcoffset() == dt.timedelta(hours=-4)  # EDT
    assert abs((day.window_end - dt.datetime(1990, 6, 25, 20, 33, tzinfo=ZoneInfo("America/New_York")))
               .total_seconds()) <= 120


@pytest.mark.parametrize("lat, lon, tz, date", [
    (40.9, -74.3, "America/New_York", dt.date(1990, 12, 21)),
    (60.2, 24.9, "Europe/Helsinki", dt.date(2027, 6, 21)),
    (-33.9, 18.4, "Africa/Johannesburg", dt.date(2027, 7, 15)),
    (45.0, -93.3, "America/Chicago", dt.date(2027, 3, 15)),
])
def test_sun_offsets_against_usno_and_astral(lat, lon, tz, date):
    # USNO Almanac for Computers (1990) algorithm (memory) within 2 min; astral (reference library) for the
    # offsets: the window edges must be astral's sunrise + 60 min and sunset - 120 min in real time.
    cal = field_days(date, date, weekdays=[date.strftime("%a")], window=["sunrise+60", "sunset-120"],
                     timezone=tz, lat=lat, lon=lon)
    day = cal[0]
    doy = date.timetuple().tm_yday
    assert ut_hours(day.sunrise) == pytest.approx(usno_sun_event_ut(doy, lat, lon, True), abs=2 / 60)
    obs = astral.Observer(latitude=lat, longitude=lon)
    rise = astral.sun.sunrise(obs, date, tzinfo=ZoneInfo(tz))
    sset = astral.sun.sunset(obs, date, tzinfo=ZoneInfo(tz))
    assert day.window_start.timestamp() == pytest.approx(rise.timestamp() + 3600, abs=1e-3)
    assert day.window_end.timestamp() == pytest.approx(sset.timestamp() - 7200, abs=1e-3)
    assert day.window_start.date() == date and day.window_start.utcoffset() == ZoneInfo(tz).utcoffset(
        dt.datetime.combine(date, dt.time(12)))


def test_polar_day_and_night_raise_clearly_and_clock_windows_work():
    # Polar day at 78 N in June and polar night in December (common practice: above the Arctic circle).
    for month, word in ((6, "polar day"), (12, "polar night")):
        with pytest.raises(InfeasibleError) as err:
            field_days(dt.date(2027, month, 1), dt.date(2027, month, 10), window=["sunrise+60", "sunset-120"],
                       timezone="Arctic/Longyearbyen", lat=78.2, lon=15.6)
        msg = str(err.value)
        assert f"2027-{month:02d}-01" in msg and "78.2" in msg and word in msg and "clock" in msg
        assert "8 field day(s)" in msg  # 1..10 June/December 2027 hold 8 weekdays
    cal = field_days(dt.date(2027, 6, 1), dt.date(2027, 6, 10), window=CLOCK, timezone="Arctic/Longyearbyen",
                     lat=78.2, lon=15.6)
    assert len(cal) == 8 and all(d.sunrise is None and d.sunset is None for d in cal)
    assert cal[0].window_start.isoformat() == "2027-06-01T07:00:00+02:00"  # CEST (common practice)


def test_empty_winter_window_is_dropped_with_a_warning():
    # 66.0 N (just south of the Arctic circle) in December: under 3 h of day near the solstice. Days with
    # sunset - sunrise <= 180 min have an empty ["sunrise+60", "sunset-120"] window; expected set computed
    # with astral (reference library).
    lat, lon, tz = 66.0, -147.7, "America/Anchorage"
    start, end = dt.date(2027, 11, 20), dt.date(2028, 1, 10)
    obs = astral.Observer(latitude=lat, longitude=lon)
    expect_drop, expect_keep = set(), set()
    d = start
    while d <= end:
        if d.weekday() < 5:
            span = astral.sun.sunset(obs, d, tzinfo=ZoneInfo(tz)) - astral.sun.sunrise(obs, d, tzinfo=ZoneInfo(tz))
            (expect_drop if span.total_seconds() <= 180 * 60 else expect_keep).add(d)
        d += dt.timedelta(days=1)
    assert expect_drop and expect_keep  # the case really has both
    cal = field_days(start, end, window=["sunrise+60", "sunset-120"], timezone=tz, lat=lat, lon=lon)
    assert isinstance(cal, FieldCalendar)
    assert set(cal.dropped) == expect_drop
    assert {x.date for x in cal} == expect_keep
    assert len(cal.warnings) == len(expect_drop)
    assert all("dropped" in w and "time.window" in w for w in cal.warnings)
    assert all(x.window_end > x.window_start for x in cal)


# --------------------------------------------------------------------------- calendar
def test_days_weekdays_skip_and_labels():
    start, end = dt.date(2027, 6, 1), dt.date(2027, 8, 31)
    skip = [dt.date(2027, 7, 5), dt.date(2027, 7, 6), dt.date(2027, 7, 10)]  # Mon, Tue, Sat
    cal = field_days(start, end, weekdays=["MON", "Wednesday", "fri"], skip=skip, window=CLOCK,
                     timezone="America/Chicago")
    expected = [start + dt.timedelta(days=k) for k in range((end - start).days + 1)]
    expected = [d for d in expected if d.weekday() in (0, 2, 4) and d not in skip]  # independent of the code
    assert [d.date for d in cal] == expected
    assert all(d.temporal_stratum == d.date.strftime("%G-W%V") for d in cal)  # ISO week via strftime
    assert cal.counts["skipped"] == 1 and cal.counts["season_days"] == 92
    months = field_days(start, end, weekdays=["mon"], window=CLOCK, timezone="UTC", temporal="month")
    assert {d.temporal_stratum for d in months} == {"2027-06", "2027-07", "2027-08"}
    season = field_days(start, end, window=CLOCK, timezone="UTC", temporal="season")
    assert {d.temporal_stratum for d in season} == {"season"}


def test_min_minutes_drops_days_shorter_than_the_visit():
    cal = field_days("2027-06-01", "2027-06-03", window=["07:00", "07:10"], timezone="UTC")
    assert len(cal) == 3
    with pytest.raises(InfeasibleError, match="empty"):
        field_days("2027-06-01", "2027-06-03", window=["07:00", "07:10"], timezone="UTC", min_minutes=15)


@pytest.mark.parametrize("kw, setting", [
    ({"weekdays": ["mon", "funday"]}, "time.days"),
    ({"weekdays": []}, "time.days"),
    ({"timezone": "CST"}, "survey.timezone"),
    ({"timezone": "Mars/Olympus_Mons"}, "survey.timezone"),
    ({"temporal": "fortnight"}, "time.temporal"),
    ({"window": ["sunrise", "sunset"], "lat": None}, "lat"),
])
def test_bad_settings_name_the_setting(kw, setting):
    args = {"window": CLOCK, "timezone": "UTC", **kw}
    with pytest.raises(SettingError) as err:
        field_days(dt.date(2027, 6, 1), dt.date(2027, 6, 30), **args)
    assert str(err.value).startswith(setting)
    if setting == "time.days":
        assert "mon, tue, wed, thu, fri, sat, sun" in str(err.value)


def test_reversed_dates_name_both():
    with pytest.raises(SettingError) as err:
        field_days(dt.date(2027, 8, 31), dt.date(2027, 6, 1), window=CLOCK, timezone="UTC")
    msg = str(err.value)
    assert "time.start" in msg and "time.end" in msg and "2027-08-31" in msg and "2027-06-01" in msg


def test_no_allowed_day_gives_the_figures():
    with pytest.raises(InfeasibleError) as err:  # 2027-06-07..11 is Mon..Fri
        field_days(dt.date(2027, 6, 7), dt.date(2027, 6, 11), weekdays=["sat", "sun"], window=CLOCK,
                   timezone="UTC")
    msg = str(err.value)
    assert "5 calendar day(s)" in msg and "0 on time.days" in msg


# --------------------------------------------------------------------------- DST
def test_dst_offsets_america_chicago():
    # US daylight saving time 2027: starts 14 March, ends 7 November (second Sunday of March, first of
    # November; common practice). Expected offsets from zoneinfo directly, independent of the code.
    tz = ZoneInfo("America/Chicago")
    cal = field_days(dt.date(2027, 3, 10), dt.date(2027, 11, 10), weekdays=["sun", "mon", "sat"],
                     window=CLOCK, timezone="America/Chicago")
    for d in cal:
        expected = dt.datetime.combine(d.date, dt.time(7), tzinfo=tz).utcoffset()
        assert d.window_start.utcoffset() == expected
        assert d.window_start.strftime("%H:%M") == "07:00"
    by_date = {d.date: d for d in cal}
    assert by_date[dt.date(2027, 7, 10)].window_start.isoformat().endswith("-05:00")  # CDT
    assert by_date[dt.date(2027, 3, 13)].window_start.isoformat().endswith("-06:00")  # CST, day before
    assert by_date[dt.date(2027, 3, 14)].window_start.isoformat().endswith("-05:00")
    assert by_date[dt.date(2027, 11, 6)].window_start.isoformat().endswith("-05:00")
    assert by_date[dt.date(2027, 11, 7)].window_start.isoformat().endswith("-06:00")


def test_dst_day_windows_and_draws_use_real_time():
    # On 14 March 2027 in Chicago the clock jumps 02:00 -> 03:00: a 01:00-04:00 window lasts 2 real hours.
    cal = field_days(dt.date(2027, 3, 14), dt.date(2027, 3, 14), weekdays=["sun"], window=["01:00", "04:00"],
                     timezone="America/Chicago")
    day = cal[0]
    assert day.window_end.timestamp() - day.window_start.timestamp() == 7200
    times = draw_times(np.zeros(400, dtype=int), cal.days, rng=np.random.default_rng(5))
    assert all(day.window_start <= t <= day.window_end for t in times)
    assert all(t.hour != 2 for t in times)  # 02:xx does not exist that night
    offsets = {t.isoformat()[-6:] for t in times}
    assert offsets == {"-06:00", "-05:00"}
    # A clock time inside the gap does not exist: 02:30 CST would be 08:30 UTC, shown as 03:30 CDT.
    gap = field_days(dt.date(2027, 3, 14), dt.date(2027, 3, 14), weekdays=["sun"], window=["02:30", "05:00"],
                     timezone="America/Chicago")[0]
    assert gap.window_start.isoformat() == "2027-03-14T03:30:00-05:00"
    assert gap.window_start.astimezone(UTC) == dt.datetime(2027, 3, 14, 8, 30, tzinfo=UTC)
    # Sun-based window across the change: local sunrise jumps about an hour, the real instant moves ~1-2 min.
    sun = field_days(dt.date(2027, 3, 13), dt.date(2027, 3, 14), weekdays=["sat", "sun"],
                     window=["sunrise", "sunset"], timezone="America/Chicago", lat=41.9, lon=-87.6)
    a, b = sun[0].window_start, sun[1].window_start
    assert abs((b.timestamp() - a.timestamp()) - 86400) < 180
    assert b.hour - a.hour == 1


# --------------------------------------------------------------------------- assign_days
def test_too_many_visits_gives_figures_and_fixes():
    days = clock_days(dt.date(2027, 6, 1), 5)
    with pytest.raises(InfeasibleError) as err:
        assign_days(11, days, per_day=2, rng=np.random.default_rng(0))
    msg = str(err.value)
    assert "11" in msg and "5 field day(s)" in msg and "= 10" in msg and "time.per_day" in msg
    assert "fewer samples" in msg and "season" in msg
    assert len(assign_days(10, days, per_day=2, rng=np.random.default_rng(0))) == 10


def test_days_within_a_stratum_are_uniform():
    # One temporal stratum of 5 days, 3 visits, per_day = 2. By symmetry each day expects 3/5 visits per
    # draw. Chi-square goodness of fit (scipy) over 3000 draws; false-alarm rate 0.001.
    days = clock_days(dt.date(2027, 6, 7), 5)  # Mon..Fri of ISO week 23
    rng = np.random.default_rng(20270601)
    counts = np.zeros(5)
    for _ in range(3000):
        counts += np.bincount(assign_days(3, days, per_day=2, rng=rng), minlength=5)
    assert scipy.stats.chisquare(counts).pvalue > 0.001
    # Three visits and five days: three days are drawn, one visit each (days are the primary units; a day
    # never gets two visits while the stratum has a free day).
    assert all(np.bincount(assign_days(3, days, per_day=2, rng=rng)).max() == 1 for _ in range(200))


# --------------------------------------------------------------------------- draw_times
def test_times_lie_in_windows_on_whole_minutes():
    cal = field_days(dt.date(2027, 6, 1), dt.date(2027, 6, 30), window=["sunrise+60", "sunset-120"],
                     timezone="America/Chicago", lat=45.0, lon=-93.3)
    rng = np.random.default_rng(11)
    idx = rng.integers(0, len(cal), 500)
    times = draw_times(idx, cal.days, rng=rng, minutes_on_site=15)
    for i, t in zip(idx, times):
        d = cal[int(i)]
        assert t.tzinfo is not None and t.second == 0 and t.microsecond == 0
        assert d.window_start <= t <= d.window_end - dt.timedelta(minutes=15)
        assert t.date() == d.date
        assert t.isoformat()[-6:] == "-05:00"


def test_times_are_uniform_in_the_window():
    # A 07:00-15:00 window, 2000 draws: the minute after 07:00 is uniform on 0..480 (Kolmogorov-Smirnov
    # against the continuous uniform, scipy; with 481 values the discreteness is negligible). False alarm 0.001.
    cal = field_days("2027-06-01", "2027-06-01", window=CLOCK, timezone="UTC")
    t = draw_times(np.zeros(2000, dtype=int), cal.days, rng=np.random.default_rng(2))
    m = np.array([(x - cal[0].window_start).total_seconds() / 60 for x in t])
    assert m.min() >= 0 and m.max() <= 480
    assert scipy.stats.kstest((m + 0.5) / 481, "uniform").pvalue > 0.001


def test_window_shorter_than_the_visit_is_infeasible():
    cal = field_days("2027-06-01", "2027-06-01", window=["07:00", "07:10"], timezone="UTC")
    with pytest.raises(InfeasibleError) as err:
        draw_times([0], cal.days, rng=np.random.default_rng(0), minutes_on_site=15)
    msg = str(err.value)
    assert "2027-06-01" in msg and "10 min" in msg and "time.minutes_on_site = 15" in msg


# --------------------------------------------------------------------------- schedule_visits
def test_schedule_visits_contract():
    cal = field_days(dt.date(2027, 6, 1), dt.date(2027, 7, 31), skip=[dt.date(2027, 7, 5)],
                     window=["sunrise+60", "sunset-120"], timezone="America/Chicago", lat=45.0, lon=-93.3)
    draw = make_draw({"North": 20, "South": 13}, {"North": 4, "South": 3})
    sch = schedule_visits(draw, cal, per_day=3, seed=7, minutes_on_site=15)
    assert [d.date for d in sch.days] == [d.date for d in cal.days]  # every allowed day stored
    assert sum(d.drawn for d in sch.days) == 33  # one field day per visit: 33 of the 43 allowed days
    prim = [v for v in sch.visits if v.role == "primary"]
    res = [v for v in sch.visits if v.role == "reserve"]
    assert len(prim) == 33 and len(res) == 7
    assert sch.visits[:33] == tuple(prim)  # primaries first
    assert {v.site_id for v in prim} == {s.site_id for s in draw.primaries()}
    for v in prim:
        d = sch.days[v.day_index]
        assert v.visit_date == d.date and d.date != dt.date(2027, 7, 5) and d.date.weekday() < 5
        assert d.window_start <= v.planned_time <= d.window_end - dt.timedelta(minutes=15)
    assert [(v.visit_date, v.planned_time) for v in prim] == sorted((v.visit_date, v.planned_time) for v in prim)
    per = Counter(v.day_index for v in prim)
    assert max(per.values()) <= 3
    for day_i in per:
        day_visits = [v for v in prim if v.day_index == day_i]
        assert [v.route_order for v in day_visits] == list(range(1, len(day_visits) + 1))
    assert all(v.visit_date is None and v.planned_time is None and v.day_index is None for v in res)
    assert [(v.stratum, v.reserve_rank) for v in res] == [("North", r) for r in range(1, 5)] + \
        [("South", r) for r in range(1, 4)]
    assert set(sch.time_of_day) == {"North", "South"}


def test_schedule_is_reproducible_and_seed_dependent():
    days = clock_days(dt.date(2027, 6, 1), 30, tz="America/Chicago")
    draw = make_draw({"A": 12, "B": 8}, {"A": 2})
    a = schedule_visits(draw, days, per_day=2, seed=123)
    b = schedule_visits(draw, days, per_day=2, seed=123)
    c = schedule_visits(draw, days, per_day=2, seed=124)
    assert a == b
    key = lambda s: [(v.site_id, v.visit_date, v.planned_time) for v in s.visits]  # noqa: E731
    assert key(a) != key(c)


def test_which_site_goes_on_which_day_is_random():
    # With one temporal stratum (season) and many seeds, site A-001 must not always get the earliest day.
    days = clock_days(dt.date(2027, 6, 1), 10, temporal="season")
    draw = make_draw({"A": 5}, {})
    first = Counter()
    for seed in range(60):
        sch = schedule_visits(draw, days, per_day=1, seed=seed)
        first[sch.visits[0].site_id] += 1
    assert len(first) >= 4  # all 5 equally likely; P(<= 3 distinct in 60 draws) is negligible (< 1e-8)


def test_schedule_without_primaries_and_infeasible():
    days = clock_days(dt.date(2027, 6, 1), 3)
    empty = schedule_visits(make_draw({"A": 0}, {"A": 2}), days, per_day=1, seed=1)
    assert [v.role for v in empty.visits] == ["reserve", "reserve"] and empty.time_of_day == {}
    with pytest.raises(InfeasibleError, match="3 field day"):
        schedule_visits(make_draw({"A": 4}, {}), days, per_day=1, seed=1)
    with pytest.raises(SettingError, match="time.per_day"):
        schedule_visits(make_draw({"A": 1}, {}), days, per_day=0, seed=1)


# --------------------------------------------------------------------------- time of day
def test_time_of_day_summary_by_hand():
    tz = ZoneInfo("America/Chicago")
    draw = make_draw({"A": 4, "B": 1}, {"A": 1})
    hours = {"A-001": (7, 30), "A-002": (9, 0), "A-003": (13, 15), "A-004": (10, 0), "B-001": (16, 45)}
    from geosample.model import Visit

    visits = [Visit(s.site_id, s.stratum, s.role, s.reserve_rank, s.x, s.y, s.lat, s.lon,
                    planned_time=dt.datetime(2027, 6, 1, *hours[s.site_id], tzinfo=tz) if s.role == "primary"
                    else None) for s in draw.sites]
    out = time_of_day_summary(visits)
    assert out["A"] == {"n": 4.0, "earliest_h": 7.5, "median_h": (9.0 + 10.0) / 2, "latest_h": 13.25,
                        "share_before_10": 0.5}  # 10:00 itself is not before 10:00
    assert out["B"]["earliest_h"] == out["B"]["latest_h"] == 16.75


# --------------------------------------------------------------------------- window edges stay on the day
@pytest.mark.parametrize("window, text", [
    (["sunrise+1440", "sunset"], "sunrise+1440"),
    (["sunrise", "sunset-1440"], "sunset-1440"),
    (["sunrise-1500", "sunset"], "sunrise-1500"),
])
def test_offsets_of_a_whole_day_or_more_are_refused(window, text):
    # An offset of 1440 min or more from a sun event always lands on another date (issue: visits on other
    # dates, after the season, in the dark).
    with pytest.raises(SettingError) as err:
        parse_window(window)
    msg = str(err.value)
    assert msg.startswith("time.window") and text in msg and "same day" in msg and 'window = ["' in msg


@pytest.mark.parametrize("window, lat, lon, tz, bad", [
    # sunrise - 600 min in a Minnesota June is about 19:30 the evening before (astral, below)
    (["sunrise-600", "sunset-120"], 45.0, -93.3, "America/Chicago", "start"),
    # sunset + 300 min at 60 N in June is after midnight
    (["sunrise+60", "sunset+300"], 60.2, 24.9, "Europe/Helsinki", "end"),
])
def test_window_edges_that_leave_the_day_are_refused_naming_the_date(window, lat, lon, tz, bad):
    date = dt.date(2027, 6, 14)
    obs = astral.Observer(latitude=lat, longitude=lon)
    zone = ZoneInfo(tz)
    # the expectation from astral (reference library) and zoneinfo, independent of the code under test
    edge = (astral.sun.sunrise(obs, date, tzinfo=zone) - dt.timedelta(minutes=600) if bad == "start"
            else astral.sun.sunset(obs, date, tzinfo=zone) + dt.timedelta(minutes=300))
    assert edge.astimezone(zone).date() != date
    with pytest.raises(SettingError) as err:
        field_days(date, date, weekdays=["mon"], window=window, timezone=tz, lat=lat, lon=lon)
    msg = str(err.value)
    assert msg.startswith("time.window") and window[0 if bad == "start" else 1] in msg
    assert "2027-06-14" in msg and edge.astimezone(zone).date().isoformat() in msg and 'window = ["' in msg
