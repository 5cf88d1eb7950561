"""The spatial draw: stratified random sites with ordered reserves.

Each stratum is drawn on its own random stream,
``geosample.rng.stream(seed, "space/<stratum name>")``, so a change to one
stratum leaves the other strata's sites unchanged. Within a stratum the draw is
one sequence of points: the first ``n_h`` are the primary sites, the next
``ceil(reserve * n_h)`` are the reserves in the order they must be used.

Methods (:data:`METHODS`):

``simple``
    Independent uniform points over the stratum (rejection from its bounding box).
``balanced``
    Balanced acceptance sampling (Robertson, Brown, McDonald & Jaksons 2013,
    Biometrics 69:776-784): a random-start Halton sequence over the bounding
    box, kept where it falls in the stratum. Any prefix of the kept points is
    spatially balanced, so primaries and reserves come from one sequence.
``grts``
    Generalized random tessellation stratified sampling for an area frame
    (Stevens & Olsen 2004, JASA 99:262-278): hierarchically randomised quadrant
    addresses, systematic selection along the address line, reverse
    hierarchical order for the reserves.

The spatial balance of each stratum's primary sites is the Voronoi measure of
Stevens & Olsen (2004), :func:`spatial_balance`. Formulas and their sources are
in ``docs/methods.md`` ("Spatial draw").
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np
import shapely

from ..errors import InfeasibleError, SettingError
from ..model import Allocation, Frame, Site, SiteDraw
from ..rng import stream

__all__ = [
    "METHODS",
    "HALTON_BASES",
    "draw_sites",
    "radical_inverse",
    "halton",
    "reverse_hierarchical_order",
    "spatial_balance",
]

METHODS = ("simple", "balanced", "grts")
"""The draw methods, in the order the documentation presents them."""

HALTON_BASES = (2, 3)
"""Bases of the two-dimensional Halton sequence used by balanced acceptance sampling."""

#: Random start of the Halton sequence: u_d is uniform on {0, ..., B_d - 1} with
#: B_2 = 2**32 and B_3 = 3**20, so the first point is uniform on a grid finer than
#: 1e-9 of the box (a random start, as in Robertson et al. 2013).
_HALTON_START_RANGE = (2**32, 3**20)

#: GRTS: the grid is refined until it has at least this many cells meeting the
#: stratum per wanted site (and no cell's inclusion probability exceeds 1).
_GRTS_CELLS_PER_SITE = 16
_GRTS_MAX_LEVEL = 24

#: Bounds on the work a draw may do before it gives up (see _Budget).
_MAX_CANDIDATES = 50_000_000
_SPACING_TRIES_PER_SITE = 200

#: Point-in-stratum tests switch to a grid of pre-classified cells for large batches.
_GRID_CELLS = 2**16
_GRID_MIN_POINTS = 4096
_GRID_MIN_VERTICES = 64

#: Random sequential packing of equal discs jams at a covered fraction of about 0.547
#: (Feder 1980, J. Theor. Biol. 87:237-254; memory); hexagonal packing covers pi/sqrt(12).
_HEX_CELL = math.sqrt(3.0) / 2.0  # area per point of a hexagonal packing at unit spacing


# =========================================================================== public API
def draw_sites(
    frame: Frame,
    allocation: Allocation,
    *,
    method: str = "balanced",
    reserve: float = 0.5,
    spacing_m: float | None = None,
    seed: int | np.random.SeedSequence,
    spacing_between_strata: bool = True,
    measure_balance: bool = True,
) -> SiteDraw:
    """Draw the primary and reserve sites of every stratum.

    Parameters
    ----------
    frame : Frame
        The sampling frame; each stratum geometry is in ``frame.crs`` (metres)
        and already excludes what cannot be sampled.
    allocation : Allocation
        Primary sites per stratum (``allocation.as_dict()``). A stratum of the
        frame missing from the allocation gets no sites (with a warning).
    method : {"simple", "balanced", "grts"}
        How sites are drawn (module docstring).
    reserve : float
        Reserve sites per primary site, as a fraction: each stratum gets
        ``ceil(reserve * n_h)`` reserves, drawn after its primaries.
    spacing_m : float, optional
        No two sites (primary or reserve) closer than this, in metres. Candidates
        closer than ``spacing_m`` to a site already drawn are skipped.
    seed : int or numpy.random.SeedSequence
        The design's root seed; stratum ``h`` uses ``stream(seed, "space/<name>")``.
    spacing_between_strata : bool
        With ``spacing_m``, also keep sites of different strata ``spacing_m``
        apart (default). Strata are then drawn in frame order and each skips
        candidates near the sites of the strata before it, so a change to one
        stratum can move the sites of a later stratum that lie within
        ``spacing_m`` of its sites (the other sites stay the same points). With
        False, spacing holds within each stratum only and strata are fully
        independent.
    measure_balance : bool
        Compute each stratum's Voronoi balance (default). False leaves the
        balance None: only worth it for draws of many thousands of sites.

    Returns
    -------
    SiteDraw
        Sites in stratum (frame) order, then draw order; ``balance`` holds the
        Voronoi balance of each stratum's primary sites.

    Raises
    ------
    SettingError
        Unknown ``method``; ``reserve`` negative; ``spacing_m`` not positive.
    InfeasibleError
        A stratum with allocated sites has no area, or cannot hold its sites at
        ``spacing_m`` (the message gives the count that fits and the spacing that
        would work), or is too small a part of its bounding box to draw in.

    Examples
    --------
    >>> import pyproj, shapely
    >>> from geosample.model import Allocation, Frame, Stratum
    >>> lake = shapely.box(0, 0, 1000, 500)
    >>> frame = Frame(crs=pyproj.CRS("EPSG:32616"), crs_reason="example", water=lake,
    ...               exclusions=None, strata=(Stratum("Main", "MA", lake, lake.area, 1.0),),
    ...               water_area_m2=lake.area)
    >>> alloc = Allocation(("Main",), (4,), 4, "proportional", "chebyshev", "two", 0.95,
    ...                    None, 0.05, None, (1.0,))
    >>> draw = draw_sites(frame, alloc, method="balanced", reserve=0.5, seed=7)
    >>> [s.site_id for s in draw.sites]
    ['MA-001', 'MA-002', 'MA-003', 'MA-004', 'MA-005', 'MA-006']
    >>> [s.reserve_rank for s in draw.sites]
    [0, 0, 0, 0, 1, 2]
    """
    drawer = _method(method)
    reserve = _check_reserve(reserve)
    spacing = _check_spacing(spacing_m)
    wanted = allocation.as_dict()
    names = {s.name for s in frame.strata}
    unknown = [name for name in wanted if name not in names]
    if unknown:
        raise ValueError(f"the allocation names strata the frame does not have: {unknown}")

    warnings: list[str] = []
    sites: list[Site] = []
    balance: dict[str, float | None] = {}
    earlier = np.empty((0, 2))
    to_lonlat = _lonlat_transformer(frame.crs)
    for stratum in frame.strata:
        n = _check_count(stratum.name, wanted.get(stratum.name, 0))
        if stratum.name not in wanted:
            warnings.append(f"stratum {stratum.name!r} is not in the allocation; it gets no sites")
        n_reserve = _reserve_count(reserve, n)
        n_total = n + n_reserve
        if n_total == 0:
            balance[stratum.name] = None
            if stratum.name in wanted:
                warnings.append(f"stratum {stratum.name!r} was allocated 0 sites; it gets none")
            continue
        region = _region(stratum.geometry)
        if not region.area > 0:
            raise InfeasibleError(
                f"stratum {stratum.name!r} has no area left (0 m2) but was allocated {n} sites: "
                "check the exclusions and constraints that removed it, or allocate 0 sites to it"
            )
        spacer = None
        if spacing is not None:
            _check_packing(stratum.name, region, n, n_reserve, spacing)
            blockers = earlier if spacing_between_strata else np.empty((0, 2))
            spacer = _Spacer(spacing, _near_box(blockers, region.bounds, spacing))
        rng = stream(seed, f"space/{stratum.name}")
        try:
            xy = drawer(region, n_total, rng, spacer=spacer)
        except _Exhausted as stop:
            raise _infeasible(stratum.name, method, n, n_reserve, spacing, stop) from None
        sites.extend(_site_records(stratum.name, stratum.code, n, xy, *to_lonlat(xy[:, 0], xy[:, 1])))
        balance[stratum.name] = spatial_balance(xy[:n], region) if measure_balance else None
        if spacing is not None and spacing_between_strata:
            earlier = np.vstack([earlier, xy])
    return SiteDraw(
        sites=tuple(sites),
        method=method,
        reserve=reserve,
        spacing_m=spacing,
        balance=balance,
        warnings=tuple(warnings),
    )


def _site_records(name: str, code: str, n: int, xy: np.ndarray, lon: np.ndarray, lat: np.ndarray) -> list[Site]:
    """One Site per drawn point: the first ``n`` primary, the rest reserves ranked 1, 2, ... in draw order."""
    return [
        Site(site_id=f"{code}-{k:03d}", stratum=name, role="primary" if k <= n else "reserve",
             reserve_rank=0 if k <= n else k - n, draw_order=k, x=x, y=y, lat=la, lon=lo)
        for k, x, y, la, lo in zip(range(1, len(xy) + 1), xy[:, 0].tolist(), xy[:, 1].tolist(),
                                   np.asarray(lat, dtype=float).tolist(), np.asarray(lon, dtype=float).tolist())
    ]


def radical_inverse(i: Any, base: int) -> np.ndarray:
    """The radical inverse ``phi_b(i)``: the base-``b`` digits of ``i`` mirrored after the point.

    With ``i = sum_k d_k b^k``, ``phi_b(i) = sum_k d_k b^-(k+1)``; the Halton
    sequence's coordinate in base ``b``. Computed with integers (digits
    accumulated exactly, one division at the end).

    Parameters
    ----------
    i : int or array of int
        Non-negative indices.
    base : int
        At least 2.

    Returns
    -------
    numpy.ndarray of float
        Same shape as ``i``, values in [0, 1).

    Examples
    --------
    >>> radical_inverse([1, 2, 3, 4, 5, 6], 2).tolist()
    [0.5, 0.25, 0.75, 0.125, 0.625, 0.375]
    >>> float(radical_inverse(17, 3) * 27)
    25.0
    """
    base = int(base)
    if base < 2:
        raise ValueError(f"base must be an integer >= 2, not {base}")
    idx = np.asarray(i, dtype=np.int64)
    if idx.size and int(idx.min()) < 0:
        raise ValueError("radical_inverse needs non-negative indices")
    top = int(idx.max()) if idx.size else 0
    digits = 1
    while base**digits <= top:
        digits += 1
    if base**digits < 2**62:
        rest = idx.copy()
        mirrored = np.zeros_like(idx)
        for _ in range(digits):
            rest, d = np.divmod(rest, base)
            mirrored = mirrored * base + d
        return mirrored / float(base**digits)
    rest = idx.copy()
    out = np.zeros(idx.shape, dtype=float)
    scale = 1.0 / base
    for _ in range(digits):
        rest, d = np.divmod(rest, base)
        out += d * scale
        scale /= base
    return out


def halton(start: Any, count: int, bases: tuple[int, ...] = HALTON_BASES) -> np.ndarray:
    """Points ``start .. start + count - 1`` of the Halton sequence.

    Row ``k`` is ``(phi_b1(s_1 + k), phi_b2(s_2 + k), ...)``; ``start`` is one
    index for every dimension or one index per dimension (a random start, as
    balanced acceptance sampling uses).

    Parameters
    ----------
    start : int or sequence of int
        First index, per dimension or shared.
    count : int
        Number of points.
    bases : tuple of int
        One base per dimension (coprime, usually the first primes).

    Returns
    -------
    numpy.ndarray, shape (count, len(bases))

    Examples
    --------
    >>> halton(0, 3).tolist()
    [[0.0, 0.0], [0.5, 0.3333333333333333], [0.25, 0.6666666666666666]]
    """
    starts = np.broadcast_to(np.asarray(start, dtype=np.int64), (len(bases),))
    k = np.arange(int(count), dtype=np.int64)
    if len(bases) == 0:
        return np.empty((int(count), 0))
    return np.column_stack([radical_inverse(s + k, b) for s, b in zip(starts, bases)])


def reverse_hierarchical_order(n: int) -> np.ndarray:
    """Positions ``0 .. n-1`` in reverse hierarchical order (Stevens & Olsen 2004).

    Each position is written with ``m`` base-4 digits, ``4**m >= n``; the
    positions are sorted by the number their digits make when read in reverse.
    When ``n`` is not a power of 4, the order of the padded ``4**m`` positions
    is kept and positions ``>= n`` are dropped.

    Examples
    --------
    >>> reverse_hierarchical_order(16).tolist()
    [0, 4, 8, 12, 1, 5, 9, 13, 2, 6, 10, 14, 3, 7, 11, 15]
    >>> reverse_hierarchical_order(6).tolist()
    [0, 4, 1, 5, 2, 3]
    """
    n = int(n)
    if n <= 1:
        return np.arange(max(n, 0), dtype=np.int64)
    m = 1
    while 4**m < n:
        m += 1
    pos = np.arange(4**m, dtype=np.int64)
    key = np.zeros_like(pos)
    rest = pos.copy()
    for _ in range(m):
        rest, d = np.divmod(rest, 4)
        key = key * 4 + d
    order = pos[np.argsort(key, kind="stable")]
    return order[order < n]


def spatial_balance(points_xy: Any, polygon: Any) -> float | None:
    """The Voronoi spatial-balance measure of an equal-probability sample (Stevens & Olsen 2004).

    For sample point ``i`` with Voronoi polygon ``V_i`` clipped to the stratum
    ``S``, ``v_i`` is the sum of inclusion probabilities over ``V_i``. For an
    equal-probability design of ``n`` points (inclusion density ``n / area(S)``)
    ``v_i = n * area(V_i & S) / area(S)``. The ``v_i`` average 1; the measure is
    their variance (0 for perfect balance).

    Parameters
    ----------
    points_xy : array-like, shape (n, 2)
        Sample points, in the polygon's coordinates.
    polygon : shapely Polygon or MultiPolygon
        The stratum.

    Returns
    -------
    float or None
        None for fewer than 3 points.

    Examples
    --------
    >>> import shapely
    >>> grid = [(x + 0.5, y + 0.5) for x in range(3) for y in range(3)]
    >>> round(spatial_balance(grid, shapely.box(0, 0, 3, 3)), 12)
    0.0
    """
    xy = np.asarray(points_xy, dtype=float).reshape(-1, 2)
    n = len(xy)
    if n < 3:
        return None
    region = _region(polygon)
    area = region.area
    if not area > 0:
        return None
    x0, y0, x1, y1 = region.bounds
    px0, py0 = xy.min(axis=0)
    px1, py1 = xy.max(axis=0)
    pad = max(x1 - x0, y1 - y0, px1 - px0, py1 - py0)
    envelope = shapely.box(min(x0, px0) - pad, min(y0, py0) - pad, max(x1, px1) + pad, max(y1, py1) + pad)
    cells = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(xy), extend_to=envelope))
    clipped = _clipped_areas(cells, region)
    v = np.zeros(n)
    v[: len(clipped)] = n * clipped / area
    return float(np.var(v))


# =========================================================================== validation
def _method(method: Any) -> Callable[..., np.ndarray]:
    """The ``_draw_<method>`` function registered for a method name."""
    if not isinstance(method, str) or method not in METHODS:
        raise SettingError("draw.method", method, " | ".join(METHODS), fix='write method = "balanced" in [draw]')
    return globals()[f"_draw_{method}"]


def _check_reserve(reserve: Any) -> float:
    ok = isinstance(reserve, (int, float, np.integer, np.floating)) and not isinstance(reserve, bool)
    if not ok or not math.isfinite(float(reserve)) or float(reserve) < 0:
        raise SettingError("draw.reserve", reserve, "a number >= 0 (reserve sites per primary site)",
                           fix="write reserve = 0.5 for one reserve per two primary sites, or 0 for none")
    return float(reserve)


def _check_spacing(spacing_m: Any) -> float | None:
    if spacing_m is None:
        return None
    ok = isinstance(spacing_m, (int, float, np.integer, np.floating)) and not isinstance(spacing_m, bool)
    if not ok or not math.isfinite(float(spacing_m)) or float(spacing_m) <= 0:
        raise SettingError("draw.spacing_m", spacing_m, "a distance in metres > 0",
                           fix="remove spacing_m for no minimum distance")
    return float(spacing_m)


def _check_count(name: str, n: Any) -> int:
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 0:
        raise ValueError(f"allocation for stratum {name!r} must be a non-negative integer, not {n!r}")
    return int(n)


def _reserve_count(reserve: float, n: int) -> int:
    """``ceil(reserve * n)``, ignoring floating-point dust (0.1 * 30 is 3, not 4)."""
    return int(math.ceil(reserve * n - 1e-9)) if n else 0


# =========================================================================== the region
class _Region:
    """A stratum geometry with what the draws need: bounds, area, a fast point test."""

    def __init__(self, geom: Any):
        self.geom = geom
        shapely.prepare(geom)  # a cache: the geometry's value is unchanged
        self.area = float(geom.area)
        self.length = float(geom.length)
        self.bounds = tuple(float(b) for b in geom.bounds) if not geom.is_empty else (0.0, 0.0, 0.0, 0.0)
        x0, y0, x1, y1 = self.bounds
        self.box_area = (x1 - x0) * (y1 - y0)
        self.share = self.area / self.box_area if self.box_area > 0 else 0.0
        self._grid: _Grid | None = None
        self._use_grid = shapely.get_num_coordinates(geom) >= _GRID_MIN_VERTICES

        self._pieces: np.ndarray | None = None

    def grid(self, batch: int) -> _Grid | None:
        """The classified grid, built on first need (large batches, detailed geometry)."""
        if self._grid is None and self._use_grid and batch >= _GRID_MIN_POINTS:
            self._grid = _Grid(self)
        return self._grid

    def pieces(self) -> np.ndarray:
        """The stratum cut into small pieces (for fast exact intersections)."""
        if self._pieces is None:
            self._pieces = _subdivide(self.geom)
        return self._pieces

    def contains(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Which points lie in the stratum (exactly ``shapely.contains_xy``)."""
        grid = self.grid(len(x))
        if grid is None:
            return shapely.contains_xy(self.geom, x, y)
        return grid.contains(x, y)

    def scale(self, unit: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Map points of the unit square onto the bounding box."""
        x0, y0, x1, y1 = self.bounds
        return x0 + unit[:, 0] * (x1 - x0), y0 + unit[:, 1] * (y1 - y0)


class _RegionCache:
    """Prepared regions of the last few large geometries, keyed by the geometry object itself.

    (Keyed by identity, not by value: hashing a regional frame's WKB costs seconds.
    The cache holds the geometry, so an id is never reused while its entry lives.)
    """

    def __init__(self, size: int = 32):
        self._size = size
        self._entries: dict[int, tuple[Any, _Region]] = {}

    def get(self, geom: Any) -> _Region:
        hit = self._entries.get(id(geom))
        if hit is not None and hit[0] is geom:
            return hit[1]
        region = _Region(geom)
        if len(self._entries) >= self._size:
            self._entries.pop(next(iter(self._entries)))
        self._entries[id(geom)] = (geom, region)
        return region

    def cache_clear(self) -> None:
        self._entries.clear()


_region_cached = _RegionCache()


def _region(geom: Any) -> _Region:
    """A _Region for a geometry (cached for large geometries drawn repeatedly)."""
    if isinstance(geom, _Region):
        return geom
    if shapely.get_num_coordinates(geom) > 2000:
        return _region_cached.get(geom)
    return _Region(geom)


class _Grid:
    """Cells of the bounding box classified as inside, outside or on the boundary.

    The boundary is sampled every half cell (a part that fits in a 2 x 2 block of
    cells, a small lake of a regional frame, marks its whole bounding box instead)
    and each marked cell is widened by one cell, so every cell the boundary crosses is marked (a point of the
    boundary is within half a sample step of a sample, hence in the same or a
    neighbouring cell). The other cells form 4-connected groups that the boundary
    does not cross; one centre test decides each group. Points in boundary cells
    get the exact ``shapely.contains_xy`` test, so the answers equal it.
    """

    def __init__(self, region: _Region):
        from scipy import ndimage

        x0, y0, x1, y1 = region.bounds
        w, h = x1 - x0, y1 - y0
        nx = int(min(max(round(math.sqrt(_GRID_CELLS * w / h)), 1), _GRID_CELLS))
        ny = int(min(max(round(_GRID_CELLS / nx), 1), _GRID_CELLS))
        self.region, self.nx, self.ny = region, nx, ny
        self.x0, self.y0, self.cw, self.ch = x0, y0, w / nx, h / ny
        step = 0.5 * min(self.cw, self.ch)
        hit = np.zeros((ny, nx), dtype=bool)
        parts = shapely.get_parts(region.geom)
        b = shapely.bounds(parts)
        # A part within a 2 x 2 block of cells (a small lake of a regional frame): its whole
        # bounding box is marked, which covers its boundary, without copying the boundary.
        bx0, by0 = self._cell(b[:, 0], b[:, 1])
        bx1, by1 = self._cell(b[:, 2], b[:, 3])
        small = (bx1 - bx0 <= 1) & (by1 - by0 <= 1)
        for dx in (0, 1):
            for dy in (0, 1):
                hit[np.minimum(by0[small] + dy, by1[small]), np.minimum(bx0[small] + dx, bx1[small])] = True
        if not small.all():
            big = parts[~small]
            edge = shapely.get_coordinates(shapely.segmentize(shapely.boundary(big), step))
            ix, iy = self._cell(edge[:, 0], edge[:, 1])
            hit[iy, ix] = True
        hit = ndimage.binary_dilation(hit, structure=np.ones((3, 3), dtype=bool))
        labels, count = ndimage.label(~hit)
        status = np.full((ny, nx), 2, dtype=np.int8)  # 2: boundary, test exactly
        if count:
            flat = labels.ravel()
            first = np.unique(flat, return_index=True)[1][1:]  # label 0 is the boundary
            cy, cx = np.divmod(first, nx)
            inside = shapely.contains_xy(region.geom, x0 + (cx + 0.5) * self.cw, y0 + (cy + 0.5) * self.ch)
            lookup = np.concatenate([[2], inside.astype(np.int8)])
            status = lookup[labels].astype(np.int8)
        self.status = status
        outside_or_edge = np.zeros((ny + 1, nx + 1), dtype=np.int64)
        outside_or_edge[1:, 1:] = np.cumsum(np.cumsum(status != 1, axis=0), axis=1)
        self._not_inside = outside_or_edge  # 2-D prefix sums of cells not wholly inside

    def boxes_inside(self, bounds: np.ndarray) -> np.ndarray:
        """Which boxes ``(xmin, ymin, xmax, ymax)`` lie wholly in cells classified inside.

        Inside cells are at least half a cell from the boundary, so rounding at a
        cell edge cannot change the answer.
        """
        b = np.asarray(bounds, dtype=float).reshape(-1, 4)
        fx0 = np.floor((b[:, 0] - self.x0) / self.cw)
        fy0 = np.floor((b[:, 1] - self.y0) / self.ch)
        fx1 = np.floor((b[:, 2] - self.x0) / self.cw)
        fy1 = np.floor((b[:, 3] - self.y0) / self.ch)
        ok = (fx0 >= 0) & (fy0 >= 0) & (fx1 < self.nx) & (fy1 < self.ny) & np.isfinite(b).all(axis=1)
        ix0 = np.where(ok, fx0, 0).astype(np.int64)
        iy0 = np.where(ok, fy0, 0).astype(np.int64)
        ix1 = np.where(ok, fx1, 0).astype(np.int64) + 1
        iy1 = np.where(ok, fy1, 0).astype(np.int64) + 1
        p = self._not_inside
        count = p[iy1, ix1] - p[iy0, ix1] - p[iy1, ix0] + p[iy0, ix0]
        return ok & (count == 0)

    def _cell(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        ix = np.clip(np.floor((x - self.x0) / self.cw).astype(np.int64), 0, self.nx - 1)
        iy = np.clip(np.floor((y - self.y0) / self.ch).astype(np.int64), 0, self.ny - 1)
        return ix, iy

    def contains(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        x0, y0, x1, y1 = self.region.bounds
        in_box = (x >= x0) & (x <= x1) & (y >= y0) & (y <= y1)
        ix, iy = self._cell(x, y)
        status = np.where(in_box, self.status[iy, ix], 0)
        out = status == 1
        edge = np.flatnonzero(status == 2)
        if edge.size:
            out[edge] = shapely.contains_xy(self.region.geom, x[edge], y[edge])
        return out


# =========================================================================== spacing
class _Exhausted(Exception):
    """A draw stopped before it had all its sites (spacing too tight, stratum too thin)."""

    def __init__(self, placed: int, tried: int, reason: str):
        super().__init__(reason)
        self.placed, self.tried, self.reason = placed, tried, reason


class _Spacer:
    """Keeps drawn sites at least ``spacing`` apart, taking candidates in their order.

    ``blockers`` are sites of earlier strata the candidates must also avoid.
    A candidate is accepted when no accepted site (or blocker) is closer than
    ``spacing``; the first accepted candidates are the ones a sequential draw
    would keep.
    """

    def __init__(self, spacing: float, blockers: np.ndarray):
        self.spacing = spacing
        self.blockers = np.asarray(blockers, dtype=float).reshape(-1, 2)
        self.accepted = np.empty((0, 2))

    def fresh(self) -> _Spacer:
        return _Spacer(self.spacing, self.blockers)

    def take(self, cand: np.ndarray, need: int) -> np.ndarray:
        """Accept up to ``need`` of ``cand`` (in order); return the accepted rows."""
        from scipy.spatial import cKDTree

        s = self.spacing
        cand = np.asarray(cand, dtype=float).reshape(-1, 2)
        if need <= 0 or len(cand) == 0:
            return np.empty((0, 2))
        fixed = np.vstack([self.blockers, self.accepted])
        if len(fixed):
            dist, _ = cKDTree(fixed).query(cand, k=1, distance_upper_bound=s)
            cand = cand[~(dist < s)]
        if len(cand) == 0:
            return np.empty((0, 2))
        pairs = cKDTree(cand).query_pairs(s, output_type="ndarray")
        if len(pairs):
            gap = np.hypot(*(cand[pairs[:, 0]] - cand[pairs[:, 1]]).T)
            pairs = pairs[gap < s]
        keep = _greedy_independent(len(cand), pairs, need)
        got = cand[keep]
        self.accepted = np.vstack([self.accepted, got])
        return got


def _greedy_independent(count: int, pairs: np.ndarray, need: int) -> np.ndarray:
    """Indices kept by a sequential pass: ``i`` is kept unless an earlier kept index is paired with it."""
    if len(pairs) == 0:
        return np.arange(min(count, need))
    lo = np.minimum(pairs[:, 0], pairs[:, 1])
    hi = np.maximum(pairs[:, 0], pairs[:, 1])
    order = np.argsort(lo, kind="stable")
    lo, hi = lo[order], hi[order]
    starts = np.searchsorted(lo, np.arange(count + 1))
    blocked = np.zeros(count, dtype=bool)
    kept: list[int] = []
    hi_list = hi.tolist()
    starts_list = starts.tolist()
    for i in range(count):
        if blocked[i]:
            continue
        kept.append(i)
        if len(kept) == need:
            break
        a, b = starts_list[i], starts_list[i + 1]
        if b > a:
            blocked[hi_list[a:b]] = True
    return np.asarray(kept, dtype=np.int64)


def _near_box(points: np.ndarray, bounds: tuple[float, ...], margin: float) -> np.ndarray:
    x0, y0, x1, y1 = bounds
    p = np.asarray(points, dtype=float).reshape(-1, 2)
    near = (p[:, 0] >= x0 - margin) & (p[:, 0] <= x1 + margin) & (p[:, 1] >= y0 - margin) & (p[:, 1] <= y1 + margin)
    return p[near]


def _hex_capacity(region: _Region, spacing: float) -> float:
    """About how many points ``spacing`` apart fit: a hexagonal packing of the stratum grown by spacing/2.

    Discs of radius spacing/2 round the sites do not overlap and lie in the
    stratum grown by spacing/2, whose area is about A + P s/2 + pi s^2/4
    (Steiner's formula, exact for a convex stratum); hexagonal packing gives each
    disc sqrt(3)/2 s^2 of area.
    """
    grown = region.area + region.length * spacing / 2 + math.pi * spacing**2 / 4
    return grown / (_HEX_CELL * spacing**2)


def _hex_spacing(region: _Region, count: int) -> float:
    """The spacing at which :func:`_hex_capacity` equals ``count`` (solves its quadratic)."""
    a = _HEX_CELL * count - math.pi / 4
    if a <= 0:
        return math.inf
    b = region.length / 2
    return (b + math.sqrt(b * b + 4 * a * region.area)) / (2 * a)


def _check_packing(name: str, region: _Region, n: int, n_reserve: int, spacing: float) -> None:
    capacity = _hex_capacity(region, spacing)
    n_total = n + n_reserve
    if n_total > capacity:
        raise InfeasibleError(
            f"stratum {name!r} ({region.area:,.0f} m2) cannot hold {n_total} sites ({n} primary + "
            f"{n_reserve} reserve) at least {spacing:g} m apart (draw.spacing_m): even a hexagonal "
            f"packing fits only about {math.floor(capacity)} (estimated from its area and perimeter). "
            f"For {n_total} sites the spacing can be at most about {_hex_spacing(region, n_total):.0f} m, and "
            f"a random draw needs less than that; lower draw.spacing_m, draw.reserve or the allocation"
        )


def _infeasible(name: str, method: str, n: int, n_reserve: int, spacing: float | None,
                stop: _Exhausted) -> InfeasibleError:
    n_total = n + n_reserve
    if spacing is None:
        return InfeasibleError(f"stratum {name!r}: the {method} draw placed {stop.placed} of {n_total} sites "
                               f"({n} primary + {n_reserve} reserve): {stop.reason}")
    fit = max(stop.placed, 1)
    largest = spacing * math.sqrt(fit / n_total)
    return InfeasibleError(
        f"stratum {name!r} cannot hold {n_total} sites ({n} primary + {n_reserve} reserve) at least "
        f"{spacing:g} m apart (draw.spacing_m = {spacing:g}): the {method} draw placed {stop.placed} after "
        f"{stop.tried:,} candidate points ({stop.reason}). About {stop.placed} sites fit at this spacing; for "
        f"{n_total} sites set draw.spacing_m to at most about {largest:.0f} m (estimated from this attempt: "
        f"the count that fits scales as 1 / spacing^2), or lower draw.reserve or the allocation"
    )


# =========================================================================== candidate streams
def _batch_size(need: int, share: float, kept_rate: float) -> int:
    rate = max(share * kept_rate, 1e-9)
    return int(min(max(math.ceil(need / rate * 1.1) + 64, 256), 2**21))


def _take_from_stream(region: _Region, n_total: int, next_batch: Callable[[int], np.ndarray],
                      spacer: _Spacer | None, what: str) -> np.ndarray:
    """Keep candidates of a stream of unit-square points that fall in the region, in stream order.

    ``next_batch(m)`` returns the next ``m`` points of the stream; the kept points
    do not depend on the batch sizes. Stops (``_Exhausted``) after
    ``_MAX_CANDIDATES`` points, or, with spacing, after ``_SPACING_TRIES_PER_SITE``
    inside candidates per wanted site.
    """
    got: list[np.ndarray] = []
    placed = 0
    tried = 0
    inside_seen = 0
    kept_rate = 1.0
    budget_inside = max(_SPACING_TRIES_PER_SITE * n_total, 20_000)
    if n_total / max(region.share, 1e-12) > _MAX_CANDIDATES:
        raise _Exhausted(0, 0, f"the stratum covers only {region.share:.2e} of its bounding box, so {what} would "
                               f"need more than {_MAX_CANDIDATES:,} candidate points; split it into compact parts")
    while placed < n_total:
        if tried >= _MAX_CANDIDATES:
            raise _Exhausted(placed, tried, f"stopped after {_MAX_CANDIDATES:,} candidate points")
        if spacer is not None and inside_seen >= budget_inside:
            raise _Exhausted(placed, tried, f"stopped after {inside_seen:,} candidates inside the stratum")
        m = _batch_size(n_total - placed, region.share, kept_rate)
        unit = next_batch(m)
        tried += m
        x, y = region.scale(unit)
        inside = region.contains(x, y)
        cand = np.column_stack([x[inside], y[inside]])
        inside_seen += len(cand)
        if spacer is None:
            new = cand[: n_total - placed]
        else:
            new = spacer.take(cand, n_total - placed)
            if len(cand):
                kept_rate = max(len(new) / len(cand), 1e-3)
        if len(new):
            got.append(new)
            placed += len(new)
    return np.vstack(got)


def _draw_simple(polygon: Any, n_total: int, rng: np.random.Generator, *, spacer: _Spacer | None = None
                 ) -> np.ndarray:
    """Independent uniform points in the stratum, in draw order.

    Uniform points of the bounding box (``rng.random``, two numbers per point)
    kept when they fall in the stratum: the kept points are independent and
    uniform over the stratum. The stream does not depend on ``n_total``, so a
    smaller draw is a prefix of a larger one.
    """
    region = _region(polygon)
    return _take_from_stream(region, n_total, lambda m: rng.random((m, 2)), spacer, "a uniform draw")


def _draw_balanced(polygon: Any, n_total: int, rng: np.random.Generator, *, spacer: _Spacer | None = None
                   ) -> np.ndarray:
    """Balanced acceptance sampling (Robertson et al. 2013), in draw order.

    A random start ``u = (u_1, u_2)`` (independent uniform integers, see
    ``_HALTON_START_RANGE``); the points ``(phi_2(u_1 + k), phi_3(u_2 + k))``,
    ``k = 0, 1, ...`` scaled to the bounding box, kept where they fall in the
    stratum (and, with spacing, not too close to a kept point).
    """
    region = _region(polygon)
    start = np.array([rng.integers(0, hi) for hi in _HALTON_START_RANGE], dtype=np.int64)
    position = [0]

    def next_batch(m: int) -> np.ndarray:
        pts = halton(start + position[0], m)
        position[0] += m
        return pts

    return _take_from_stream(region, n_total, next_batch, spacer, "balanced acceptance sampling")


# =========================================================================== GRTS
@dataclass(frozen=True)
class _Cells:
    """Grid cells meeting the stratum, at one level of the quadrant hierarchy."""

    ix: np.ndarray
    iy: np.ndarray
    address: np.ndarray  # hierarchical randomised address, base-4 digits
    full: np.ndarray  # True: the cell lies wholly in the stratum
    piece: np.ndarray  # object array: cell & stratum for partial cells (None for full)
    weight: np.ndarray  # area of cell & stratum (m2)
    level: int
    x0: float
    y0: float
    size: float  # cell side at this level


def _grts_cells(region: _Region, n_sample: int, rng: np.random.Generator) -> _Cells:
    """Refine a quadtree over the stratum's (square) bounding box, randomising addresses level by level.

    At every split, each parent cell draws its own random permutation of the
    four quadrant digits; a child's address is its parent's address times 4
    plus its permuted digit. Cells that miss the stratum are dropped; a cell's
    weight is the exact area of the stratum in it (``shapely.intersection`` of
    the parent's piece with the child box; cells wholly inside keep their full
    area without further geometry). Refinement stops at the first level with at
    least ``_GRTS_CELLS_PER_SITE * n_sample`` cells and no inclusion probability
    above 1.
    """
    x0, y0, x1, y1 = region.bounds
    side = max(x1 - x0, y1 - y0)
    ix = np.zeros(1, dtype=np.int64)
    iy = np.zeros(1, dtype=np.int64)
    address = np.zeros(1, dtype=np.int64)
    full = np.zeros(1, dtype=bool)
    piece = np.empty(1, dtype=object)
    piece[0] = region.geom
    weight = np.array([region.area])
    level = 0
    quad_dx = np.array([0, 1, 0, 1])
    quad_dy = np.array([0, 0, 1, 1])
    while True:
        size = side / 2**level
        enough = len(ix) >= _GRTS_CELLS_PER_SITE * n_sample
        fits = weight.max() * n_sample / region.area <= 1.0
        if level >= 1 and ((enough and fits) or level >= _GRTS_MAX_LEVEL):
            break
        m = len(ix)
        perms = rng.permuted(np.tile(np.arange(4, dtype=np.int64), (m, 1)), axis=1)
        child = size / 2
        cix = (2 * ix[:, None] + quad_dx[None, :]).ravel()
        ciy = (2 * iy[:, None] + quad_dy[None, :]).ravel()
        caddr = (address[:, None] * 4 + perms).ravel()
        cfull = np.repeat(full, 4)
        cpiece = np.empty(4 * m, dtype=object)
        cweight = np.full(4 * m, child * child)
        part = np.flatnonzero(~cfull)
        if part.size:
            bx = x0 + cix[part] * child
            by = y0 + ciy[part] * child
            cut = _clip_to_boxes(np.repeat(piece, 4)[part], bx, by, bx + child, by + child)
            area = shapely.area(cut)
            cweight[part] = area
            whole = area >= child * child * (1 - 1e-9)
            cfull[part[whole]] = True
            cpiece[part[~whole]] = cut[~whole]
        keep = cweight > 0
        ix, iy, address = cix[keep], ciy[keep], caddr[keep]
        full, piece, weight = cfull[keep], cpiece[keep], cweight[keep]
        level += 1
    order = np.argsort(address, kind="stable")
    return _Cells(ix[order], iy[order], address[order], full[order], piece[order], weight[order], level,
                  x0, y0, side / 2**level)


def _systematic(weight: np.ndarray, n_sample: int, rng: np.random.Generator) -> np.ndarray:
    """Systematic selection along the line of cumulated inclusion probabilities.

    The cells' inclusion probabilities ``n w_i / sum w`` are laid end to end (in
    address order) on ``[0, n)``; the points ``r, r + 1, ..., r + n - 1`` with
    ``r`` uniform on [0, 1) select the cells they fall in. No probability exceeds
    1, so each cell is selected at most once. Returns indices in address order.
    """
    cum = np.cumsum(weight)
    cum = cum / cum[-1] * n_sample
    hits = rng.random() + np.arange(n_sample)
    return np.minimum(np.searchsorted(cum, hits, side="right"), len(weight) - 1)


def _points_in_cells(cells: _Cells, chosen: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """One uniform point in ``cell & stratum`` for each chosen cell, in the given order.

    A uniform point of the cell box; for partial cells, redrawn until it falls in
    the cell's piece of the stratum (rejection, so uniform over the piece).
    """
    size = cells.size
    bx = cells.x0 + cells.ix[chosen] * size
    by = cells.y0 + cells.iy[chosen] * size
    unit = rng.random((len(chosen), 2))
    x = bx + unit[:, 0] * size
    y = by + unit[:, 1] * size
    part = np.flatnonzero(~cells.full[chosen])
    pieces = cells.piece[chosen]
    if part.size:
        shapely.prepare(pieces[part])
    pending = part[~shapely.contains_xy(pieces[part], x[part], y[part])] if part.size else part
    rounds = 0
    while pending.size:
        rounds += 1
        if rounds > 64:
            for i in pending:  # slivers: exact uniform point by triangulation
                x[i], y[i] = _uniform_in_polygon(pieces[i], rng)
            break
        unit = rng.random((pending.size, 2))
        x[pending] = bx[pending] + unit[:, 0] * size
        y[pending] = by[pending] + unit[:, 1] * size
        pending = pending[~shapely.contains_xy(pieces[pending], x[pending], y[pending])]
    return np.column_stack([x, y])


def _uniform_in_polygon(geom: Any, rng: np.random.Generator) -> tuple[float, float]:
    """One uniform point of a (small) polygon: an area-weighted triangle, then a uniform point in it.

    The triangles are ``shapely.constrained_delaunay_triangles`` of the polygon
    (they tile it exactly); a uniform point of triangle ABC is
    ``A + u (B - A) + v (C - A)`` with ``(u, v)`` uniform on the unit square,
    reflected to ``(1 - u, 1 - v)`` when ``u + v > 1``.
    """
    tris = shapely.get_parts(shapely.constrained_delaunay_triangles(geom))
    areas = shapely.area(tris)
    pick = int(np.searchsorted(np.cumsum(areas), rng.random() * areas.sum(), side="right"))
    a, b, c = shapely.get_coordinates(tris[min(pick, len(tris) - 1)])[:3]
    u, v = rng.random(2)
    if u + v > 1:
        u, v = 1 - u, 1 - v
    p = a + u * (b - a) + v * (c - a)
    return float(p[0]), float(p[1])


def _draw_grts(polygon: Any, n_total: int, rng: np.random.Generator, *, spacer: _Spacer | None = None
               ) -> np.ndarray:
    """GRTS for an area frame (Stevens & Olsen 2004), in draw order.

    The whole sample (primaries and reserves) is one systematic selection of
    ``n_total`` cells along the randomised address line, put in reverse
    hierarchical order; a uniform point is drawn in each cell's part of the
    stratum. With spacing, a larger systematic sample (2, 4, ... times
    ``n_total``) is taken the same way when needed and the points are kept in
    reverse hierarchical order, skipping any closer than the spacing to a kept
    one.
    """
    region = _region(polygon)
    factor = 1
    tried = 0
    best = 0
    while True:
        m = n_total * factor
        cells = _grts_cells(region, m, rng)
        chosen = _systematic(cells.weight, m, rng)
        ordered = chosen[reverse_hierarchical_order(len(chosen))]
        pts = _points_in_cells(cells, ordered, rng)
        tried += m
        if spacer is None:
            return pts
        attempt = spacer.fresh()
        kept = attempt.take(pts, n_total)
        best = max(best, len(kept))
        if len(kept) == n_total:
            spacer.accepted = attempt.accepted
            return kept
        factor *= 2
        if factor > 16:
            raise _Exhausted(best, tried, "an over-sample of 16 times the sites did not have enough spaced points")


# =========================================================================== geometry helpers
def _clip_to_boxes(geoms: np.ndarray, x0: np.ndarray, y0: np.ndarray, x1: np.ndarray, y1: np.ndarray
                   ) -> np.ndarray:
    """``geoms[i] & box_i`` for each i.

    ``shapely.clip_by_rect`` (a linear-time rectangle clip, several times faster
    than a general overlay); a result that is not valid is recomputed with
    ``shapely.intersection``.
    """
    geoms = np.asarray(geoms, dtype=object)
    out = np.empty(len(geoms), dtype=object)
    if len(geoms) == 0:
        return out
    bounds = zip(np.asarray(x0, float).tolist(), np.asarray(y0, float).tolist(),
                 np.asarray(x1, float).tolist(), np.asarray(y1, float).tolist())
    out[:] = [shapely.clip_by_rect(g, *box) for g, box in zip(geoms, bounds)]
    bad = np.flatnonzero(~shapely.is_valid(out))
    if bad.size:
        out[bad] = shapely.intersection(geoms[bad], shapely.box(x0[bad], y0[bad], x1[bad], y1[bad]))
    return out


def _subdivide(geom: Any, max_vertices: int = 64) -> np.ndarray:
    """Pieces of a polygon with at most ``max_vertices`` vertices each, by halving bounding boxes.

    A MultiPolygon (many lakes) starts from its parts: small lakes are pieces as they are,
    and only the large ones are cut.
    """
    done: list[np.ndarray] = []
    todo = np.asarray(shapely.get_parts(geom), dtype=object)
    while len(todo):
        small = shapely.get_num_coordinates(todo) <= max_vertices
        done.append(todo[small])
        todo = todo[~small]
        if not len(todo):
            break
        b = shapely.bounds(todo)
        wide = (b[:, 2] - b[:, 0]) >= (b[:, 3] - b[:, 1])
        xm = np.where(wide, (b[:, 0] + b[:, 2]) / 2, b[:, 2])
        ym = np.where(wide, b[:, 3], (b[:, 1] + b[:, 3]) / 2)
        first = _clip_to_boxes(todo, b[:, 0], b[:, 1], xm, ym)
        x_lo = np.where(wide, xm, b[:, 0])
        y_lo = np.where(wide, b[:, 1], ym)
        second = _clip_to_boxes(todo, x_lo, y_lo, b[:, 2], b[:, 3])
        todo = np.concatenate([first, second])
        todo = todo[shapely.area(todo) > 0]
    return np.concatenate(done) if done else np.empty(0, dtype=object)


def _clipped_areas(cells: np.ndarray, region: _Region) -> np.ndarray:
    """``area(cell & stratum)`` for each cell.

    Cells whose bounding box lies in cells of the region's grid that are wholly
    inside keep their own area, and so do those the (prepared) stratum contains;
    the others are intersected with small pieces of the stratum (an STRtree finds the pieces each one meets).
    """
    areas = shapely.area(cells)
    todo = np.arange(len(cells))
    grid = region.grid(len(cells))
    if grid is not None:
        todo = todo[~grid.boxes_inside(shapely.bounds(cells))]
    todo = todo[~shapely.contains_properly(region.geom, cells[todo])]  # prepared: fast
    if not todo.size:
        return areas
    pieces = region.pieces()
    tree = shapely.STRtree(pieces)
    sub = cells[todo]
    cell_idx, piece_idx = tree.query(sub, predicate="intersects")
    shapely.prepare(sub)  # a cache: the cells' values are unchanged
    whole = shapely.contains_properly(sub[cell_idx], pieces[piece_idx])  # a small lake inside one cell
    part = shapely.area(pieces[piece_idx])
    cut = np.flatnonzero(~whole)
    part[cut] = shapely.area(shapely.intersection(sub[cell_idx[cut]], pieces[piece_idx[cut]]))
    areas[todo] = np.bincount(cell_idx, weights=part, minlength=todo.size)
    return areas


# =========================================================================== coordinates
@functools.lru_cache(maxsize=8)
def _transformer(wkt: str) -> Any:
    import pyproj

    return pyproj.Transformer.from_crs(pyproj.CRS.from_wkt(wkt), pyproj.CRS("EPSG:4326"), always_xy=True)


def _lonlat_transformer(crs: Any) -> Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]:
    """``(x, y) -> (lon, lat)`` from the frame CRS to WGS 84 (``always_xy=True``)."""
    import pyproj

    t = _transformer(pyproj.CRS.from_user_input(crs).to_wkt())

    def to_lonlat(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        lon, lat = t.transform(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
        return np.asarray(lon), np.asarray(lat)

    return to_lonlat
