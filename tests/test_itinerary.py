"""Tests for geosample.itinerary: day routes over water, planned times, holding time.

The routers here are small fakes with the pinned ``geometry.WaterRouter`` interface
(``distance_matrix``, ``path``, ``error_m``); frames and schedules are built by hand.
"""
from __future__ import annotations

import datetime as dt
import itertools
import math
from zoneinfo import ZoneInfo

import numpy as np
import pyproj
import pytest

from geosample.errors import InfeasibleError, SettingError
from geosample.itinerary import STRAIGHT_LINE_WARNING, build_itinerary
from geosample.randomizer.time import time_of_day_summary
from geosample.model import AccessPoint, FieldDay, Frame, Schedule, Visit

TZ = ZoneInfo("America/Chicago")
CRS = pyproj.CRS("EPSG:32615")  # UTM zone 15N, metres
X0, Y0 = 500_000.0, 4_600_000.0


# --------------------------------------------------------------------------- fakes
def _euclid(xy):
    xy = np.asarray(xy, dtype=float)
    diff = xy[:, None, :] - xy[None, :, :]
    return np.hypot(diff[..., 0], diff[..., 1])


class EuclidRouter:
    """Open water everywhere: distances are straight lines."""

    error_m = 0.0

    def distance_matrix(self, xy):
        return _euclid(xy)

    def path(self, a, b):
        return [tuple(a), tuple(b)]


class DetourRouter:
    """Every leg bends round an obstacle: 500 m longer than the straight line.

    The path goes through one bend point chosen so the polyline is exactly that long.
    (Still a metric: d(a, c) = e(a, c) + 500 <= d(a, b) + d(b, c).)
    """

    error_m = 0.0
    extra = 500.0

    def distance_matrix(self, xy):
        d = _euclid(xy) + self.extra
        np.fill_diagonal(d, 0.0)
        return d

    def path(self, a, b):
        a, b = np.asarray(a, float), np.asarray(b, float)
        e = float(np.hypot(*(b - a)))
        if e == 0:
            return [tuple(a), tuple(b)]
        h = math.sqrt(((e + self.extra) / 2) ** 2 - (e / 2) ** 2)
        normal = np.array([-(b - a)[1], (b - a)[0]]) / e
        bend = (a + b) / 2 + h * normal
        return [tuple(a), tuple(bend), tuple(b)]


def access_point(name, dx, dy):
    lon, lat = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True).transform(X0 + dx, Y0 + dy)
    return AccessPoint(name, X0 + dx, Y0 + dy, lat, lon)


def make_frame(access=(), router=None):
    return Frame(CRS, "test", None, None, (), 0.0, access=tuple(access), router=router)


def field_day(date, start=(8, 0), end=(16, 0)):
    return FieldDay(
        date,
        dt.datetime(date.year, date.month, date.day, *start, tzinfo=TZ),
        dt.datetime(date.year, date.month, date.day, *end, tzinfo=TZ),
    )


def make_schedule(days_points, *, strata=("A",), start=(8, 0), end=(16, 0), seed=0, reserves=0):
    """One field day per list of (dx, dy) offsets; planned times random in the window
    (as the time module gives them); strata assigned in turn."""
    rng = np.random.default_rng(seed)
    days, visits = [], []
    n = 0
    for i, pts in enumerate(days_points):
        day = field_day(dt.date(2027, 6, 1) + dt.timedelta(days=i), start, end)
        days.append(day)
        width = (day.window_end - day.window_start).total_seconds()
        for dx, dy in pts:
            n += 1
            t = day.window_start + dt.timedelta(seconds=float(rng.uniform(0, width)))
            visits.append(Visit(f"S-{n:03d}", strata[n % len(strata)], "primary", 0, X0 + dx, Y0 + dy,
                                0.0, 0.0, visit_date=day.date, planned_time=t, day_index=i))
    for r in range(reserves):
        visits.append(Visit(f"R-{r:03d}", strata[0], "reserve", r + 1, X0 + 10.0 * r, Y0, 0.0, 0.0))
    return Schedule(tuple(visits), tuple(days))


def random_days(n_days, k, *, seed, spread=3000.0):
    rng = np.random.default_rng(seed)
    return [[tuple(p) for p in rng.uniform(-spread, spread, size=(k, 2))] for _ in range(n_days)]


def by_day(schedule):
    out = {}
    for v in schedule.visits:
        if v.role == "primary":
            out.setdefault(v.day_index, []).append(v)
    return out


def closed_length(dist, order):
    order = list(order)
    return float(sum(dist[a, b] for a, b in zip(order, order[1:] + order[:1])))


ACCESS = (access_point("West launch", -4000, 0), access_point("East ramp", 4000, 500))


def day_tour(out, day_index):
    """The day's round as one sequence of site ids: its trips in time order, with the trips the circle
    moved to the window's opening (noted "Worked first") put back at the end where the round has them."""
    routes = sorted((r for r in out.routes if r.day_index == day_index), key=lambda r: r.start)
    early = [r for r in routes if any(n.startswith("Worked first") for n in r.notes)]
    rest = [r for r in routes if r not in early]
    return tuple(s for r in rest + early for s in r.site_ids), routes


# --------------------------------------------------------------------------- times and order
def test_planned_times_inside_their_windows():
    sched = make_schedule(random_days(5, 6, seed=1))
    out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=11, minutes_on_site=15)
    for v in out.visits:
        day = out.days[v.day_index]
        assert day.window_start <= v.planned_time
        # the sampling itself ends inside the window too
        assert v.planned_time + dt.timedelta(minutes=15) <= day.window_end + dt.timedelta(microseconds=1)
    for r in out.routes:
        day = out.days[r.day_index]
        assert r.start < r.end
        # a trip may leave before the window opens only to take its first sample at its planned time
        # (the part of the round the circle brought to the window's opening; see test_itinerary_times.py)
        if r.start < day.window_start:
            assert any("before the window opens" in n for n in r.notes)


def test_route_order_is_a_permutation_per_day():
    sched = make_schedule(random_days(4, 7, seed=2))
    out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=3)
    for day_index, vs in by_day(out).items():
        assert sorted(v.route_order for v in vs) == list(range(1, len(vs) + 1))
        # route order follows planned time
        assert [v.site_id for v in sorted(vs, key=lambda v: v.route_order)] == \
               [v.site_id for v in sorted(vs, key=lambda v: v.planned_time)]
        routes = [r for r in out.routes if r.day_index == day_index]
        assert sorted(s for r in routes for s in r.site_ids) == sorted(v.site_id for v in vs)


def test_reserves_are_left_unscheduled():
    sched = make_schedule(random_days(1, 4, seed=4), reserves=3)
    out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=1)
    reserves = [v for v in out.visits if v.role == "reserve"]
    assert len(reserves) == 3
    assert all(v.visit_date is None and v.planned_time is None and v.route_order is None for v in reserves)


# --------------------------------------------------------------------------- heuristic quality
def test_route_no_longer_than_the_planned_time_order():
    # Sanity of the heuristic: the random order the time module gave is never beaten the other way.
    sched = make_schedule(random_days(6, 8, seed=5))
    frame = make_frame(ACCESS, EuclidRouter())
    out = build_itinerary(sched, frame, seed=7, holding_h=24)
    access = {a.name: a for a in ACCESS}
    for day_index, vs in by_day(sched).items():
        tour, routes = day_tour(out, day_index)
        a = access[routes[0].access]
        where = {v.site_id: (v.x, v.y) for v in vs}
        vs = sorted(vs, key=lambda v: v.planned_time)
        xy = np.array([[a.x, a.y]] + [[v.x, v.y] for v in vs])
        round_xy = np.array([[a.x, a.y]] + [where[sid] for sid in tour])
        length = closed_length(_euclid(round_xy), range(len(round_xy)))
        assert length <= closed_length(_euclid(xy), range(len(xy))) + 1e-6


def brute_force_optimum(access, sites):
    """Shortest closed tour over every access point and every order (itertools.permutations)."""
    best = math.inf
    for a in access:
        xy = np.array([[a.x, a.y]] + [[X0 + dx, Y0 + dy] for dx, dy in sites])
        d = _euclid(xy)
        perms = np.array(list(itertools.permutations(range(1, len(xy)))))
        legs = d[0, perms[:, 0]] + d[perms[:, -1], 0] + d[perms[:, :-1], perms[:, 1:]].sum(axis=1)
        best = min(best, float(legs.min()))
    return best


def test_route_within_christofides_factor_of_brute_force_optimum():
    # Reference: exhaustive search over itertools.permutations. Stated factor 3/2: the
    # Christofides (1976) bound for metric distances (as the networkx christofides docs
    # state); 2-opt only shortens the tour.
    ratios = []
    for seed in range(12):
        pts = random_days(1, 7, seed=100 + seed)
        sched = make_schedule(pts)
        out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=seed, holding_h=24)
        tour, routes = day_tour(out, 0)
        a = {x.name: x for x in ACCESS}[routes[0].access]
        where = {v.site_id: (v.x, v.y) for v in sched.visits}
        round_xy = np.array([[a.x, a.y]] + [where[sid] for sid in tour])
        length = closed_length(_euclid(round_xy), range(len(round_xy)))
        if len(routes) == 1:
            assert routes[0].length_m == pytest.approx(length)
        opt = brute_force_optimum(ACCESS, pts[0])
        assert length >= opt - 1e-6  # nothing beats the optimum
        ratios.append(length / opt)
    assert max(ratios) <= 1.5
    # On 7 sites 2-opt after Christofides is usually optimal; allow a little slack on average.
    assert float(np.mean(ratios)) <= 1.03


# --------------------------------------------------------------------------- hand-checked arithmetic
def line_schedule(distances, start=(8, 0), end=(16, 0)):
    return make_schedule([[(d, 0.0) for d in distances]], start=start, end=end)


LINE_ACCESS = (access_point("Dock", 0, 0),)


def test_line_example_times_by_hand():
    # Common practice: travel time = distance / speed, plus minutes on site.
    # 15 km/h = 250 m/min, so 4 min per km. Sites 1, 2, 3 km east of the dock, 15 min each.
    # Either direction the tour is 6 km = 24 min of travel; out and back = 24 + 45 = 69 min.
    # Outward (1, 2, 3): arrivals 4, 23, 42 min after leaving.
    # Reverse (3, 2, 1): arrivals 12, 31, 50 min after leaving.
    # Seeds whose round the circle cut at the window's end have two trips (test_itinerary_times.py checks
    # those); the others give the whole round as one trip.
    sched = line_schedule([1000, 2000, 3000])
    seen = set()
    for seed in range(16):
        out = build_itinerary(sched, make_frame(LINE_ACCESS, EuclidRouter()), seed=seed,
                              speed_kmh=15, minutes_on_site=15, holding_h=6, lab_minutes=40)
        # removal savings (of the round, however it is cut): only the far end costs anything
        # (1 + 3 - 2 km = 2 km = 8 min), shared by 3 sites
        assert out.travel_minutes_per_site == pytest.approx({"A": 8.0 / 3.0})
        if len(out.routes) > 1:
            continue
        (route,) = out.routes
        assert route.length_m == pytest.approx(6000.0)
        assert (route.end - route.start) == dt.timedelta(minutes=69)
        times = {v.site_id: (v.planned_time - route.start) / dt.timedelta(minutes=1) for v in out.visits}
        if route.site_ids == ("S-001", "S-002", "S-003"):
            expected = {"S-001": 4, "S-002": 23, "S-003": 42}
        else:
            assert route.site_ids == ("S-003", "S-002", "S-001")
            expected = {"S-003": 12, "S-002": 31, "S-001": 50}
        assert times == pytest.approx(expected)
        seen.add(route.site_ids)
    assert len(seen) == 2  # both directions occur across seeds


def test_holding_time_boundary_by_hand():
    # One site 3 km out: leave, 12 min out, sample at minute 12, 15 min on site, 12 min back
    # at minute 39; + 40 min to the lab = 67 min from collection (common practice arithmetic).
    sched = line_schedule([3000])
    frame = make_frame(LINE_ACCESS, EuclidRouter())
    ok = build_itinerary(sched, frame, seed=1, holding_h=67 / 60, lab_minutes=40)
    assert ok.routes[0].lab_deadline_ok
    late = build_itinerary(sched, frame, seed=1, holding_h=66 / 60, lab_minutes=40)
    assert not late.routes[0].lab_deadline_ok
    assert any("67 min" in w and "holding" in w for w in late.warnings)


def test_direction_falls_back_when_only_the_other_fits():
    # Sites 1, 2 and 6 km east of the dock, 15 km/h (4 min/km), 15 min on site, holding 2 h, lab 40 min
    # (by hand). Reverse (6, 2, 1 km): arrivals 24, 55, 74, back at 93; first sample to lab 93 - 24 + 40 =
    # 109 min: one trip, a round of 93 min. Outward (1, 2, 6 km): one trip would hold its first sample
    # 93 - 4 + 40 = 129 min > 120, so it is split: 1 and 2 km (back at 46), then 6 km (back at 109): a
    # round of 109 min. Window 08:00-09:55 with 15 min on site: starts 08:00..09:40, 101 minutes. Only the
    # reverse round fits, whatever direction is drawn.
    sched = line_schedule([1000, 2000, 6000], start=(8, 0), end=(9, 55))
    for seed in range(6):
        out = build_itinerary(sched, make_frame(LINE_ACCESS, EuclidRouter()), seed=seed, holding_h=2,
                              lab_minutes=40, speed_kmh=15, minutes_on_site=15)
        tour, routes = day_tour(out, 0)
        assert tour == ("S-003", "S-002", "S-001")
    wide = line_schedule([1000, 2000, 6000], start=(8, 0), end=(12, 0))
    tours = {day_tour(build_itinerary(wide, make_frame(LINE_ACCESS, EuclidRouter()), seed=seed, holding_h=2,
                                      lab_minutes=40), 0)[0] for seed in range(12)}
    assert tours == {("S-001", "S-002", "S-003"), ("S-003", "S-002", "S-001")}  # both fit: both drawn


# --------------------------------------------------------------------------- holding time
def trip_holding_minutes(route, visits, lab_minutes):
    first = min(visits[s].planned_time for s in route.site_ids)
    return (route.end - first) / dt.timedelta(minutes=1) + lab_minutes


def test_day_split_into_trips_meeting_the_holding_time():
    # Sites 2-6 km out at 5 km/h: one trip cannot bring the first sample back within 3 h.
    pts = [[(2000.0 * (1 + i % 3), 800.0 * (i - 3)) for i in range(7)]]
    sched = make_schedule(pts, start=(6, 0), end=(20, 0))
    out = build_itinerary(sched, make_frame(LINE_ACCESS, EuclidRouter()), seed=2,
                          speed_kmh=5, holding_h=3, lab_minutes=30)
    visits = {v.site_id: v for v in out.visits}
    assert len(out.routes) >= 2
    for r in out.routes:
        assert r.lab_deadline_ok
        assert trip_holding_minutes(r, visits, 30) <= 180 + 1e-6
    # the trips follow one another from the same access point
    for a, b in zip(out.routes, out.routes[1:]):
        assert a.end <= b.start and a.access == b.access
    assert sorted(v.route_order for v in out.visits) == list(range(1, 8))
    assert any("Trip 1 of" in n for n in out.routes[0].notes)


def test_every_day_meets_the_holding_time_or_is_reported():
    sched = make_schedule(random_days(4, 6, seed=9, spread=6000))
    for lab in (40, 400):  # 400 min to the lab cannot meet 6 h
        out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=5, lab_minutes=lab)
        visits = {v.site_id: v for v in out.visits}
        for r in out.routes:
            held = trip_holding_minutes(r, visits, lab)
            assert r.lab_deadline_ok == (held <= 360 + 1e-6)
            if not r.lab_deadline_ok:
                assert any(str(r.date) in w and "holding time" in w for w in out.warnings)
    assert not any(r.lab_deadline_ok for r in out.routes)


# --------------------------------------------------------------------------- infeasible settings
def test_day_that_cannot_fit_its_window_raises_with_figures():
    # The round takes 69 min, returns included (see the line example); a 08:00-08:40 window with 15 min on
    # site lets sampling start in 26 minutes (08:00..08:25).
    sched = line_schedule([1000, 2000, 3000], start=(8, 0), end=(8, 40))
    with pytest.raises(InfeasibleError) as err:
        build_itinerary(sched, make_frame(LINE_ACCESS, EuclidRouter()), seed=1)
    msg = str(err.value)
    assert "2027-06-01" in msg and "69 min" in msg and "26 min" in msg and "time.per_day" in msg


def test_max_day_minutes():
    sched = line_schedule([1000, 2000, 3000])
    frame = make_frame(LINE_ACCESS, EuclidRouter())
    build_itinerary(sched, frame, seed=1, max_day_minutes=69)
    with pytest.raises(InfeasibleError, match="69 min"):
        build_itinerary(sched, frame, seed=1, max_day_minutes=68)


@pytest.mark.parametrize("key,value", [("speed_kmh", 0), ("minutes_on_site", -1), ("holding_h", 0),
                                       ("lab_minutes", float("nan"))])
def test_bad_settings_name_the_setting(key, value):
    with pytest.raises(SettingError, match=f"time.{key}"):
        build_itinerary(line_schedule([1000]), make_frame(LINE_ACCESS), seed=1, **{key: value})


# --------------------------------------------------------------------------- routers and coordinates
def test_detour_router_lengths_use_the_router_distances():
    pts = random_days(2, 5, seed=12)
    sched = make_schedule(pts)
    router = DetourRouter()
    out = build_itinerary(sched, make_frame(ACCESS, router), seed=4, holding_h=24)
    access = {a.name: a for a in ACCESS}
    xy_of = {v.site_id: (v.x, v.y) for v in out.visits}
    for r in out.routes:
        a = access[r.access]
        xy = np.array([[a.x, a.y]] + [xy_of[s] for s in r.site_ids])
        expected = closed_length(router.distance_matrix(xy), range(len(xy)))
        straight = closed_length(_euclid(xy), range(len(xy)))
        assert r.length_m == pytest.approx(expected)
        assert r.length_m == pytest.approx(straight + 500.0 * len(xy))
        # the drawn path is the router's (bent) path, as long as its distances
        path = np.array(r.coords_xy)
        assert np.hypot(*np.diff(path, axis=0).T).sum() == pytest.approx(expected)
        assert len(r.coords_xy) == 2 * len(xy) + 1
    assert STRAIGHT_LINE_WARNING not in out.warnings


def test_lonlat_coordinates_match_pyproj():
    out = build_itinerary(make_schedule(random_days(1, 4, seed=13)), make_frame(ACCESS, EuclidRouter()), seed=1)
    r = out.routes[0]
    # Reference: pyproj's own transformation of the path, UTM 15N -> WGS 84
    t = pyproj.Transformer.from_crs("EPSG:32615", "EPSG:4326", always_xy=True)
    for (x, y), (lon, lat) in zip(r.coords_xy, r.coords_lonlat):
        elon, elat = t.transform(x, y)
        assert (lon, lat) == pytest.approx((elon, elat), abs=1e-9)
    assert -93.1 < r.coords_lonlat[0][0] < -92.9 and 41.0 < r.coords_lonlat[0][1] < 42.0


def test_without_router_or_access_routes_start_at_the_first_site():
    sched = make_schedule(random_days(2, 5, seed=14))
    out = build_itinerary(sched, make_frame(), seed=6)
    assert STRAIGHT_LINE_WARNING in out.warnings
    assert any("no access points" in w for w in out.warnings)
    for day_index, vs in by_day(sched).items():
        first = min(vs, key=lambda v: v.planned_time)  # the first site the time module gave
        routes = [r for r in out.routes if r.day_index == day_index]
        # the trip that samples it starts there; a part of the round the circle moved to the window's
        # opening starts and ends at the same place without sampling it
        (r,) = [r for r in routes if first.site_id in r.site_ids]
        assert r.access == "" and r.site_ids[0] == first.site_id
        for q in routes:
            assert q.coords_xy[0] == q.coords_xy[-1] == (first.x, first.y)
        if len(routes) == 1:
            assert len(r.coords_xy) == len(vs) + 1  # straight lines: one vertex per site, closed
            xy = np.array([xy for xy in r.coords_xy[:-1]])
            assert r.length_m == pytest.approx(closed_length(_euclid(xy), range(len(xy))))
        new = {v.site_id: v for v in out.visits}
        assert new[first.site_id].planned_time == r.start  # sampled on setting out


# --------------------------------------------------------------------------- randomness
def test_same_seed_same_itinerary_other_seed_can_reverse():
    sched = make_schedule(random_days(3, 6, seed=15))
    frame = make_frame(ACCESS, EuclidRouter())
    a = build_itinerary(sched, frame, seed=21)
    b = build_itinerary(sched, frame, seed=21)
    assert a == b
    orders = set()
    for seed in range(10):
        orders.add(day_tour(build_itinerary(sched, frame, seed=seed), 0)[0])
    assert len(orders) == 2  # the same tour, travelled both ways
    s1, s2 = orders
    assert s1 == s2[::-1]


# --------------------------------------------------------------------------- summaries
def test_time_of_day_summary_by_hand():
    day = field_day(dt.date(2027, 6, 1))
    times = [(7, 30), (9, 0), (13, 45)]
    visits = [Visit(f"N-{i}", "North", "primary", 0, 0, 0, 0, 0, day.date,
                    dt.datetime(2027, 6, 1, h, m, tzinfo=TZ), 0) for i, (h, m) in enumerate(times)]
    s = time_of_day_summary(visits)["North"]
    # by hand: 7.5, 9.0, 13.75 local hours; two of three before 10:00
    assert s["earliest_h"] == 7.5 and s["median_h"] == 9.0 and s["latest_h"] == 13.75
    assert s["share_before_10"] == pytest.approx(2 / 3)


def test_time_of_day_and_travel_cost_per_stratum():
    sched = make_schedule(random_days(3, 6, seed=16), strata=("North", "South"))
    out = build_itinerary(sched, make_frame(ACCESS, EuclidRouter()), seed=2)
    assert set(out.time_of_day) == {"North", "South"}
    assert set(out.travel_minutes_per_site) == {"North", "South"}
    assert all(c >= 0 for c in out.travel_minutes_per_site.values())


# --------------------------------------------------------------------------- properties
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=30, deadline=None)
@given(
    k=st.integers(1, 8),
    data_seed=st.integers(0, 10_000),
    seed=st.integers(0, 2**32),
    holding_h=st.sampled_from([1.0, 2.0, 6.0]),
    with_access=st.booleans(),
)
def test_any_day_fits_its_window_and_orders_all_sites(k, data_seed, seed, holding_h, with_access):
    # Properties (common practice for a schedule): all times inside the window,
    # route order 1..k, holding flag consistent with the figures.
    sched = make_schedule(random_days(1, k, seed=data_seed, spread=2500), start=(6, 0), end=(20, 0))
    frame = make_frame(ACCESS if with_access else (), EuclidRouter())
    out = build_itinerary(sched, frame, seed=seed, holding_h=holding_h, lab_minutes=30)
    day = out.days[0]
    visits = {v.site_id: v for v in out.visits}
    assert all(day.window_start <= v.planned_time <= day.window_end for v in out.visits)
    assert sorted(v.route_order for v in out.visits) == list(range(1, k + 1))
    for r in out.routes:
        assert r.lab_deadline_ok == (trip_holding_minutes(r, visits, 30) <= 60 * holding_h + 1e-6)


def test_a_day_on_two_separate_lakes_is_worked_lake_by_lake():
    # Two invented ponds 3 km apart, a launch on each: no launch reaches both over water, so the
    # day is planned as two parts, each from its own launch, one after the other in the window.
    import geopandas
    import shapely

    from geosample.geometry import build_frame

    x0, y0 = 610000.0, 5100000.0
    ponds = [shapely.box(x0, y0, x0 + 800, y0 + 800), shapely.box(x0 + 3800, y0, x0 + 4600, y0 + 800)]
    water = geopandas.GeoDataFrame({"name": ["Lintel Pond", "Fennick Pond"]}, geometry=ponds, crs=32614)
    launches = geopandas.GeoDataFrame({"name": ["West launch", "East launch"]},
                                      geometry=[shapely.Point(x0 + 5, y0 + 400), shapely.Point(x0 + 4595, y0 + 400)],
                                      crs=32614)
    frame = build_frame(water, access=launches, reach_m=5000)
    tz = ZoneInfo("America/Chicago")
    day = FieldDay(dt.date(2027, 6, 1), dt.datetime(2027, 6, 1, 7, 0, tzinfo=tz),
                   dt.datetime(2027, 6, 1, 17, 0, tzinfo=tz))
    xy = [(x0 + 200, y0 + 200), (x0 + 600, y0 + 600), (x0 + 4000, y0 + 300), (x0 + 4400, y0 + 500)]
    visits = tuple(Visit(f"S-00{i}", "A", "primary", 0, x, y, 0.0, 0.0, visit_date=day.date, day_index=0)
                   for i, (x, y) in enumerate(xy, start=1))
    out = build_itinerary(Schedule(visits, (day,)), frame, seed=3)
    assert sorted(r.access for r in out.routes) == ["East launch", "West launch"]
    by_access = {r.access: r for r in out.routes}
    assert set(by_access["West launch"].site_ids) == {"S-001", "S-002"}
    assert set(by_access["East launch"].site_ids) == {"S-003", "S-004"}
    first, second = sorted(out.routes, key=lambda r: r.start)
    times = {v.site_id: v.planned_time for v in out.visits}
    # one crew: the first part's sampling ends before the second part's begins
    assert max(times[s] for s in first.site_ids) < min(times[s] for s in second.site_ids)
    for v in out.visits:
        assert day.window_start <= v.planned_time <= day.window_end
    assert sorted(v.route_order for v in out.visits) == [1, 2, 3, 4]
    assert any("separate water bodies" in w for w in out.warnings)
