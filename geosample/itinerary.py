"""Field days become crew trips over water: routes, planned times, holding-time checks.

:func:`build_itinerary` takes the :class:`~geosample.model.Schedule` made by
``randomizer.time.schedule_visits`` (every primary visit has a field day) and the
:class:`~geosample.model.Frame`, and returns a new Schedule in which each field
day's primary visits are put in route order, given planned times that follow
from the travel speed and the minutes spent on each site, and joined into
routes that leave from an access point and come back to it.

The model, in brief (``docs/methods.md``, "Day routes and holding time"):

- **Access point.** Of the frame's access points (the 12 with the smallest
  summed over-water distance to the day's sites, when there are more), the one
  whose closed route through the day's sites is shortest.
- **Order.** A closed tour from the access point through the sites: Christofides'
  heuristic (``networkx``), improved by 2-opt exchanges until none shortens it.
  The direction of travel is drawn at random (the other direction is taken
  only when the drawn one does not fit: with splits for the holding time the
  two directions can differ).
- **Times.** Travel takes ``distance / speed``, rounded up to whole minutes per
  leg; each site takes ``minutes_on_site`` (rounded up to a whole minute). A
  visit's planned time is the arrival at the site (the start of the sampling).
  The day's trips, returns included, are timed as one round from minute 0;
  the round starts at a minute ``u`` drawn uniformly among the ``L`` whole
  minutes at which sampling may start, taken as a circle: a visit ``o`` minutes
  into the round is planned ``(u + o) mod L`` minutes after the first start.
  The part of the round that comes round past the end is worked first, as a
  trip of its own from the depot (its crew may leave before the window opens,
  so that its first sample is taken at its planned time). So every planned time
  is uniform over the window (``TIME_DRAW``). All arithmetic is in UTC, so a
  window across a daylight-saving change has its real length and every planned
  time exists.
- **Holding time.** The oldest sample of a trip is its first one; it must reach
  the lab within ``holding_h``: (return to the access point - first planned
  time) + ``lab_minutes`` <= ``holding_h`` * 60. A day that cannot meet it is
  split into consecutive trips along the same tour, each returning to the
  access point, where a courier takes the samples to the lab and the crew sets
  out again at once. A single site too far to meet it is reported with the figures.
- **A day that does not fit its window** (its round, returns included, longer
  than ``L``) cannot be fixed by more trips of the same crew (each extra return
  only adds travel), so it raises :class:`~geosample.errors.InfeasibleError`
  with the figures.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import logging
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .errors import InfeasibleError, SettingError
from .model import AccessPoint, FieldDay, Frame, Route, Schedule, Visit
from .rng import stream

__all__ = [
    "build_itinerary",
    "closed_tour",
    "tour_length",
    "two_opt",
    "STRAIGHT_LINE_WARNING",
    "MAX_ACCESS_CANDIDATES",
]

log = logging.getLogger(__name__)

STRAIGHT_LINE_WARNING = "Over-water distances were not available; routes use straight lines"
MAX_ACCESS_CANDIDATES = 12


# --------------------------------------------------------------------------- tours
def tour_length(dist: np.ndarray, tour: Sequence[int]) -> float:
    """Length of the closed tour ``tour`` (back to its first node) under ``dist``.

    Examples
    --------
    >>> d = np.array([[0, 1, 2], [1, 0, 1], [2, 1, 0]], dtype=float)
    >>> tour_length(d, [0, 1, 2])
    4.0
    """
    t = np.asarray(tour, dtype=int)
    if t.size < 2:
        return 0.0
    return float(dist[t, np.roll(t, -1)].sum())


def two_opt(dist: np.ndarray, tour: Sequence[int]) -> tuple[int, ...]:
    """Improve a closed tour by 2-opt exchanges until no exchange shortens it.

    The first node stays first. Each exchange reverses the segment ``tour[i..j]``
    when ``d(a, b) + d(c, e) > d(a, c) + d(b, e)`` for the edges ``(a, b)`` and
    ``(c, e)`` around it (first improvement, scanned in a fixed order, so the
    result depends only on the input).

    Parameters
    ----------
    dist : (n, n) ndarray
        Distances; need not be symmetric in principle, but the gain is computed
        as if it were (reversing a segment keeps its inner edges' lengths).
    tour : sequence of int
        A permutation of ``range(n)``.

    Returns
    -------
    tuple of int
    """
    t = list(tour)
    n = len(t)
    if n < 4:
        return tuple(t)
    improved = True
    while improved:
        improved = False
        for i in range(1, n - 1):
            for j in range(i + 1, n):
                a, b = t[i - 1], t[i]
                c, e = t[j], t[(j + 1) % n]
                if a == c or b == e:
                    continue
                gain = dist[a, b] + dist[c, e] - dist[a, c] - dist[b, e]
                if gain > 1e-9 * (1.0 + abs(dist[a, b]) + abs(dist[c, e])):
                    t[i : j + 1] = t[i : j + 1][::-1]
                    improved = True
    return tuple(t)


def closed_tour(dist: np.ndarray) -> tuple[int, ...]:
    """A short closed tour through every node, starting at node 0.

    Christofides' heuristic (``networkx.algorithms.approximation.christofides``;
    at most 3/2 times the optimum when ``dist`` is a metric, Christofides 1976),
    then :func:`two_opt`. The tour is returned without repeating node 0 at the end.

    Parameters
    ----------
    dist : (n, n) ndarray
        Symmetric, finite, zero diagonal.

    Returns
    -------
    tuple of int
        A permutation of ``range(n)`` with 0 first.

    Examples
    --------
    >>> xy = np.array([[0, 0], [0, 1], [1, 1], [1, 0]], dtype=float)
    >>> d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    >>> tour_length(d, closed_tour(d))
    4.0
    """
    n = dist.shape[0]
    if n <= 3:
        return tuple(range(n))
    import networkx as nx
    from networkx.algorithms.approximation import christofides

    graph = nx.Graph()
    graph.add_nodes_from(range(n))
    # Built edge by edge: nx.from_numpy_array would drop zero-length edges.
    graph.add_weighted_edges_from(
        (i, j, float(dist[i, j])) for i in range(n) for j in range(i + 1, n)
    )
    cycle = christofides(graph, weight="weight")[:-1]
    k = cycle.index(0)
    start = cycle[k:] + cycle[:k]
    return two_opt(dist, start)


# --------------------------------------------------------------------------- distances
class _MatrixLegs:
    """Legs from a router that offers only ``distance_matrix`` and ``path`` (the pinned minimal interface)."""

    def __init__(self, router: Any, xy: np.ndarray):
        self.points = xy
        self.dist = np.asarray(router.distance_matrix(xy), dtype=float)
        self._router = router

    def path(self, i: int, j: int) -> list[tuple[float, float]]:
        return list(self._router.path(tuple(map(float, self.points[i])), tuple(map(float, self.points[j]))))


def _legs(router: Any, xy: np.ndarray) -> Any:
    """Every leg among the points ``xy``: over water from one router search, or straight lines."""
    from .router import StraightLegs

    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    if router is None:
        return StraightLegs(xy)
    legs = router.legs(xy) if hasattr(router, "legs") else _MatrixLegs(router, xy)
    if legs.dist.shape != (len(xy), len(xy)):
        raise ValueError(f"the router's distance matrix has shape {legs.dist.shape}, expected {(len(xy),) * 2}")
    return legs


def _path(legs: Any, idx: Sequence[int], nodes: Sequence[int]) -> tuple[tuple[float, float], ...]:
    """The polyline through ``nodes`` (rows of a day's matrix; ``idx`` maps them to ``legs``), leg by leg."""
    first = legs.points[idx[nodes[0]]]
    out: list[tuple[float, float]] = [(float(first[0]), float(first[1]))]
    for a, b in zip(nodes[:-1], nodes[1:]):
        seg = legs.path(idx[a], idx[b])
        out.extend((float(p[0]), float(p[1])) for p in seg[1:])
    return tuple(out)


# --------------------------------------------------------------------------- trips
@dataclass(frozen=True)
class _Trip:
    """One trip of a day: sites in order, with times in minutes from the day's start."""

    nodes: tuple[int, ...]  # matrix indices of the sites sampled, in order
    leave: float  # minutes from the day's first departure
    arrive: tuple[float, ...]  # planned time (arrival) at each node
    back: float  # return at the depot
    length_m: float
    holding_min: float  # first sample to lab
    samples_depot: bool = False  # the depot is a site sampled at the start
    early: bool = False  # the part of the tour past the circle's end, worked from the window's opening


def _leg_minutes(metres: float, m_per_min: float) -> float:
    """Travel minutes for one leg, rounded up to a whole minute: a crew plans and reads whole minutes,
    and rounding up keeps every planned time reachable."""
    return float(math.ceil(metres / m_per_min - 1e-9)) if metres > 0 else 0.0


def _time_trip(
    dist: np.ndarray, nodes: Sequence[int], leave: float, m_per_min: float, on_site: float,
    lab_minutes: float, *, samples_depot: bool = False,
) -> _Trip:
    """Times along one trip from the depot (node 0) through ``nodes`` and back.

    When ``samples_depot`` the depot is itself a site, sampled first on leaving.
    """
    t = leave
    pos = 0
    arrive: list[float] = []
    length = 0.0
    visited = ((0,) if samples_depot else ()) + tuple(nodes)
    for n in visited:
        t += _leg_minutes(dist[pos, n], m_per_min)
        length += dist[pos, n]
        arrive.append(t)
        t += on_site
        pos = n
    length += dist[pos, 0]
    back = t + _leg_minutes(dist[pos, 0], m_per_min)
    holding = back - arrive[0] + lab_minutes if arrive else 0.0
    return _Trip(visited, leave, tuple(arrive), back, float(length), holding, samples_depot)


def _split_for_holding(
    dist: np.ndarray, order: Sequence[int], m_per_min: float, on_site: float,
    lab_minutes: float, limit_min: float, *, samples_depot: bool,
) -> list[tuple[tuple[int, ...], bool]]:
    """Cut the tour ``order`` (without the depot) into consecutive trips meeting the holding time.

    Greedy: each trip takes as many of the next sites as still meet it (with a
    metric, adding a site never shortens a trip, so this gives the fewest trips
    along this tour). Returns ``(nodes, first_trip)`` pairs.
    """

    def holding(nodes: tuple[int, ...], first: bool) -> float:
        return _time_trip(dist, nodes, 0.0, m_per_min, on_site, lab_minutes,
                          samples_depot=samples_depot and first).holding_min

    trips: list[tuple[int, ...]] = []
    current: tuple[int, ...] = ()
    for node in order:
        first = not trips
        if not current and not (samples_depot and first):
            current = (node,)
            continue
        if holding(current + (node,), first) <= limit_min + 1e-9:
            current = current + (node,)
        else:
            trips.append(current)
            current = (node,)
    if current or not trips:
        trips.append(current)
    return [(nodes, i == 0) for i, nodes in enumerate(trips)]


# --------------------------------------------------------------------------- one day
@dataclass(frozen=True)
class _DayPlan:
    day_index: int
    access: AccessPoint | None
    xy: np.ndarray  # depot first, then the sites (or the sites, first one the depot)
    site_ids: tuple[str, ...]  # per matrix row; "" for an access depot
    dist: np.ndarray
    trips: tuple[_Trip, ...]
    start: dt.datetime
    candidates: int
    legs: Any = None  # the day's legs (one router search); ``dist`` is ``legs.dist`` at rows ``idx``
    idx: tuple[int, ...] = ()


def _depot_first(day_visits: Sequence[Visit]) -> list[Visit]:
    """The day's visits with the one the time module put first at the front."""
    def key(v: Visit) -> tuple:
        t = v.planned_time
        return (0, t.timestamp(), v.site_id) if t is not None else (1, 0.0, v.site_id)

    first = min(day_visits, key=key)
    return [first] + [v for v in day_visits if v is not first]


def _choose_access(
    access: Sequence[AccessPoint], full: np.ndarray, sites: Sequence[int]
) -> tuple[int, np.ndarray, tuple[int, ...], int]:
    """The access point with the shortest closed tour over ``sites``; its index, matrix and tour.

    ``full`` holds the distances among the access points (rows 0..m-1) and the day's sites after them;
    ``sites`` are the rows of this part's sites.
    """
    m = len(access)
    k = len(sites)
    full = full[np.ix_(np.r_[np.arange(m), sites], np.r_[np.arange(m), sites])]
    to_sites = full[:m, m:]
    reachable = np.all(np.isfinite(to_sites), axis=1)
    if not reachable.any():
        raise InfeasibleError(
            f"no access point reaches all {k} sites of this field day over water "
            f"(access points tried: {', '.join(a.name for a in access)}). "
            "Check area.access and area.reach_m, or remove the unreachable water from the frame."
        )
    score = np.where(reachable, to_sites.sum(axis=1), np.inf)
    cand = [int(i) for i in np.argsort(score, kind="stable")[: min(MAX_ACCESS_CANDIDATES, int(reachable.sum()))]]
    best: tuple[float, int, np.ndarray, tuple[int, ...]] | None = None
    for i in sorted(cand):
        idx = np.r_[i, m + np.arange(k)]
        d = full[np.ix_(idx, idx)]
        tour = closed_tour(d)
        length = tour_length(d, tour)
        if best is None or length < best[0] - 1e-9:
            best = (length, i, d, tour)
    assert best is not None
    _, i, d, tour = best
    return i, d, tour, len(cand)


def _plan_day(
    day_index: int, day: FieldDay, day_visits: Sequence[Visit], frame: Frame, *,
    m_per_min: float, on_site: float, lab_minutes: float, limit_min: float,
    reverse: bool, circle: float, max_day_minutes: float | None,
    legs: Any = None, rows: Sequence[int] = (),
) -> _DayPlan:
    """The route and trips of one (part of a) day, timed from minute 0 (placed in the window by
    :func:`_place_day`). With access points, ``legs`` holds the day's legs among the access
    points and all the day's sites (in that order) and ``rows`` the rows of this part's sites."""
    if frame.access:
        m = len(frame.access)
        sites = [m + r for r in rows]
        i, dist, tour, ncand = _choose_access(frame.access, legs.dist, sites)
        acc = frame.access[i]
        idx = (i, *sites)
        xy = legs.points[list(idx)]
        ids = ("",) + tuple(v.site_id for v in day_visits)
        samples_depot = False
    else:
        ordered = _depot_first(day_visits)
        xy = np.array([[v.x, v.y] for v in ordered], dtype=float)
        legs = _legs(frame.router, xy)
        idx = tuple(range(len(xy)))
        dist = legs.dist
        if not np.all(np.isfinite(dist)):
            raise InfeasibleError(
                f"on {day.date} some of the day's sites cannot be reached from one another over water; "
                "give area.access points, or remove the unreachable water from the frame."
            )
        tour = closed_tour(dist)
        ids = tuple(v.site_id for v in ordered)
        acc, ncand, samples_depot = None, 0, True
    forward = list(tour[1:])
    first_try = forward[::-1] if reverse else forward
    options = [first_try, first_try[::-1]]
    timed = [_time_day(dist, o, m_per_min, on_site, lab_minutes, limit_min, samples_depot) for o in options]
    fits = [tr[-1].back <= circle + 1e-9 for tr in timed]
    # The random direction is kept unless only the other one fits the circle (a day's trips, returns
    # included, must fit in it; with splits for the holding time the two directions can differ).
    # When neither fits, the figures reported (by _place_day) are the shorter one's.
    if fits[0]:
        trips = timed[0]
    elif fits[1]:
        trips = timed[1]
    else:
        trips = min(timed, key=lambda tr: tr[-1].back)
    total = trips[-1].back
    if max_day_minutes is not None and total > max_day_minutes + 1e-9:
        raise InfeasibleError(
            f"field day {day.date}: the crew's day from leaving to the last return takes "
            f"{total:.0f} min ({len(trips)} trip(s)), over max_day_minutes = {max_day_minutes:g}. "
            "Lower time.per_day, or allow a longer crew day."
        )
    return _DayPlan(day_index, acc, xy, ids, dist, tuple(trips), day.window_start, ncand, legs, idx)


# --------------------------------------------------------------------------- the day on the circle
TIME_DRAW = (
    "Each field day's route is timed from one start drawn uniformly among the whole minutes at which "
    "sampling may start (from the window's opening to its end less the time on site), with that span "
    "taken as a circle: the part of the route that would run past its end is worked first, from the "
    "window's opening, as a trip of its own. So every visit's planned time is uniformly distributed over "
    "the day's window, whatever its place on the route."
)


def _epoch_minute(t: dt.datetime | float, *, up: bool) -> int:
    s = (t.timestamp() if isinstance(t, dt.datetime) else float(t)) / 60.0
    return math.ceil(s - 1e-9) if up else math.floor(s + 1e-9)


def _later(t: dt.datetime, minutes: float) -> dt.datetime:
    """``minutes`` of real time after ``t``, in ``t``'s zone (added in UTC: right across a clock change)."""
    return (t.astimezone(dt.timezone.utc) + dt.timedelta(minutes=minutes)).astimezone(t.tzinfo)


def _circle(day: FieldDay, on_site: float) -> tuple[int, int]:
    """The day's whole-minute sampling starts: the first (minutes since 1970-01-01 UTC) and how many.

    Starts run from the first whole minute of the window to the last whole minute that leaves
    ``on_site`` minutes before the window closes, in real elapsed time.
    """
    lo = _epoch_minute(day.window_start, up=True)
    hi = _epoch_minute(day.window_end.timestamp() - 60.0 * on_site, up=False)
    return lo, hi - lo + 1


def _wrap(trip: _Trip, shift: float, length: int, dist: np.ndarray, m_per_min: float, on_site: float,
          lab_minutes: float) -> list[_Trip]:
    """``trip`` moved ``shift`` minutes later on a circle of ``length`` minutes.

    Visits whose time reaches ``length`` go round to the start: they become a trip of their own
    (from the depot, the same legs after the first) ``length`` minutes earlier, and the trip's
    first part returns to the depot from its last visit before the cut.
    """
    cut = next((j for j, a in enumerate(trip.arrive) if shift + a >= length - 1e-9), len(trip.arrive))
    nodes = trip.nodes[1:] if trip.samples_depot else trip.nodes
    lead = 1 if trip.samples_depot else 0
    if cut == len(trip.arrive):
        return [dataclasses.replace(trip, leave=trip.leave + shift, arrive=tuple(a + shift for a in trip.arrive),
                                    back=trip.back + shift)]
    if cut == 0:
        return [dataclasses.replace(trip, leave=trip.leave + shift - length,
                                    arrive=tuple(a + shift - length for a in trip.arrive),
                                    back=trip.back + shift - length, early=True)]
    head = _time_trip(dist, nodes[: cut - lead], trip.leave + shift, m_per_min, on_site, lab_minutes,
                      samples_depot=trip.samples_depot)
    first = trip.nodes[cut]
    leave = trip.arrive[cut] + shift - length - _leg_minutes(dist[0, first], m_per_min)
    tail = _time_trip(dist, trip.nodes[cut:], leave, m_per_min, on_site, lab_minutes)
    return [dataclasses.replace(tail, early=True), head]


def _place_day(day: FieldDay, plans: Sequence[_DayPlan], lo: int, length: int, u: int, *, m_per_min: float,
               on_site: float, lab_minutes: float, n_visits: int) -> list[tuple[_DayPlan, _Trip]]:
    """The day's trips placed in its window: one start ``u`` on the circle of ``length`` start minutes.

    The parts (one per water body) follow one another with the slack spread evenly after each;
    a visit at ``o`` minutes into that sequence is planned ``(u + o) mod length`` minutes after the
    window's first start ``lo``. For a fixed sequence and ``u`` uniform on 0..length-1 that is
    uniform on 0..length-1 for every visit. Returns (plan, trip) pairs in time order; each plan's
    ``start`` is the first start minute and trip times count from it.
    """
    total = sum(p.trips[-1].back for p in plans)
    if total > length + 1e-9:
        km = sum(tr.length_m for p in plans for tr in p.trips) / 1000.0
        window = (day.window_end.timestamp() - day.window_start.timestamp()) / 60.0
        where = "the access point" if plans[0].access else "the first site"
        raise InfeasibleError(
            f"field day {day.date}: {n_visits} visits need {total:.0f} min from leaving {where} to the "
            f"last return ({km:.1f} km at time.speed_kmh = {m_per_min * 60 / 1000:g}, {on_site:g} min on "
            f"each site, {sum(len(p.trips) for p in plans)} trip(s)), but sampling may start only in "
            f"{length} min of the window {day.window_start:%H:%M}-{day.window_end:%H:%M} "
            f"({window:.0f} min less {on_site:g} min on site). For planned times spread evenly over the "
            "window the whole round must fit in it. Lower time.per_day, widen time.window, or raise "
            "time.speed_kmh."
        )
    gap = math.floor((length - total) / len(plans) + 1e-9)
    start = dt.datetime.fromtimestamp(lo * 60, tz=dt.timezone.utc).astimezone(day.window_start.tzinfo)
    out: list[tuple[_DayPlan, _Trip]] = []
    offset = 0.0
    for plan in plans:
        placed = [piece for trip in plan.trips
                  for piece in _wrap(trip, u + offset, length, plan.dist, m_per_min, on_site, lab_minutes)]
        placed.sort(key=lambda tr: tr.leave)
        new = dataclasses.replace(plan, trips=tuple(placed), start=start)
        out.extend((new, tr) for tr in placed)
        offset += plan.trips[-1].back + gap
    out.sort(key=lambda pt: pt[1].leave)
    return out


def _time_day(
    dist: np.ndarray, order: Sequence[int], m_per_min: float, on_site: float,
    lab_minutes: float, limit_min: float, samples_depot: bool,
) -> tuple[_Trip, ...]:
    """The day's trips along ``order``, one after the other from minute 0."""
    pieces = _split_for_holding(dist, order, m_per_min, on_site, lab_minutes, limit_min,
                                samples_depot=samples_depot)
    trips: list[_Trip] = []
    t = 0.0
    for nodes, first in pieces:
        trip = _time_trip(dist, nodes, t, m_per_min, on_site, lab_minutes,
                          samples_depot=samples_depot and first)
        trips.append(trip)
        t = trip.back
    return tuple(trips)


# --------------------------------------------------------------------------- summaries
def marginal_minutes(dist: np.ndarray, trip_nodes: Sequence[int], m_per_min: float) -> list[float]:
    """Travel minutes the trip saves if each of its sites were left out.

    For a site ``s`` between ``p`` and ``q`` on a closed trip from the depot
    (node 0): ``(d(p, s) + d(s, q) - d(p, q)) / speed``. A lone site costs the
    whole round trip. This is the marginal travel cost of a sample.
    """
    seq = [0] + [n for n in trip_nodes if n != 0] + [0]
    out = []
    for i in range(1, len(seq) - 1):
        p, s, q = seq[i - 1], seq[i], seq[i + 1]
        out.append(float(dist[p, s] + dist[s, q] - dist[p, q]) / m_per_min)
    return out


def _time_of_day(schedule: Schedule) -> dict[str, dict[str, float]]:
    """Per-stratum spread of the routed planned times (the time module's summary)."""
    from .randomizer.time import time_of_day_summary

    return dict(time_of_day_summary(schedule.visits))


# --------------------------------------------------------------------------- checks
def _check(setting: str, value: Any, ok: bool, accepted: str, fix: str) -> None:
    if not ok:
        raise SettingError(setting, value, accepted, fix=fix)


def _is_number(x: Any) -> bool:
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, bool) and math.isfinite(x)


def _validate(speed_kmh, minutes_on_site, holding_h, lab_minutes, max_day_minutes) -> None:
    _check("time.speed_kmh", speed_kmh, _is_number(speed_kmh) and speed_kmh > 0,
           "a travel speed in km/h greater than 0", "write e.g. speed_kmh = 15")
    _check("time.minutes_on_site", minutes_on_site, _is_number(minutes_on_site) and minutes_on_site >= 0,
           "minutes spent at each site, 0 or more", "write e.g. minutes_on_site = 15")
    _check("time.holding_h", holding_h, _is_number(holding_h) and holding_h > 0,
           "hours from collection to lab delivery, greater than 0", "write e.g. holding_h = 6")
    _check("time.lab_minutes", lab_minutes, _is_number(lab_minutes) and lab_minutes >= 0,
           "minutes from the access point to the lab, 0 or more", "write e.g. lab_minutes = 40")
    if max_day_minutes is not None:
        _check("max_day_minutes", max_day_minutes, _is_number(max_day_minutes) and max_day_minutes > 0,
               "the longest crew day in minutes, greater than 0, or None", "leave it out for no limit")


# --------------------------------------------------------------------------- main
def build_itinerary(
    schedule: Schedule,
    frame: Frame,
    *,
    speed_kmh: float = 15,
    minutes_on_site: float = 15,
    holding_h: float = 6,
    lab_minutes: float = 40,
    seed: int | np.random.SeedSequence,
    max_day_minutes: float | None = None,
) -> Schedule:
    """Routes, route order and planned times for every field day of ``schedule``.

    Parameters
    ----------
    schedule : Schedule
        From ``randomizer.time.schedule_visits``: primary visits carry
        ``visit_date`` and ``day_index``; reserves have no date and are kept as they are.
    frame : Frame
        ``frame.access`` (may be empty) and ``frame.router`` (may be None: straight lines).
    speed_kmh : float
        Travel speed over water.
    minutes_on_site : float
        Time at each site (the planned time is the arrival, when sampling starts).
    holding_h : float
        Hours allowed from collection to lab delivery.
    lab_minutes : float
        Minutes from the access point to the lab.
    seed : int or SeedSequence
        The design's root seed; the stream ``"itinerary"`` draws, for each field day
        in order, the direction of travel and the leaving time.
    max_day_minutes : float, optional
        Longest crew day (first departure to last return); None for no limit.

    Returns
    -------
    Schedule
        A copy with primaries' ``planned_time`` and ``route_order`` (1..k per day)
        set, one :class:`~geosample.model.Route` per trip, ``travel_minutes_per_site``
        (per stratum: the mean marginal travel minutes of its sites), ``time_of_day``
        recomputed and ``warnings`` extended.

    Raises
    ------
    SettingError
        A speed, time or holding value out of range.
    InfeasibleError
        A field day's visits do not fit its window (or ``max_day_minutes``), or no
        access point reaches the day's sites; the message gives the figures.

    Examples
    --------
    >>> import datetime as dt, pyproj
    >>> from zoneinfo import ZoneInfo
    >>> from geosample.model import FieldDay, Frame, Schedule, Visit
    >>> tz = ZoneInfo("America/Chicago")
    >>> day = FieldDay(dt.date(2027, 6, 1), dt.datetime(2027, 6, 1, 8, tzinfo=tz),
    ...                dt.datetime(2027, 6, 1, 16, tzinfo=tz))
    >>> vs = tuple(Visit(f"A-00{i}", "A", "primary", 0, 500000.0 + 1000 * i, 4500000.0, 0, 0,
    ...                  visit_date=day.date, day_index=0) for i in (1, 2))
    >>> frame = Frame(pyproj.CRS("EPSG:32615"), "", None, None, (), 0.0)
    >>> out = build_itinerary(Schedule(vs, (day,)), frame, seed=1)
    >>> [round(r.length_m) for r in out.routes]
    [2000]
    """
    _validate(speed_kmh, minutes_on_site, holding_h, lab_minutes, max_day_minutes)
    m_per_min = speed_kmh * 1000.0 / 60.0
    limit_min = holding_h * 60.0
    rng = stream(seed, "itinerary")

    by_day: dict[int, list[Visit]] = {}
    for v in schedule.visits:
        if v.role == "primary" and v.day_index is not None:
            by_day.setdefault(int(v.day_index), []).append(v)

    from pyproj import Transformer

    to_lonlat = Transformer.from_crs(frame.crs, "EPSG:4326", always_xy=True)
    warnings: list[str] = list(schedule.warnings)
    if frame.router is None:
        warnings.append(STRAIGHT_LINE_WARNING)
    if not frame.access and by_day:
        warnings.append(
            "The frame has no access points: each day's route starts and ends at its first site, "
            f"and the lab is assumed to be {lab_minutes:g} min from that site."
        )

    updates: dict[str, tuple[dt.datetime, int]] = {}
    routes: list[Route] = []
    marginal: dict[str, list[float]] = {}
    stratum_of = {v.site_id: v.stratum for v in schedule.visits}

    on_site = float(math.ceil(minutes_on_site - 1e-9))  # whole minutes on site in the timetable
    for day_index in sorted(by_day):
        if not 0 <= day_index < len(schedule.days):
            raise ValueError(f"visit day_index {day_index} is outside Schedule.days (0..{len(schedule.days) - 1})")
        day = schedule.days[day_index]
        lo, length = _circle(day, minutes_on_site)
        if length < 1:
            raise InfeasibleError(
                f"field day {day.date}: the window {day.window_start:%H:%M}-{day.window_end:%H:%M} has no whole "
                f"minute at which a sampling of time.minutes_on_site = {minutes_on_site:g} min can start and end "
                "inside it. Widen time.window or lower time.minutes_on_site.")
        reverse = bool(rng.random() < 0.5)
        u = int(rng.integers(length))
        day_visits = by_day[day_index]
        legs = _day_legs(day_visits, frame)
        groups = _water_groups(day_visits, frame, legs)
        if len(groups) > 1:
            warnings.append(
                f"On {day.date} the sites lie on {len(groups)} separate water bodies: the day is planned as "
                f"{len(groups)} parts, one after the other, each from its own access point; road travel "
                "between them is not planned: leave time for it."
            )
        row_of = {v.site_id: r for r, v in enumerate(day_visits)}
        plans = [
            _plan_day(
                day_index, day, g_visits, frame, m_per_min=m_per_min, on_site=on_site,
                lab_minutes=lab_minutes, limit_min=limit_min, reverse=reverse, circle=length,
                max_day_minutes=max_day_minutes, legs=legs, rows=[row_of[v.site_id] for v in g_visits],
            )
            for g_visits in groups
        ]
        pieces = _place_day(day, plans, lo, length, u, m_per_min=m_per_min, on_site=on_site,
                            lab_minutes=lab_minutes, n_visits=len(day_visits))
        _marginals(plans, marginal, stratum_of, m_per_min)
        _collect_day(pieces, day, frame, updates, routes, to_lonlat, limit_min, lab_minutes, speed_kmh, warnings)

    visits = tuple(
        dataclasses.replace(v, planned_time=updates[v.site_id][0], route_order=updates[v.site_id][1])
        if v.site_id in updates else v
        for v in schedule.visits
    )
    travel = {name: float(np.mean(c)) for name, c in sorted(marginal.items())}
    out = dataclasses.replace(
        schedule,
        visits=visits,
        routes=tuple(routes),
        travel_minutes_per_site=travel,
        warnings=tuple(dict.fromkeys(warnings)),
        time_draw=TIME_DRAW if by_day else schedule.time_draw,
    )
    if updates:
        out = dataclasses.replace(out, time_of_day=_time_of_day(out))
    return out


def _depot_site_saving(plan: _DayPlan, trip: _Trip, m_per_min: float) -> float:
    """Without access points: minutes saved if the start site were dropped (the tour then starts at the next)."""
    seq = list(trip.nodes)
    if len(seq) < 2:
        return 0.0
    d = plan.dist
    return float(d[seq[-1], seq[0]] + d[seq[0], seq[1]] - d[seq[-1], seq[1]]) / m_per_min


def _route(
    plan: _DayPlan, trip: _Trip, t_i: int, n_trips: int, day: FieldDay, frame: Frame, to_lonlat: Any,
    ids: tuple[str, ...], limit_min: float, lab_minutes: float, speed_kmh: float, warnings: list[str],
) -> Route:
    nodes = ((0,) if not trip.samples_depot else ()) + trip.nodes + (0,)
    xy_path = _path(plan.legs, plan.idx, nodes)
    lon, lat = to_lonlat.transform([p[0] for p in xy_path], [p[1] for p in xy_path])
    ok = trip.holding_min <= limit_min + 1e-9
    where = f"access point {plan.access.name}" if plan.access else f"first site {ids[0]}"
    notes = []
    if plan.access is not None:
        notes.append(f"Starts and ends at {where}: the shortest route of {plan.candidates} access point(s) tried.")
    else:
        notes.append(f"Starts and ends at {where} (no access points in the frame); lab assumed {lab_minutes:g} min from it.")
    if n_trips > 1:
        notes.append(
            f"Trip {t_i} of {n_trips} this day: the day was split to meet the holding time, to work the part of "
            "the round that runs past the window's end from its opening, or by water body; at the end of each "
            f"trip the samples go to the lab by courier from {where}."
        )
    leave = _later(plan.start, trip.leave)
    if trip.early:
        notes.append("Worked first: this part of the day's round comes round from the window's end to its opening "
                     "(planned times are spread evenly over the window).")
    if leave < day.window_start:
        notes.append(f"Leaves {leave:%H:%M}, before the window opens at {day.window_start:%H:%M}, so that its "
                     "first sample is taken at its planned time.")
    notes.append(
        f"Holding time: {trip.holding_min:.0f} min from the first sample to the lab "
        f"(limit {limit_min:.0f} min, lab {lab_minutes:g} min from {where})."
    )
    if frame.router is None:
        notes.append("Straight lines: over-water distances were not available.")
    if not ok:
        single = len(trip.nodes) - (1 if trip.samples_depot else 0) <= 1
        warnings.append(
            f"{day.date} trip {t_i} ({', '.join(ids)}): the first sample would reach the lab "
            f"{trip.holding_min:.0f} min after collection, over the {limit_min:.0f} min holding time "
            f"(time.holding_h); {'even this single site cannot meet it' if single else 'it cannot be split further'} "
            f"at time.speed_kmh = {speed_kmh:g} with time.lab_minutes = {lab_minutes:g}. "
            "Raise the speed, shorten lab_minutes (a closer lab or a courier), or remove these sites from the frame (area.reach_m)."
        )
    return Route(
        day_index=plan.day_index,
        date=day.date,
        access=plan.access.name if plan.access else "",
        site_ids=ids,
        coords_xy=xy_path,
        coords_lonlat=tuple((float(a), float(b)) for a, b in zip(lon, lat)),
        length_m=trip.length_m,
        start=leave,
        end=_later(plan.start, trip.back),
        lab_deadline_ok=ok,
        notes=tuple(notes),
    )


def _marginals(plans: Sequence[_DayPlan], marginal: dict, stratum_of: dict, m_per_min: float) -> None:
    """Each site's marginal travel minutes on its trip of the round (before the round is placed on
    the circle: cutting it there is a matter of timing, not of where the sites are)."""
    for plan in plans:
        for trip in plan.trips:
            ids = tuple(plan.site_ids[n] for n in trip.nodes)
            for sid, c in zip(ids if not trip.samples_depot else ids[1:],
                              marginal_minutes(plan.dist, trip.nodes, m_per_min)):
                marginal.setdefault(stratum_of[sid], []).append(c)
            if trip.samples_depot:
                # The first site is the depot: its marginal cost is what the tour saves without it.
                marginal.setdefault(stratum_of[ids[0]], []).append(_depot_site_saving(plan, trip, m_per_min))


def _collect_day(pieces, day, frame, updates, routes, to_lonlat, limit_min, lab_minutes, speed_kmh, warnings):
    """Planned times, route order, travel costs and routes of one day's trips (in time order)."""
    order = 0
    for t_i, (plan, trip) in enumerate(pieces, start=1):
        ids = tuple(plan.site_ids[n] for n in trip.nodes)
        for sid, arr in zip(ids, trip.arrive):
            order += 1
            updates[sid] = (_later(plan.start, arr), order)
        routes.append(_route(plan, trip, t_i, len(pieces), day, frame, to_lonlat, ids, limit_min, lab_minutes,
                             speed_kmh, warnings))


def _day_legs(day_visits: Sequence[Visit], frame: Frame) -> Any:
    """With access points: the legs among every access point and the day's sites (in that order),
    from one router search; used for grouping, choosing the access point, timing and drawing."""
    if not frame.access:
        return None
    acc_xy = np.array([[a.x, a.y] for a in frame.access], dtype=float)
    sites_xy = np.array([[v.x, v.y] for v in day_visits], dtype=float)
    return _legs(frame.router, np.vstack([acc_xy, sites_xy]))


def _water_groups(day_visits: Sequence[Visit], frame: Frame, legs: Any) -> list[list[Visit]]:
    """The day's visits in one group, or one group per access point when no access point reaches them all.

    A regional frame can hold several separate lakes, each with its own launch: a day whose
    random sites fall on two lakes is then worked lake by lake, each from the nearest access
    point that reaches its sites over water.
    """
    if not frame.access or frame.router is None or len(day_visits) < 2:
        return [list(day_visits)]
    m = len(frame.access)
    to_sites = legs.dist[:m, m:]
    if np.all(np.isfinite(to_sites), axis=1).any() or not np.all(np.isfinite(to_sites).any(axis=0)):
        return [list(day_visits)]  # one access point reaches all, or some site none (reported by _plan_day)
    nearest = np.argmin(np.where(np.isfinite(to_sites), to_sites, np.inf), axis=0)
    groups: dict[int, list[Visit]] = {}
    for v, a in zip(day_visits, nearest):
        groups.setdefault(int(a), []).append(v)
    return [groups[a] for a in sorted(groups)]
