"""The records passed between the stages of a design.

Each stage is a pure function from some of these to another::

    geometry.build_frame(...)          -> Frame
    stats.sizing.allocate(...)         -> Allocation
    randomizer.space.draw_sites(...)   -> SiteDraw
    randomizer.time / itinerary        -> Schedule
    design.make_design(plan, layers)   -> Design (all of the above)

They are frozen dataclasses so a stage cannot change what an earlier stage
produced. Geometries are shapely objects in the frame's metric CRS; WGS 84
appears only in ``lat``/``lon`` fields and in the exporters.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

__all__ = [
    "Stratum",
    "Removal",
    "AccessPoint",
    "Frame",
    "Allocation",
    "Site",
    "SiteDraw",
    "FieldDay",
    "Visit",
    "Route",
    "Schedule",
    "Design",
]


# --------------------------------------------------------------------------- frame
@dataclass(frozen=True)
class Stratum:
    """One stratum of the frame.

    Attributes
    ----------
    name : str
        The name users know it by (from the strata layer, or generated).
    code : str
        A short code, unique in the frame, used in site ids (``"NB"`` -> ``NB-001``).
    geometry : shapely Polygon or MultiPolygon
        In the frame CRS (metres).
    area_m2 : float
        Area in square metres, measured in the frame CRS.
    weight : float
        ``area_m2`` over the frame's total area; the weights add up to 1.
    """

    name: str
    code: str
    geometry: Any
    area_m2: float
    weight: float


@dataclass(frozen=True)
class Removal:
    """What one constraint removed from the water (one row of the frame's table)."""

    constraint: str  # e.g. "exclude: closed.geojson", "shore_m", "reach_m"
    area_m2: float
    percent_of_water: float
    detail: str = ""


@dataclass(frozen=True)
class AccessPoint:
    """A launch or shore access point, in the frame CRS (snapped to water if it was on land)."""

    name: str
    x: float
    y: float
    lat: float
    lon: float
    snapped_m: float = 0.0  # how far it was moved to reach the water


@dataclass(frozen=True)
class Frame:
    """The sampling frame: the water that can be sampled, split into strata.

    Attributes
    ----------
    crs : pyproj.CRS
        The metric CRS every geometry here is in.
    crs_reason : str
        Why that CRS was chosen, in words.
    water : shapely geometry
        The whole water layer (before constraints), in ``crs``.
    exclusions : shapely geometry or None
        Union of the excluded polygons, in ``crs`` (for the map).
    strata : tuple of Stratum
        The frame, split into strata; their union is the frame.
    water_area_m2 : float
        Area of ``water``.
    removed : tuple of Removal
        What each constraint removed, in the order applied.
    access : tuple of AccessPoint
        Launch / access points (may be empty).
    warnings : tuple of str
        Things the user should know (repaired polygons, snapped access points...).
    router : object or None
        Over-water distances (see ``geometry.WaterRouter``); None when the frame
        was built without one.
    """

    crs: Any
    crs_reason: str
    water: Any
    exclusions: Any
    strata: tuple[Stratum, ...]
    water_area_m2: float
    removed: tuple[Removal, ...] = ()
    access: tuple[AccessPoint, ...] = ()
    warnings: tuple[str, ...] = ()
    router: Any = field(default=None, compare=False, repr=False)

    @property
    def area_m2(self) -> float:
        """Total area of the frame (sum of the strata areas)."""
        return float(sum(s.area_m2 for s in self.strata))

    def stratum(self, name: str) -> Stratum:
        for s in self.strata:
            if s.name == name:
                return s
        raise KeyError(name)


# --------------------------------------------------------------------------- sizing
@dataclass(frozen=True)
class Allocation:
    """How many primary samples each stratum gets, and what that total guarantees.

    Attributes
    ----------
    strata : tuple of str
        Stratum names, in frame order.
    n : tuple of int
        Primary samples per stratum, same order; adds up to ``total``.
    total : int
    method : str
        ``proportional``, ``equal``, ``neyman`` or ``optimal``.
    bound : str
        The bound the total was sized (or checked) with.
    sides : str
        ``"two"`` or ``"one"``.
    confidence : float
    tolerance : float or None
        Half-width the design aims at (None when only n was given).
    error_bound : float
        The error probability the bound guarantees for this allocation
        (at most ``1 - confidence`` when sized for a tolerance).
    achieved_tolerance : float or None
        The half-width the allocation guarantees at ``confidence``.
    weights : tuple of float
        The stratum weights used (area shares).
    notes : tuple of str
        Things that changed the allocation (minimum per stratum, rounding...).
    """

    strata: tuple[str, ...]
    n: tuple[int, ...]
    total: int
    method: str
    bound: str
    sides: str
    confidence: float
    tolerance: float | None
    error_bound: float
    achieved_tolerance: float | None
    weights: tuple[float, ...]
    notes: tuple[str, ...] = ()

    def as_dict(self) -> dict[str, int]:
        return dict(zip(self.strata, self.n))


# --------------------------------------------------------------------------- sites
@dataclass(frozen=True)
class Site:
    """One drawn site.

    ``role`` is ``"primary"`` or ``"reserve"``. ``reserve_rank`` is 0 for primary
    sites and 1, 2, ... for reserves: the order in which reserves of the stratum
    must be used. ``draw_order`` is the position in the stratum's draw sequence
    (primaries first), which is what balance and prefix properties refer to.
    """

    site_id: str
    stratum: str
    role: str
    reserve_rank: int
    draw_order: int
    x: float
    y: float
    lat: float
    lon: float


@dataclass(frozen=True)
class SiteDraw:
    """All drawn sites, with how they were drawn and how balanced they are.

    ``balance`` maps stratum name to the Voronoi spatial-balance measure of its
    primary sites (Stevens & Olsen 2004; 0 is perfect; None if too few sites).
    """

    sites: tuple[Site, ...]
    method: str
    reserve: float
    spacing_m: float | None
    balance: dict[str, float | None]
    warnings: tuple[str, ...] = ()

    def primaries(self) -> tuple[Site, ...]:
        return tuple(s for s in self.sites if s.role == "primary")

    def reserves(self) -> tuple[Site, ...]:
        return tuple(s for s in self.sites if s.role == "reserve")


# --------------------------------------------------------------------------- time
@dataclass(frozen=True)
class FieldDay:
    """A day the crew may go out, with its sampling window (timezone-aware datetimes).

    ``inclusion_p`` is the probability that the design draws this day as a field
    day (a primary unit), ``k_s / K_s`` for its temporal stratum (see
    ``randomizer.time.draw_days``); None before days are drawn. ``drawn`` says
    whether this design drew it.
    """

    date: dt.date
    window_start: dt.datetime
    window_end: dt.datetime
    sunrise: dt.datetime | None = None
    sunset: dt.datetime | None = None
    temporal_stratum: str = ""  # e.g. "2027-W23"
    inclusion_p: float | None = None
    drawn: bool = False


@dataclass(frozen=True)
class Visit:
    """One row of the field schedule: a site, and when (primaries) it is visited.

    Reserves have ``visit_date`` and ``planned_time`` None: a reserve is used on
    the day its stratum's primary could not be sampled, in ``reserve_rank`` order.
    """

    site_id: str
    stratum: str
    role: str
    reserve_rank: int
    x: float
    y: float
    lat: float
    lon: float
    visit_date: dt.date | None = None
    planned_time: dt.datetime | None = None
    day_index: int | None = None  # index into Schedule.days
    route_order: int | None = None  # 1-based position in that day's route


@dataclass(frozen=True)
class Route:
    """One field day's route: from an access point, through the visits, and back."""

    day_index: int
    date: dt.date
    access: str  # access point name ("" when the frame has none)
    site_ids: tuple[str, ...]
    coords_xy: tuple[tuple[float, float], ...]  # the path over water, frame CRS
    coords_lonlat: tuple[tuple[float, float], ...]
    length_m: float
    start: dt.datetime
    end: dt.datetime
    lab_deadline_ok: bool = True
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Schedule:
    """When each site is visited; routes when the itinerary was built."""

    visits: tuple[Visit, ...]
    days: tuple[FieldDay, ...]
    routes: tuple[Route, ...] = ()
    travel_minutes_per_site: dict[str, float] = field(default_factory=dict)
    time_of_day: dict[str, dict[str, float]] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    calendar_days: int = 0  # allowed days in the season, before a crew-day budget (0: len(days))
    day_draw: dict = field(default_factory=dict)  # how the field days were drawn (randomizer.time.DayDraw.record())
    time_draw: str = ""  # how the planned times were drawn, one sentence (set by itinerary.build_itinerary)


# --------------------------------------------------------------------------- design
@dataclass(frozen=True)
class Design:
    """Everything a plan run produced, handed to the exporters and the manifest.

    Attributes
    ----------
    settings : dict
        The resolved plan as plain TOML-like data (sections ``survey``, ``area``,
        ``size``, ``draw``, ``time``), with defaults filled in and the seed set.
        ``settings["survey"]`` holds ``title, parameter, units, statistic,
        criterion, timezone``.
    frame, allocation, draw, schedule :
        The stages' results.
    sizing : dict
        What the report needs to explain the total: ``formula`` (text),
        ``inputs`` (dict), ``per_stratum`` (list of dicts: name, weight, n,
        range, sd, cost), ``guarantee`` (one plain sentence), ``assumption``.
    seed : int
        The root seed actually used.
    seed_source : str
        ``"plan"``, ``"os"`` (drawn and recorded) or ``"text"`` (SHA-256 of ``seed_text``).
    draw_count : int
        How many draws the draw record holds for this plan (this one included).
    inputs : dict
        Input file label -> {"path": relative path, "sha256": hex}.
    registration : dict or None
        For a registered draw, the manifest's ``registration`` entry (registration
        SHA-256, public source, date and value: :func:`geosample.registration.manifest_entry`);
        None for an unregistered draw.
    history : dict or None
        The manifest's ``history`` entry (content key, number of draws:
        :func:`geosample.history.manifest_entry`); None when no history was kept.
    """

    settings: dict
    frame: Frame
    allocation: Allocation
    draw: SiteDraw
    schedule: Schedule
    sizing: dict
    seed: int
    seed_source: str
    draw_count: int = 1
    inputs: dict = field(default_factory=dict)
    registration: dict | None = None
    history: dict | None = None

    @property
    def survey(self) -> dict:
        return self.settings.get("survey", {})
