"""Planned times of the itinerary: uniform over the window, consistent with the route, right across DST.

Fakes as in test_itinerary.py (a straight-line router, access points built by hand).
"""
from __future__ import annotations

import datetime as dt
import math
from zoneinfo import ZoneInfo

import numpy as np
import pyproj
import pytest
import scipy.stats

from geosample.errors import InfeasibleError
from geosample.itinerary import build_itinerary
from geosample.model import AccessPoint, FieldDay, Frame, Schedule, Visit

TZ = ZoneInfo("America/Chicago")
UTC = dt.timezone.utc
CRS = pyproj.CRS("EPSG:32615")
X0, Y0 = 500_000.0, 4_600_000.0
N_DRAWS = 2000


class EuclidRouter:
    error_m = 0.0

    def distance_matrix(self, xy):
        xy = np.asarray(xy, dtype=float)
        diff = xy[:, None, :] - xy[None, :, :]
        return np.hypot(diff[..., 0], diff[..., 1])

    def path(self, a, b):
        return [tuple(a), tuple(b)]


def access(name, dx, dy):
    lon, lat = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True).transform(X0 + dx, Y0 + dy)
    return AccessPoint(name, X0 + dx, Y0 + dy, lat, lon)


DOCK = (access("Dock", 0, 0),)


def frame(acc=DOCK):
    return Frame(CRS, "test", None, None, (), 0.0, access=tuple(acc), router=EuclidRouter())


def day_of(date, start, end):
    return FieldDay(date, dt.datetime.combine(date, dt.time(*start), tzinfo=TZ),
                    dt.datetime.combine(date, dt.time(*end), tzinfo=TZ))


def one_day(points, day):
    visits = tuple(Visit(f"S-{i + 1:03d}", "A", "primary", 0, X0 + dx, Y0 + dy, 0.0, 0.0, visit_date=day.date,
                         day_index=0) for i, (dx, dy) in enumerate(points))
    return Schedule(visits, (day,))


def minutes(t: dt.datetime) -> float:
    return t.timestamp() / 60.0


def positions(points, day, *, on_site=15, n=N_DRAWS, **kw):
    """For each of n seeds: every visit's planned start as a fraction of the span where sampling may start."""
    lo = math.ceil(minutes(day.window_start))
    hi = math.floor(minutes(day.window_end) - on_site)
    length = hi - lo + 1
    sched = one_day(points, day)
    out = np.empty((n, len(points)))
    for seed in range(n):
        res = build_itinerary(sched, frame(), seed=seed, minutes_on_site=on_site, **kw)
        t = {v.site_id: minutes(v.planned_time) for v in res.visits}
        out[seed] = [t[f"S-{i + 1:03d}"] - lo for i in range(len(points))]
    assert out.min() >= 0 and out.max() <= length - 1 and np.all(out == np.round(out))
    return out, length


# --------------------------------------------------------------------------- uniform over the window
@pytest.mark.parametrize("case", ["one trip", "split for holding time"])
def test_each_visits_planned_time_is_uniform_over_the_window(case):
    # A 07:00-11:00 window and a round of about 1.5-2 h: the old uniform departure over the slack gave the
    # window's first and last tenths a third to a half of their share. For each visit separately (the seeds
    # are independent designs) its minute is compared with the discrete uniform on the L start minutes:
    # Kolmogorov-Smirnov after spreading each minute uniformly over its width (scipy; exact under the null),
    # and the first and last tenth's shares within 4 sd of 1/10 (false alarm < 1e-4 each). False-alarm rate of
    # each KS test 0.001.
    pts = [(1000.0, 0.0), (2000.0, 600.0), (3000.0, -400.0), (1500.0, -1500.0)]
    day = day_of(dt.date(2027, 6, 1), (7, 0), (11, 0))
    kw = {"holding_h": 1.0, "lab_minutes": 10} if case == "split for holding time" else {}
    pos, length = positions(pts, day, **kw)
    jitter = np.random.default_rng(7).random(pos.shape)
    for j in range(len(pts)):
        u = (pos[:, j] + jitter[:, j]) / length
        assert scipy.stats.kstest(u, "uniform").pvalue > 0.001, j
        tenth = math.sqrt(0.1 * 0.9 / N_DRAWS)
        assert abs(np.mean(u < 0.1) - 0.1) < 4 * tenth
        assert abs(np.mean(u >= 0.9) - 0.1) < 4 * tenth


def test_route_order_follows_the_planned_times_and_each_leg_is_reachable():
    # Within a day the route order is the order of the planned times, and consecutive visits of one trip are
    # at least a leg (rounded up to whole minutes at 15 km/h = 250 m/min) plus 15 min on site apart.
    pts = [(1000.0, 0.0), (2000.0, 600.0), (3000.0, -400.0), (1500.0, -1500.0)]
    day = day_of(dt.date(2027, 6, 1), (7, 0), (11, 0))
    sched = one_day(pts, day)
    xy = {f"S-{i + 1:03d}": (X0 + dx, Y0 + dy) for i, (dx, dy) in enumerate(pts)}
    wrapped = 0
    for seed in range(60):
        out = build_itinerary(sched, frame(), seed=seed, minutes_on_site=15)
        vs = sorted(out.visits, key=lambda v: v.route_order)
        assert [minutes(v.planned_time) for v in vs] == sorted(minutes(v.planned_time) for v in vs)
        for r in out.routes:
            assert minutes(r.start) < minutes(r.end)
            for a, b in zip(r.site_ids, r.site_ids[1:]):
                leg = math.ceil(math.dist(xy[a], xy[b]) / 250 - 1e-9)
                ta = minutes(next(v.planned_time for v in vs if v.site_id == a))
                tb = minutes(next(v.planned_time for v in vs if v.site_id == b))
                assert tb - ta >= leg + 15
        for a, b in zip(out.routes, out.routes[1:]):
            assert a.end <= b.start  # one crew: trips never overlap
        wrapped += len(out.routes) > 1
    assert wrapped > 0  # some seeds put part of the round at the window's opening


def test_line_example_on_the_circle_by_hand():
    # Sites 1, 2, 3 km east of the dock, 15 km/h (4 min/km), 15 min on site: outward arrivals 4, 23, 42 min,
    # back at 69 (common practice arithmetic). Window 08:00-10:00 with 15 min on site: starts 08:00..09:45,
    # L = 106 minutes. Every visit is planned at (u + a) mod 106 after 08:00 for one u, for either direction.
    day = day_of(dt.date(2027, 6, 1), (8, 0), (10, 0))
    sched = one_day([(1000.0, 0.0), (2000.0, 0.0), (3000.0, 0.0)], day)
    lo = minutes(day.window_start)
    for seed in range(40):
        out = build_itinerary(sched, frame(), seed=seed, minutes_on_site=15, speed_kmh=15)
        t = {v.site_id: minutes(v.planned_time) - lo for v in out.visits}
        outward = {"S-001": 4, "S-002": 23, "S-003": 42}
        back = {"S-003": 12, "S-002": 31, "S-001": 50}
        us = [{(t[s] - a) % 106 for s, a in pattern.items()} for pattern in (outward, back)]
        assert any(len(u) == 1 for u in us), (seed, t)


def test_a_round_longer_than_the_window_is_infeasible_with_figures():
    # 69 min round (see above) in a 08:00-09:20 window: sampling may start in 66 minutes (08:00..09:05).
    day = day_of(dt.date(2027, 6, 1), (8, 0), (9, 20))
    sched = one_day([(1000.0, 0.0), (2000.0, 0.0), (3000.0, 0.0)], day)
    with pytest.raises(InfeasibleError) as err:
        build_itinerary(sched, frame(), seed=1, minutes_on_site=15)
    msg = str(err.value)
    assert "2027-06-01" in msg and "69 min" in msg and "66 min" in msg and "time.per_day" in msg


# --------------------------------------------------------------------------- daylight saving time
@pytest.mark.parametrize("date, start, end, real_minutes", [
    # US DST 2027: clocks go 02:00 -> 03:00 on 14 March and 02:00 -> 01:00 on 7 November in America/Chicago
    # (second Sunday of March, first of November; common practice). Expected lengths from zoneinfo via UTC.
    (dt.date(2027, 3, 14), (0, 30), (5, 30), 240),
    (dt.date(2027, 11, 7), (0, 30), (4, 30), 300),
])
def test_planned_times_across_a_clock_change_exist_and_keep_real_minutes(date, start, end, real_minutes):
    day = day_of(date, start, end)
    assert minutes(day.window_end) - minutes(day.window_start) == real_minutes  # the fixture itself
    pts = [(1000.0, 0.0), (2000.0, 0.0), (3000.0, 0.0)]
    sched = one_day(pts, day)
    seen_offsets, text = set(), set()
    for seed in range(80):
        out = build_itinerary(sched, frame(), seed=seed, minutes_on_site=15, speed_kmh=15)
        by_id = {v.site_id: v.planned_time for v in out.visits}
        for t in by_id.values():
            # the time exists and means what it says: through UTC and back gives the same wall clock and offset
            back = t.astimezone(UTC).astimezone(TZ)
            assert (back.replace(tzinfo=None), back.utcoffset()) == (t.replace(tzinfo=None), t.utcoffset())
            assert minutes(day.window_start) <= minutes(t) <= minutes(day.window_end) - 15
            seen_offsets.add(t.utcoffset())
            text.add(t.isoformat())
        # the route's arrivals keep their real spacing (19 min between neighbours either way, see the line
        # example) unless the round was cut by the circle
        (r,) = out.routes if len(out.routes) == 1 else (None,)
        if r is not None:
            ts = [minutes(by_id[s]) for s in r.site_ids]
            assert np.diff(ts).tolist() == [19.0, 19.0]
            assert minutes(r.end) - minutes(r.start) == 69
    assert seen_offsets == {dt.timedelta(hours=-6), dt.timedelta(hours=-5)}
    if date.month == 3:
        assert not any("T02:" in x for x in text)  # 02:00-02:59 does not exist that night
    else:
        assert {"-05:00", "-06:00"} <= {x[-6:] for x in text if "T01:" in x}  # 01:xx happens twice


def test_the_schedule_and_the_report_say_how_times_were_drawn():
    import html
    import sys
    from dataclasses import replace
    from pathlib import Path

    from geosample.export.report import render_report
    from geosample.itinerary import TIME_DRAW

    day = day_of(dt.date(2027, 6, 1), (7, 0), (11, 0))
    out = build_itinerary(one_day([(1000.0, 0.0)], day), frame(), seed=1)
    assert out.time_draw == TIME_DRAW and "uniformly distributed over the day's window" in TIME_DRAW
    sys.path.insert(0, str(Path(__file__).parent))
    from fixtures_design import build_design

    design = build_design()
    design = replace(design, schedule=replace(design.schedule, time_draw=TIME_DRAW))
    assert TIME_DRAW in html.unescape(render_report(design))


def test_provisional_times_keep_the_time_on_site_in_real_minutes_across_spring_forward():
    # 2027-03-14 America/Chicago: 01:00 CST to 03:10 CDT is 70 real minutes (07:00-08:10 UTC). With 30 min
    # on site the last start is 07:40 UTC (01:40 CST); subtracting 30 min on the wall clock from 03:10
    # would give the nonexistent 02:40, read as 08:40 UTC, after the window's end (zoneinfo; common practice).
    from geosample.randomizer.time import draw_times, field_days

    cal = field_days("2027-03-14", "2027-03-14", weekdays=["sun"], window=["01:00", "03:10"],
                     timezone="America/Chicago")
    end = cal[0].window_end.timestamp()
    assert end - cal[0].window_start.timestamp() == 70 * 60
    times = draw_times(np.zeros(300, dtype=int), cal.days, rng=np.random.default_rng(4), minutes_on_site=30)
    assert max(t.timestamp() for t in times) + 30 * 60 <= end


def test_report_time_to_lab_counts_real_minutes_across_fall_back():
    # 2027-11-07 America/Chicago: first sample 01:10 CDT (06:10 UTC), back at 01:30 CST (07:30 UTC): 80 real
    # minutes, not the 20 the wall clock shows. With the fixture's lab minutes the report's hours to the
    # lab are (80 + lab) / 60.
    import sys
    from dataclasses import replace
    from pathlib import Path

    from geosample.export.report import report_context

    sys.path.insert(0, str(Path(__file__).parent))
    from fixtures_design import build_design

    design = build_design()
    r0 = design.schedule.routes[0]
    first = dt.datetime(2027, 11, 7, 1, 10, tzinfo=TZ)
    back = dt.datetime(2027, 11, 7, 1, 30, fold=1, tzinfo=TZ)
    assert back.timestamp() - first.timestamp() == 80 * 60
    visits = tuple(replace(v, planned_time=first) if v.site_id in r0.site_ids else v
                   for v in design.schedule.visits)
    design = replace(design, schedule=replace(design.schedule, visits=visits,
                                              routes=(replace(r0, end=back),) + design.schedule.routes[1:]))
    lab = float(design.settings["time"]["lab_minutes"])
    row = report_context(design)["routes"]["rows"][0]
    assert row["to_lab_h"] == f"{(80 + lab) / 60:.1f}"
