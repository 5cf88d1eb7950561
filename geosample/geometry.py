"""Layers -> sampling frame: CRS choice, repair, constraints, strata, over-water distances.

:func:`build_frame` turns the plan's ``[area]`` layers (GeoDataFrames, read by
:func:`geosample.layers.read_layer`) into a :class:`~geosample.model.Frame`:

1. choose a metric CRS (:func:`choose_crs`) and project every layer to it;
2. remove the exclusion layers, one :class:`~geosample.model.Removal` row each;
3. keep the shore band ``shore_m = (min, max)`` (distance to the water polygon's
   boundary, island shores included);
4. keep the water within ``reach_m`` of travel over water from the nearest access
   point (:class:`WaterRouter`), going around islands and peninsulas;
5. split what is left into strata (a layer, ``"shore-bands"`` or ``"zones"``).

Over-water distances (``docs/methods.md``, "Sampling frame", gives the method and
its error bound): :class:`WaterRouter` computes shortest paths over a
visibility graph of the reflex vertices of a simplified, slightly shrunk copy
of the water, with line-of-sight tested against a clearance raster (a distance
transform); the reach zone is a distance field on a 16-neighbour grid seeded
with the graph's exact node distances, refined by line of sight to the seed.
"""
from __future__ import annotations

import functools
import logging
import math
import re
import unicodedata
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Sequence

import numpy as np

from .errors import InfeasibleError, LayerError, SettingError
from .model import AccessPoint, Frame, Removal, Stratum

__all__ = [
    "build_frame",
    "WaterRouter",
    "CrsChoice",
    "choose_crs",
    "to_lonlat",
    "to_xy",
    "stratum_codes",
    "shore_band",
    "shore_bands",
    "compact_zones",
    "water_body_strata",
    "GRID_RELATIVE_ERROR",
]

log = logging.getLogger(__name__)

Progress = Callable[[str], None]

_SQRT2 = math.sqrt(2.0)
GRID_RELATIVE_ERROR = 1.0 / math.cos(math.atan(0.5) / 2.0) - 1.0
"""Largest relative excess of a 16-neighbour grid path over the straight line (about 2.75 %)."""

_ZONE_AREA_RTOL = 1e-6  # compact zones are cut to equal areas within this relative tolerance
_MANY_PARTS = 64  # from this many polygons on, a disjoint layer is kept as a MultiPolygon without a union
_ROUTE_ALL_BODIES_UP_TO = 20  # with more separate water bodies, the router covers those holding access points
_SLIVER_RTOL = 1e-6  # uncovered or overlapping strata area below this share of the frame is rounding
_UTM_MAX_OFFSET_DEG = 4.0  # UTM is kept while the frame stays within 4 deg of the zone's central meridian
_UTM_MAX_WIDTH_DEG = 6.0
_METRIC_AREA_SCALE_TOL = 0.005  # a projected metric CRS is kept when its area scale is within 0.5 % of 1


# =========================================================================== CRS
@dataclass(frozen=True)
class CrsChoice:
    """The frame CRS and why it was chosen."""

    crs: Any  # pyproj.CRS
    reason: str


def _lonlat_bounds(gdf: Any) -> tuple[float, float, float, float]:
    g = gdf if gdf.crs is not None and gdf.crs.to_epsg() == 4326 else gdf.to_crs(4326)
    lon0, lat0, lon1, lat1 = (float(v) for v in g.total_bounds)
    return lon0, lat0, lon1, lat1


def _central_meridian(crs: Any) -> float | None:
    op = crs.coordinate_operation
    if op is None:
        return None
    for p in op.params:
        if "longitude of natural origin" in p.name.lower():
            return float(p.value)
    return None


def _laea(lat: float, lon: float) -> Any:
    from pyproj.crs import ProjectedCRS
    from pyproj.crs.coordinate_operation import LambertAzimuthalEqualAreaConversion

    lat, lon = round(lat, 2), round(lon, 2)
    ns = "N" if lat >= 0 else "S"
    ew = "E" if lon >= 0 else "W"
    return ProjectedCRS(
        conversion=LambertAzimuthalEqualAreaConversion(latitude_natural_origin=lat, longitude_natural_origin=lon),
        name=f"Lambert azimuthal equal-area centred {abs(lat):.2f}{ns} {abs(lon):.2f}{ew} (WGS 84)",
    )


def _metric_choice(gdf: Any, why: str) -> CrsChoice:
    """UTM for a frame inside one zone, else an equal-area projection centred on it."""
    lon0, lat0, lon1, lat1 = _lonlat_bounds(gdf)
    lon_c, lat_c = (lon0 + lon1) / 2.0, (lat0 + lat1) / 2.0
    width = lon1 - lon0
    utm = None
    if -80.0 <= lat0 and lat1 <= 84.0:
        try:
            utm = gdf.estimate_utm_crs()
        except Exception:  # pyproj finds no zone (polar, antimeridian)
            utm = None
    if utm is not None:
        cm = _central_meridian(utm)
        offset = max(abs(lon0 - cm), abs(lon1 - cm)) if cm is not None else 0.0
        if width <= _UTM_MAX_WIDTH_DEG and offset <= _UTM_MAX_OFFSET_DEG:
            return CrsChoice(utm, f"{why}; the frame ({lon0:.3f} to {lon1:.3f} E, {lat0:.3f} to {lat1:.3f} N) "
                                  f"lies within {_UTM_MAX_OFFSET_DEG:g} degrees of the central meridian of "
                                  f"{utm.name}, where UTM distorts areas by less than 0.5 %, so it is used")
        span = (f"spans {width:.2f} degrees of longitude" if width > _UTM_MAX_WIDTH_DEG else
                f"reaches {offset:.2f} degrees from the central meridian of {utm.name}")
    else:
        span = "lies where no UTM zone applies (polar or across the antimeridian)"
    crs = _laea(lat_c, lon_c)
    return CrsChoice(crs, f"{why}; the frame {span}, more than one UTM zone holds without area distortion, so an "
                          f"equal-area projection centred on the frame is used ({crs.name})")


def choose_crs(gdf: Any) -> CrsChoice:
    """Choose the metric CRS of the frame for the water layer ``gdf``.

    Rules (``docs/methods.md``):

    * projected in metres, with an area scale within 0.5 % of 1 at the frame's
      centre: kept;
    * geographic (lon/lat), projected in other units (feet...), or metric with a
      larger area distortion (e.g. Web Mercator away from the equator): UTM
      (``GeoDataFrame.estimate_utm_crs``) when the frame is at most 6 degrees wide
      and stays within 4 degrees of the zone's central meridian; otherwise a
      Lambert azimuthal equal-area projection centred on the frame.

    Examples
    --------
    >>> import geopandas, shapely
    >>> g = geopandas.GeoDataFrame(geometry=[shapely.box(-89.02, 46.0, -89.0, 46.01)], crs=4326)
    >>> choose_crs(g).crs.to_epsg()
    32616
    """
    from pyproj import CRS, Proj

    if gdf.crs is None:
        raise LayerError("the water layer has no CRS; read it with geosample.layers.read_layer or set one "
                         "with GeoDataFrame.set_crs")
    crs = CRS.from_user_input(gdf.crs)
    if crs.is_geographic:
        return _metric_choice(gdf, f"the water layer is in geographic coordinates ({crs.name}, degrees)")
    if not crs.is_projected:
        raise LayerError(f"the water layer's CRS {crs.name!r} is neither geographic nor projected; re-save the "
                         "layer in lon/lat (EPSG:4326) or in a projected CRS in metres")
    axis = crs.axis_info[0]
    if abs(axis.unit_conversion_factor - 1.0) > 1e-12:
        return _metric_choice(gdf, f"the water layer's CRS {crs.name} is in {axis.unit_name} and geosample "
                                   "measures in metres, so the layers are reprojected")
    lon0, lat0, lon1, lat1 = _lonlat_bounds(gdf)
    try:
        scale = float(Proj(crs).get_factors((lon0 + lon1) / 2, (lat0 + lat1) / 2).areal_scale)
    except Exception:  # projection without factors: trust it
        scale = 1.0
    if not math.isfinite(scale) or abs(scale - 1.0) > _METRIC_AREA_SCALE_TOL:
        return _metric_choice(gdf, f"the water layer's CRS {crs.name} is in metres but scales areas by "
                                   f"{scale:.3f} here, so areas would be off by {abs(scale - 1) * 100:.1f} %")
    return CrsChoice(crs, f"the water layer's own CRS {crs.name} is projected in metres (area scale "
                          f"{scale:.4f} at the frame), so it is kept")


@functools.lru_cache(maxsize=32)
def _transformer(src_wkt: str, dst: str, inverse: bool) -> Any:
    from pyproj import CRS, Transformer

    a, b = CRS.from_wkt(src_wkt), CRS.from_user_input(dst)
    return Transformer.from_crs(b, a, always_xy=True) if inverse else Transformer.from_crs(a, b, always_xy=True)


def to_lonlat(crs: Any, x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
    """WGS 84 longitude and latitude of frame coordinates ``x, y`` (arrays or scalars).

    Examples
    --------
    >>> lon, lat = to_lonlat("EPSG:32616", [500000.0], [5094000.0])
    >>> round(float(lon[0]), 6), round(float(lat[0]), 3)
    (-87.0, 46.0)
    """
    from pyproj import CRS

    t = _transformer(CRS.from_user_input(crs).to_wkt(), "EPSG:4326", False)
    lon, lat = t.transform(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
    return np.atleast_1d(np.asarray(lon, dtype=float)), np.atleast_1d(np.asarray(lat, dtype=float))


def to_xy(crs: Any, lon: Any, lat: Any) -> tuple[np.ndarray, np.ndarray]:
    """Frame coordinates of WGS 84 ``lon, lat`` (the inverse of :func:`to_lonlat`)."""
    from pyproj import CRS

    t = _transformer(CRS.from_user_input(crs).to_wkt(), "EPSG:4326", True)
    x, y = t.transform(np.asarray(lon, dtype=float), np.asarray(lat, dtype=float))
    return np.atleast_1d(np.asarray(x, dtype=float)), np.atleast_1d(np.asarray(y, dtype=float))


# =========================================================================== layers -> geometry
def _polygonal(geom: Any) -> Any:
    """The polygonal part of ``geom`` (drops points and lines left by make_valid)."""
    import shapely

    if geom is None or geom.is_empty:
        return shapely.Polygon()
    if geom.geom_type in ("Polygon", "MultiPolygon"):
        return geom
    parts = [g for g in shapely.get_parts(geom) if g.geom_type in ("Polygon", "MultiPolygon")]
    return shapely.union_all(parts) if parts else shapely.Polygon()


def _layer_notes(gdf: Any) -> list[str]:
    return list(getattr(gdf, "attrs", {}).get("geosample_warnings", []) or [])


def _check_gdf(gdf: Any, what: str, kind: str) -> None:
    if gdf is None or not hasattr(gdf, "geometry"):
        raise LayerError(f"{what}: expected a GeoDataFrame (read it with geosample.layers.read_layer), "
                         f"got {type(gdf).__name__}")
    if gdf.crs is None:
        raise LayerError(f"{what}: the layer has no CRS. Re-save it with its CRS, or declare one in the plan's "
                         '[area] section, e.g. crs = "EPSG:4326".')
    geoms = gdf.geometry
    keep = ~(geoms.isna() | geoms.is_empty)
    if not keep.any():
        raise LayerError(f"{what}: the layer has no features with a geometry. Give at least one {kind}.")
    ok = ("Polygon", "MultiPolygon") if kind == "polygon" else ("Point", "MultiPoint")
    types = set(geoms[keep].geom_type)
    if not types <= set(ok):
        raise LayerError(f"{what}: the layer holds {', '.join(sorted(types))} features, but {kind}s are needed "
                         f"(accepted: {', '.join(ok)}).")


def _project(gdf: Any, crs: Any, what: str, kind: str, notes: list[str]) -> Any:
    """``gdf`` in the frame CRS, 2-D, without empty features, polygons valid."""
    import shapely

    _check_gdf(gdf, what, kind)
    g = gdf[~(gdf.geometry.isna() | gdf.geometry.is_empty)]
    g = g.to_crs(crs) if not g.crs.equals(crs) else g
    geoms = shapely.force_2d(g.geometry.values)
    if kind == "polygon":
        bad = ~shapely.is_valid(geoms)
        if bad.any():
            from .layers import name_column

            col = name_column(g.columns)
            for i in np.flatnonzero(bad):
                label = f"feature {int(i)}" + (f" ({col} = {str(g[col].iloc[i])!r})" if col else "")
                notes.append(f"{what}: {label} was an invalid polygon ({shapely.is_valid_reason(geoms[i])}); "
                             "repaired with make_valid.")
            geoms = geoms.copy()
            geoms[bad] = [_polygonal(shapely.make_valid(x)) for x in geoms[bad]]
    g = g.set_geometry(list(geoms), crs=crs) if len(g) else g
    return g


def _disjoint_parts(geoms: Any) -> np.ndarray | None:
    """The polygons of ``geoms`` as one flat array when no two of them intersect, else None.

    An STRtree query finds every intersecting pair in about ``n log n``; polygons that
    only touch count as intersecting (they are then merged by a union).
    """
    import shapely

    parts = shapely.get_parts(np.asarray(geoms, dtype=object))
    parts = parts[~shapely.is_empty(parts)]
    if len(parts) < _MANY_PARTS or not np.all(shapely.get_type_id(parts) == 3):  # 3: Polygon
        return None
    left, right = shapely.STRtree(parts).query(parts, predicate="intersects")
    return parts if bool(np.all(left == right)) else None


def _union(gdf: Any) -> Any:
    """The union of a polygon layer's features.

    Many pairwise disjoint polygons (a regional layer of lakes) are kept as one
    MultiPolygon without a union: the same point set and area, at a fraction of the
    cost (``docs/performance.md``).
    """
    import shapely

    geoms = gdf.geometry.values
    parts = _disjoint_parts(geoms)
    if parts is not None:
        return shapely.multipolygons(parts)
    return _polygonal(shapely.make_valid(shapely.union_all(geoms)))


def _area(geom: Any) -> float:
    return 0.0 if geom is None or geom.is_empty else float(geom.area)


# =========================================================================== over-water router
def _erode(geom: Any, d: float) -> Any:
    """A polygon inside ``geom`` shrunk by at least ``d`` (cheap: simplify, then buffer)."""
    if d <= 0:
        return geom
    # simplify moves edges by <= d/4; a 2-segment-per-quadrant round join keeps >= 0.924 of the distance
    return geom.simplify(d / 4.0).buffer(-1.4 * d, quad_segs=2)


def _reflex_vertices(poly: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Vertices of ``poly`` where the water's interior angle exceeds 180 degrees, with their neighbours."""
    import shapely
    from shapely.geometry.polygon import orient

    pts, prv, nxt = [], [], []
    for part in shapely.get_parts(poly):
        if part.is_empty or part.geom_type != "Polygon":
            continue
        part = orient(part, sign=1.0)  # exterior CCW, holes CW: water on the left of every ring
        for ring in [part.exterior, *part.interiors]:
            c = np.asarray(ring.coords, dtype=float)[:-1]
            if len(c) < 3:
                continue
            a, b = np.roll(c, 1, axis=0), np.roll(c, -1, axis=0)
            cross = (c[:, 0] - a[:, 0]) * (b[:, 1] - c[:, 1]) - (c[:, 1] - a[:, 1]) * (b[:, 0] - c[:, 0])
            scale = np.hypot(*(c - a).T) * np.hypot(*(b - c).T)
            m = cross < -1e-9 * scale  # right turn = reflex for the water
            pts.append(c[m]), prv.append(a[m]), nxt.append(b[m])
    if not pts:
        z = np.zeros((0, 2))
        return z, z, z
    return np.vstack(pts), np.vstack(prv), np.vstack(nxt)


def _tangent(v: np.ndarray, vprev: np.ndarray, vnext: np.ndarray, other: np.ndarray) -> np.ndarray:
    """True where the line v-other leaves both neighbours of v on one side (a shortest path may bend at v)."""
    d = other - v
    s1 = d[:, 0] * (vprev[:, 1] - v[:, 1]) - d[:, 1] * (vprev[:, 0] - v[:, 0])
    s2 = d[:, 0] * (vnext[:, 1] - v[:, 1]) - d[:, 1] * (vnext[:, 0] - v[:, 0])
    return s1 * s2 >= 0.0


class WaterRouter:
    """Shortest paths over water, around islands and peninsulas.

    Method (``docs/methods.md``, "Sampling frame"): the water polygon is
    simplified (tolerance ``t``) and shrunk (distance ``delta``); the reflex
    vertices of that polygon are the nodes of a visibility graph whose edges are
    the segments between nodes that are tangent at both ends and clear of land.
    "Clear of land" is decided on a clearance raster: a distance transform of the
    conservatively rasterised water (cell ``cell_m``) gives, for every point, a
    lower bound on its distance to land; a segment is accepted by sphere tracing
    when that bound stays above ``cell_m / 4`` along it. Accepted segments
    therefore never cross land. Query points are joined to every node they see
    and to each other, and the graph is searched with Dijkstra's algorithm.

    Error bound: a computed distance is never shorter than the true over-water
    distance between the (snapped) points, and is longer by at most
    ``clearance_m * (2 + T)`` where ``T`` is the total turning angle of the path in
    radians; :attr:`error_m` states it for paths that turn through up to one full
    circle (``T = 2 pi``). Channels narrower than about ``2 * clearance_m`` are
    treated as closed.

    Parameters
    ----------
    water : shapely Polygon or MultiPolygon
        The water, in a metric CRS.
    resolution_m : float, optional
        Cell of the clearance raster; default: the water's bounding box over
        ``max_cells`` cells.
    max_nodes : int
        The simplification tolerance grows until the graph has at most this many nodes.
    max_cells : int
        Largest clearance raster when ``resolution_m`` is not given.

    Attributes
    ----------
    error_m : float
        The stated bound on how much a distance can be too long (see above).
    clearance_m : float
        ``delta + t``: how far the shrunk polygon may lie inside the water.
    cell_m : float
        Clearance raster cell.
    n_nodes : int
        Nodes of the visibility graph.

    Examples
    --------
    >>> import shapely
    >>> lake = shapely.box(0, 0, 1000, 400).difference(shapely.box(450, 0, 550, 300))
    >>> router = WaterRouter(lake)
    >>> d = router.distance_matrix([[100.0, 100.0], [900.0, 100.0]])
    >>> bool(d[0, 1] > 800.0)  # around the peninsula, not straight through it
    True
    """

    def __init__(self, water: Any, *, resolution_m: float | None = None, max_nodes: int = 4000,
                 max_cells: int = 2_000_000):
        import shapely
        from scipy import ndimage

        water = _polygonal(shapely.make_valid(water))
        if water.is_empty:
            raise LayerError("the water layer has no area to route over")
        self.water = water
        x0, y0, x1, y1 = water.bounds
        w, h = max(x1 - x0, 1e-6), max(y1 - y0, 1e-6)
        r = float(resolution_m) if resolution_m else max(math.sqrt(w * h / max_cells), 1e-3 * max(w, h) / 100)
        self.cell_m = r
        pad = 3
        nx, ny = int(math.ceil(w / r)) + 2 * pad, int(math.ceil(h / r)) + 2 * pad
        self._x0, self._y0 = x0 - pad * r, y0 - pad * r
        xs = self._x0 + (np.arange(nx) + 0.5) * r
        ys = self._y0 + (np.arange(ny) + 0.5) * r
        inner = _erode(water, r / _SQRT2)  # a cell whose centre is here holds only water
        shapely.prepare(inner)
        open_ = shapely.contains_xy(inner, xs[None, :], ys[:, None])
        edt = ndimage.distance_transform_edt(open_) * r
        self._clear = (edt - _SQRT2 * r).astype(np.float32)  # lower bound of the clearance anywhere in a cell
        self._rho = 0.25 * r
        self._build_graph(max_nodes)

    # ------------------------------------------------------------------ clearance and line of sight
    def clearance_lower_bound(self, xy: Any) -> np.ndarray:
        """A lower bound on the distance from each point to land (negative: maybe on land)."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        i = np.floor((xy[:, 0] - self._x0) / self.cell_m).astype(np.int64)
        j = np.floor((xy[:, 1] - self._y0) / self.cell_m).astype(np.int64)
        ny, nx = self._clear.shape
        inside = (i >= 0) & (i < nx) & (j >= 0) & (j < ny)
        out = np.full(len(xy), -np.inf)
        out[inside] = self._clear[j[inside], i[inside]]
        return out

    def visible(self, a: Any, b: Any) -> np.ndarray:
        """For pairs of points (rows of ``a`` and ``b``), whether the segment between them is clear of land.

        Conservative: True means the segment lies over water at least ``cell_m / 4``
        from land; False may also mean it passes very close to land.
        """
        a = np.asarray(a, dtype=float).reshape(-1, 2)
        b = np.asarray(b, dtype=float).reshape(-1, 2)
        n = len(a)
        ok = np.zeros(n, dtype=bool)
        d = b - a
        length = np.hypot(d[:, 0], d[:, 1])
        idx = np.arange(n)
        u = np.zeros(n)
        while idx.size:
            frac = np.divide(u, length[idx], out=np.zeros_like(u), where=length[idx] > 0)
            p = a[idx] + frac[:, None] * d[idx]
            c = self.clearance_lower_bound(p)
            blocked = c < self._rho
            u = u + np.where(blocked, 0.0, c)
            done = ~blocked & (u >= length[idx])
            ok[idx[done]] = True
            keep = ~blocked & ~done
            idx, u = idx[keep], u[keep]
        return ok

    # ------------------------------------------------------------------ graph
    def _build_graph(self, max_nodes: int) -> None:
        import shapely
        import scipy.sparse as sp

        r, rho = self.cell_m, self._rho
        t = 0.5 * r
        while True:
            delta = (t + 2 * _SQRT2 * r + rho) / 0.92
            shrunk = _polygonal(shapely.make_valid(self.water.simplify(t).buffer(-delta, quad_segs=2)))
            nodes, prv, nxt = _reflex_vertices(shrunk)
            if len(nodes) <= max_nodes or shrunk.is_empty:
                break
            t *= max(1.5, (len(nodes) / max_nodes) ** 2)  # node counts fall about as t ** -0.5
        ok = self.clearance_lower_bound(nodes) >= rho
        nodes, prv, nxt = nodes[ok], prv[ok], nxt[ok]
        self._shrunk = shrunk
        self._shrunk_boundary = shrunk.boundary if not shrunk.is_empty else None
        self.simplify_m = t
        self.shrink_m = delta
        self.clearance_m = delta + t
        self.error_m = float(self.clearance_m * (2.0 + 2.0 * math.pi))
        self._nodes, self._prev, self._next = nodes, prv, nxt
        n = len(nodes)
        self.n_nodes = n
        rows, cols, wts = [], [], []
        ua, ub = prv - nodes, nxt - nodes  # each node's two shore edges
        block = max(1, 1_000_000 // max(n, 1))
        for start in range(0, n, block):
            ii = np.arange(start, min(n, start + block))
            jj = np.arange(start, n)
            dx = nodes[None, jj, 0] - nodes[ii, None, 0]
            dy = nodes[None, jj, 1] - nodes[ii, None, 1]
            # tangent at i: both shore edges of i on one side of the line i-j; the same at j
            tan = ((dx * ua[ii, None, 1] - dy * ua[ii, None, 0]) * (dx * ub[ii, None, 1] - dy * ub[ii, None, 0]) >= 0)
            tan &= (dx * ua[None, jj, 1] - dy * ua[None, jj, 0]) * (dx * ub[None, jj, 1] - dy * ub[None, jj, 0]) >= 0
            tan &= jj[None, :] > ii[:, None]
            bi, bj = np.nonzero(tan)
            i, j = ii[bi], jj[bj]
            if not i.size:
                continue
            vis = self.visible(nodes[i], nodes[j])
            i, j = i[vis], j[vis]
            rows.append(i), cols.append(j), wts.append(np.hypot(*(nodes[j] - nodes[i]).T))
        if rows:
            rows_a, cols_a, w_a = np.concatenate(rows), np.concatenate(cols), np.concatenate(wts)
        else:
            rows_a = cols_a = np.zeros(0, dtype=np.int64)
            w_a = np.zeros(0)
        self._edges = (rows_a, cols_a, np.maximum(w_a, 1e-9))
        self.n_edges = int(rows_a.size)
        self._sp = sp

    def _snap(self, xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Points moved onto the routable water where they are too close to land; and how far."""
        import shapely

        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        out = xy.copy()
        moved = np.zeros(len(xy))
        bad = self.clearance_lower_bound(xy) < self._rho
        if bad.any():
            if self._shrunk_boundary is None:
                raise LayerError("the water is too narrow to route over at this resolution")
            pts = shapely.points(xy[bad])
            lines = shapely.shortest_line(self._shrunk_boundary, pts)
            near = shapely.get_coordinates(shapely.get_point(lines, 0))
            out[bad] = near
            moved[bad] = np.hypot(*(near - xy[bad]).T)
        return out, moved

    def _query_graph(self, q: np.ndarray) -> Any:
        """The visibility graph with the query points ``q`` appended as nodes n..n+k-1."""
        n, k = self.n_nodes, len(q)
        rows, cols, wts = [self._edges[0]], [self._edges[1]], [self._edges[2]]
        if n:
            qi, vi = np.meshgrid(np.arange(k), np.arange(n), indexing="ij")
            qi, vi = qi.ravel(), vi.ravel()
            tan = _tangent(self._nodes[vi], self._prev[vi], self._next[vi], q[qi])
            qi, vi = qi[tan], vi[tan]
            vis = self.visible(q[qi], self._nodes[vi])
            qi, vi = qi[vis], vi[vis]
            rows.append(vi), cols.append(qi + n), wts.append(np.hypot(*(q[qi] - self._nodes[vi]).T))
        if k > 1:
            a, b = np.triu_indices(k, 1)
            vis = self.visible(q[a], q[b])
            a, b = a[vis], b[vis]
            rows.append(a + n), cols.append(b + n), wts.append(np.hypot(*(q[b] - q[a]).T))
        r, c, w = np.concatenate(rows), np.concatenate(cols), np.maximum(np.concatenate(wts), 1e-9)
        size = n + k
        return self._sp.csr_matrix((np.r_[w, w], (np.r_[r, c], np.r_[c, r])), shape=(size, size))

    def node_distances(self, sources: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Over-water distance from the nearest source to every graph node.

        Returns ``(node_xy, node_distance, source_xy_snapped)``; sources are included
        as nodes (distance = their snap distance).
        """
        from scipy.sparse.csgraph import dijkstra

        src, moved = self._snap(np.asarray(sources, dtype=float).reshape(-1, 2))
        g = self._query_graph(src)
        n, k = self.n_nodes, len(src)
        # a virtual root joined to each source by its snap distance
        gc = g.tocoo()
        size = n + k + 1
        rows = np.r_[np.zeros(k, dtype=np.int64), gc.row + 1]
        cols = np.r_[np.arange(k) + n + 1, gc.col + 1]
        big = self._sp.csr_matrix((np.r_[moved + 1e-12, gc.data], (rows, cols)), shape=(size, size))
        d = dijkstra(big, directed=True, indices=0)[1:]
        xy = np.vstack([self._nodes, src]) if n else src
        return xy, d, src

    def distance_matrix(self, xy: Any) -> np.ndarray:
        """Over-water distances in metres between the points ``xy`` (a ``(k, 2)`` array in the frame CRS).

        Symmetric, zero diagonal, ``inf`` between points in waters that do not connect.
        Points on land or near the shore are first moved to the nearest routable
        water; the move is added to their distances.
        """
        from scipy.sparse.csgraph import dijkstra

        pts = np.asarray(xy, dtype=float).reshape(-1, 2)
        k = len(pts)
        if k == 0:
            return np.zeros((0, 0))
        q, moved = self._snap(pts)
        g = self._query_graph(q)
        n = self.n_nodes
        d = dijkstra(g, directed=False, indices=np.arange(n, n + k))[:, n:]
        d = d + moved[:, None] + moved[None, :]
        d = np.minimum(d, d.T)
        np.fill_diagonal(d, 0.0)
        same = np.all(pts[:, None, :] == pts[None, :, :], axis=2)
        d[same] = 0.0
        return d

    def path(self, a: Any, b: Any) -> list[tuple[float, float]]:
        """The over-water polyline from ``a`` to ``b`` as ``(x, y)`` tuples, first ``a``, last ``b``.

        Raises
        ------
        InfeasibleError
            When ``a`` and ``b`` are in waters that do not connect.
        """
        from scipy.sparse.csgraph import dijkstra

        pts = np.asarray([a, b], dtype=float).reshape(2, 2)
        q, moved = self._snap(pts)
        g = self._query_graph(q)
        n = self.n_nodes
        dist, pred = dijkstra(g, directed=False, indices=n, return_predecessors=True)
        if not np.isfinite(dist[n + 1]):
            raise InfeasibleError(f"no over-water path joins ({pts[0, 0]:.1f}, {pts[0, 1]:.1f}) and "
                                  f"({pts[1, 0]:.1f}, {pts[1, 1]:.1f}): they lie in waters that do not connect")
        allxy = np.vstack([self._nodes, q]) if n else q
        chain = [n + 1]
        while chain[-1] != n:
            chain.append(int(pred[chain[-1]]))
        chain.reverse()
        out = [tuple(map(float, pts[0]))]
        for c in chain:
            p = tuple(map(float, allxy[c]))
            if p != out[-1]:
                out.append(p)
        end = tuple(map(float, pts[1]))
        if out[-1] != end:
            out.append(end)
        return out

    # ------------------------------------------------------------------ reach zone
    def reach_zone(self, sources: Any, reach_m: float, *, resolution_m: float | None = None,
                   max_cells: int = 400_000) -> tuple[Any, dict]:
        """The water within ``reach_m`` of over-water travel from the nearest source point.

        A distance field on a grid (cell ``resolution_m``; default: the water area
        over ``max_cells``, at least twice :attr:`cell_m`), computed by Dijkstra's
        algorithm on the grid's 16-neighbour graph from seeds at every visibility
        graph node (at its exact graph distance) and at the sources; each cell near
        the limit is then re-measured along the straight line to its seed when that
        line is clear. The cells within ``reach_m`` are joined and clipped to the water.

        Returns
        -------
        (polygon, info)
            ``info`` has ``cell_m``, ``error_m`` (the stated bound: the router's
            bound, plus 2.75 % of ``reach_m`` for a last leg measured on the grid,
            plus three cells) and ``method``.
        """
        import shapely
        from scipy import ndimage
        from scipy.sparse.csgraph import dijkstra

        water = self.water
        rg = float(resolution_m) if resolution_m else max(2.0 * self.cell_m, math.sqrt(water.area / max_cells))
        node_xy, node_d, _src = self.node_distances(sources)
        x0, y0, x1, y1 = water.bounds
        nx, ny = int(math.ceil((x1 - x0) / rg)) + 1, int(math.ceil((y1 - y0) / rg)) + 1
        gx0, gy0 = x0, y0
        xs = gx0 + (np.arange(nx) + 0.5) * rg
        ys = gy0 + (np.arange(ny) + 0.5) * rg
        shapely.prepare(water)
        wet = shapely.contains_xy(water, xs[None, :], ys[:, None])
        cx, cy = np.meshgrid(xs, ys)
        clear = self.clearance_lower_bound(np.c_[cx.ravel(), cy.ravel()]).reshape(ny, nx)
        open_ = wet & (clear >= 1.12 * rg)  # a knight move (sqrt 5 cells) stays within both end disks
        idx = np.full((ny, nx), -1, dtype=np.int64)
        m = int(open_.sum())
        idx[open_] = np.arange(m)
        rows, cols, wts = [], [], []
        for dy, dx in ((0, 1), (1, 0), (1, 1), (1, -1), (1, 2), (2, 1), (1, -2), (2, -1)):
            a = idx[0:ny - dy, max(0, -dx):nx - max(0, dx)]
            b = idx[dy:ny, max(0, dx):nx - max(0, -dx)]
            both = (a >= 0) & (b >= 0)
            rows.append(a[both]), cols.append(b[both])
            wts.append(np.full(int(both.sum()), rg * math.hypot(dx, dy)))
        # seeds: each finite node / source joins the open cells around it that it sees
        fin = np.isfinite(node_d)
        sxy, sd = node_xy[fin], node_d[fin]
        s = len(sxy)
        ci = np.floor((sxy[:, 0] - gx0) / rg).astype(np.int64)
        cj = np.floor((sxy[:, 1] - gy0) / rg).astype(np.int64)
        seed_rows, seed_cols, seed_w = [], [], []
        for dj in (-1, 0, 1):
            for di in (-1, 0, 1):
                ii, jj = ci + di, cj + dj
                inside = (ii >= 0) & (ii < nx) & (jj >= 0) & (jj < ny)
                cell = np.full(s, -1, dtype=np.int64)
                cell[inside] = idx[jj[inside], ii[inside]]
                use = cell >= 0
                if not use.any():
                    continue
                centre = np.c_[xs[np.clip(ii, 0, nx - 1)], ys[np.clip(jj, 0, ny - 1)]]
                su = np.flatnonzero(use)
                vis = self.visible(sxy[su], centre[su])
                su = su[vis]
                seed_rows.append(su), seed_cols.append(cell[su])
                seed_w.append(np.hypot(*(centre[su] - sxy[su]).T))
        # vertex layout: 0 = root, 1..s = seed points, s+1.. = open cells
        sr = np.concatenate(seed_rows) if seed_rows else np.zeros(0, dtype=np.int64)
        sc = np.concatenate(seed_cols) if seed_cols else np.zeros(0, dtype=np.int64)
        sw = np.concatenate(seed_w) if seed_w else np.zeros(0)
        gr, gc, gw = np.concatenate(rows), np.concatenate(cols), np.concatenate(wts)
        off = 1 + s
        r_all = np.r_[np.zeros(s, dtype=np.int64), 1 + sr, gr + off, gc + off]
        c_all = np.r_[1 + np.arange(s), sc + off, gc + off, gr + off]
        w_all = np.maximum(np.r_[sd, sw, gw, gw], 1e-12)
        g = self._sp.csr_matrix((w_all, (r_all, c_all)), shape=(off + m, off + m))
        dist, pred = dijkstra(g, directed=True, indices=0, return_predecessors=True)
        dcell = dist[off:]
        # the seed each cell was reached from (pointer jumping up the shortest-path tree)
        par = pred.copy()
        par[par < 0] = np.flatnonzero(par < 0)
        par[1:off] = np.arange(1, off)
        par[0] = 0
        for _ in range(64):
            nxt = par[par]
            if np.array_equal(nxt, par):
                break
            par = nxt
        origin = par[off:]
        cell_xy = np.c_[cx[open_], cy[open_]]
        limit_hi = reach_m * (1 + GRID_RELATIVE_ERROR) + 4 * rg
        band = np.flatnonzero((dcell > reach_m) & (dcell <= limit_hi) & (origin >= 1) & (origin <= s))
        if band.size:
            o = origin[band] - 1
            cand = sd[o] + np.hypot(*(cell_xy[band] - sxy[o]).T)
            better = cand < dcell[band]
            bb = band[better]
            vis = self.visible(sxy[o[better]], cell_xy[bb])
            dcell[bb[vis]] = cand[better][vis]
        field = np.full((ny, nx), np.inf)
        field[open_] = dcell
        # carry distances into the shore strip the grid cannot enter (a few cells wide)
        # cells that may hold some water: centre in it, or next to such a cell (the shore's partial cells)
        wet = ndimage.binary_dilation(wet, structure=np.ones((3, 3), dtype=bool))
        for _ in range(2 * int(math.ceil(2.5 + 1.12 + 2 * _SQRT2 * self.cell_m / rg)) + 2):
            best = field.copy()
            for dy in (-1, 0, 1):
                for dx in (-1, 0, 1):
                    if dx == dy == 0:
                        continue
                    shifted = np.full_like(field, np.inf)
                    ys_a = slice(max(0, dy), ny + min(0, dy))
                    xs_a = slice(max(0, dx), nx + min(0, dx))
                    ys_b = slice(max(0, -dy), ny + min(0, -dy))
                    xs_b = slice(max(0, -dx), nx + min(0, -dx))
                    shifted[ys_a, xs_a] = field[ys_b, xs_b] + rg * math.hypot(dx, dy)
                    best = np.minimum(best, shifted)
            field = np.where(wet & ~open_, best, field)
        inside = wet & (field <= reach_m)
        zone = _cells_to_polygon(inside, gx0, gy0, rg)
        zone = _polygonal(shapely.make_valid(zone.intersection(water))) if not zone.is_empty else zone
        err = self.error_m + GRID_RELATIVE_ERROR * reach_m + 3 * rg
        info = {"cell_m": rg, "error_m": float(err), "field": field, "xs": xs, "ys": ys,
                "method": "visibility graph + 16-neighbour grid distance field"}
        return zone, info


def _cells_to_polygon(mask: np.ndarray, x0: float, y0: float, cell: float) -> Any:
    """The union of the grid cells where ``mask`` is True (row runs joined into boxes, then dissolved)."""
    import shapely

    boxes = []
    ny, nx = mask.shape
    padded = np.zeros((ny, nx + 2), dtype=np.int8)
    padded[:, 1:-1] = mask
    diff = np.diff(padded, axis=1)
    jr, start = np.nonzero(diff == 1)
    _, stop = np.nonzero(diff == -1)
    if not jr.size:
        return shapely.Polygon()
    boxes = shapely.box(x0 + start * cell, y0 + jr * cell, x0 + stop * cell, y0 + (jr + 1) * cell)
    return _polygonal(shapely.union_all(boxes))


# =========================================================================== constraints
def shore_band(water: Any, lo: float, hi: float | None) -> Any:
    """The water whose distance to the water's boundary (island shores included) lies in ``[lo, hi]``.

    ``hi = None`` means no upper limit.

    Examples
    --------
    >>> import shapely
    >>> sq = shapely.box(0, 0, 100, 100)
    >>> round(shore_band(sq, 0, 10).area)  # 100*100 - 80*80
    3600
    """
    inner = water if lo <= 0 else water.buffer(-lo, quad_segs=16)
    if hi is None or not math.isfinite(hi):
        return _polygonal(inner)
    core = water.buffer(-hi, quad_segs=16)
    return _polygonal(inner.difference(core)) if not core.is_empty else _polygonal(inner)


def _fmt_m2(a: float) -> str:
    if a >= 1e6:
        return f"{a / 1e6:,.3f} km²"
    return f"{a:,.0f} m²"


def _removal_table(water_area: float, removed: Sequence[Removal]) -> str:
    parts = [f"water {_fmt_m2(water_area)}"]
    for r in removed:
        parts.append(f"{r.constraint} removed {_fmt_m2(r.area_m2)} ({r.percent_of_water:.1f} %)")
    return "; ".join(parts)


# =========================================================================== strata
def _ascii_words(name: str) -> list[str]:
    text = unicodedata.normalize("NFKD", str(name)).encode("ascii", "ignore").decode("ascii")
    return re.findall(r"[A-Za-z]+|[0-9]+", text)


def _base_code(name: str) -> str:
    words = _ascii_words(name)
    if not words:
        return "S"
    if len(words) == 1:
        w = words[0]
        return w.upper() if w.isdigit() else w[:2].upper()
    return "".join(w if w.isdigit() else w[0].upper() for w in words[:4])


def stratum_codes(names: Iterable[str]) -> list[str]:
    """Short, unique, readable codes for stratum names (initials; collisions get digits).

    Examples
    --------
    >>> stratum_codes(["North Basin", "South Basin", "Nettle Bay", "Marina"])
    ['NB', 'SB', 'NB2', 'MA']
    """
    out: list[str] = []
    used: set[str] = set()
    for name in names:
        base = _base_code(name)
        code, i = base, 1
        while code in used:
            i += 1
            code = f"{base}{i}" if not base[-1].isdigit() else f"{base}_{i}"
        used.add(code)
        out.append(code)
    return out


def _band_name(lo: float, hi: float | None) -> str:
    f = lambda v: f"{v:g}"  # noqa: E731
    return f"{f(lo)} m+" if hi is None else f"{f(lo)}-{f(hi)} m"


def shore_bands(water: Any, frame: Any, bands_m: Sequence[float]) -> list[tuple[str, Any]]:
    """Strata by distance from shore: edges ``[0, 100, 500]`` give ``0-100 m``, ``100-500 m``, ``500 m+``.

    Distances are to the boundary of ``water`` (island shores included); each band
    is clipped to ``frame``.
    """
    edges = sorted(float(v) for v in bands_m)
    if len(set(edges)) != len(edges) or any(v < 0 for v in edges):
        raise SettingError("area.bands_m", list(bands_m), "distinct distances >= 0 in metres, e.g. [0, 100, 500]")
    out = []
    for i, lo in enumerate(edges):
        hi = edges[i + 1] if i + 1 < len(edges) else None
        band = shore_band(water, lo, hi).intersection(frame)
        out.append((_band_name(lo, hi), _polygonal(band)))
    return out


def _halfplane(geom: Any, origin: np.ndarray, axis: np.ndarray, u: float) -> Any:
    """The part of the plane (over ``geom``'s bounds) where ``(p - origin) . axis <= u``."""
    import shapely

    x0, y0, x1, y1 = geom.bounds
    big = 4.0 * math.hypot(x1 - x0, y1 - y0) + 1.0
    perp = np.array([-axis[1], axis[0]])
    base = origin + axis * u
    corners = [base + perp * big, base + perp * big - axis * big, base - perp * big - axis * big, base - perp * big]
    return shapely.Polygon(corners)


def _split(geom: Any, share: float) -> tuple[Any, Any]:
    """Cut ``geom`` across its long axis so the first piece holds ``share`` of its area."""
    import shapely
    from scipy.optimize import brentq

    rect = shapely.minimum_rotated_rectangle(geom)
    c = np.asarray(rect.exterior.coords)[:4]
    e1, e2 = c[1] - c[0], c[2] - c[1]
    axis = e1 if np.hypot(*e1) >= np.hypot(*e2) else e2
    axis = axis / max(np.hypot(*axis), 1e-300)
    if axis[0] < -1e-12 or (abs(axis[0]) <= 1e-12 and axis[1] < 0):
        axis = -axis  # deterministic direction: west -> east (or south -> north)
    origin = np.asarray(geom.centroid.coords[0])
    coords = shapely.get_coordinates(geom)
    proj = (coords - origin) @ axis
    lo, hi = float(proj.min()), float(proj.max())
    total = geom.area
    target = share * total

    def excess(u: float) -> float:
        return geom.intersection(_halfplane(geom, origin, axis, u)).area - target

    u = brentq(excess, lo, hi, xtol=max(1e-9 * (hi - lo), 1e-9), rtol=1e-12, maxiter=200)
    hp = _halfplane(geom, origin, axis, u)
    a = _polygonal(geom.intersection(hp))
    b = _polygonal(geom.difference(hp))
    return a, b


def compact_zones(frame: Any, k: int) -> list[Any]:
    """Split ``frame`` into ``k`` compact zones of equal area by recursive cuts across the long axis.

    Each cut is a straight line perpendicular to the long side of the piece's
    minimum rotated rectangle, placed (by Brent's root finder) so the two sides
    get areas in the ratio ``floor(k/2) : ceil(k/2)``. Deterministic; areas are
    equal within a relative 1e-6; zones are returned west to east, north to south
    within each cut.

    Examples
    --------
    >>> import shapely
    >>> zones = compact_zones(shapely.box(0, 0, 400, 100), 4)
    >>> [round(z.area) for z in zones]
    [10000, 10000, 10000, 10000]
    """
    if not isinstance(k, (int, np.integer)) or isinstance(k, bool) or k < 1:
        raise SettingError("area.zones", k, "a whole number of zones >= 1")
    if k == 1:
        return [frame]
    left = k // 2
    a, b = _split(frame, left / k)
    return compact_zones(a, left) + compact_zones(b, k - left)


def _strata_from_layer(gdf: Any, field: str | None, frame: Any, notes: list[str]) -> list[tuple[str, Any]]:
    fields = [c for c in gdf.columns if c != gdf.geometry.name]
    if not field:
        raise SettingError("area.strata_field", None, "the attribute of the strata layer that names each stratum "
                           f"(the layer has: {', '.join(map(str, fields)) or 'no attributes'})",
                           fix=f'add strata_field = "{fields[0]}"' if fields else "add a name attribute to the layer")
    if field not in gdf.columns:
        raise LayerError(f"area.strata_field: the strata layer has no field {field!r}; the fields there are: "
                         f"{', '.join(repr(str(c)) for c in fields) or 'none'}. Set strata_field to one of them.")
    values = gdf[field]
    empty = values.isna() | (values.astype(str).str.strip() == "")
    if empty.any():
        rows = ", ".join(str(int(i)) for i in np.flatnonzero(empty.values)[:10])
        raise LayerError(f"area.strata: {int(empty.sum())} feature(s) have no value in field {field!r} "
                         f"(features {rows}); give every stratum polygon a name.")
    out = []
    for name in dict.fromkeys(values.astype(str)):  # first-appearance order
        part = _union(gdf[values.astype(str) == name])
        out.append((name, _polygonal(part.intersection(frame))))
    return out


def _water_body_names(gdf: Any, field: str | None) -> list[str]:
    """One name per feature of the water layer: from ``field``, else ``"Water body N"`` (N counts from 1)."""
    if field is None:
        return [f"Water body {i + 1}" for i in range(len(gdf))]
    if field not in gdf.columns:
        fields = [str(c) for c in gdf.columns if c != gdf.geometry.name]
        raise LayerError(f"area.name_field: the water layer has no field {field!r}; the fields there are: "
                         f"{', '.join(repr(c) for c in fields) or 'none'}. Set name_field to one of them, or remove "
                         'it (the water bodies are then named "Water body 1", "Water body 2"...).')
    out = []
    for i, v in enumerate(gdf[field].tolist()):
        text = "" if v is None else str(v).strip()
        out.append(text if text and text.lower() != "nan" else f"Water body {i + 1}")
    return out


def water_body_strata(gdf: Any, frame: Any, *, name_field: str | None = None,
                      whole_water: bool = False) -> list[tuple[str, Any]]:
    """One stratum per water body of the (projected) water layer, clipped to the frame.

    Features that share a name in ``name_field`` form one water body (the reaches
    of one river, say); a feature without a name is its own, ``"Water body N"``
    after its position in the layer.

    Parameters
    ----------
    gdf : geopandas.GeoDataFrame
        The water layer in the frame CRS, repaired (as :func:`build_frame` projects it).
    frame : shapely geometry
        The frame left after the constraints.
    name_field : str, optional
        Attribute naming each water body.
    whole_water : bool
        True when ``frame`` is the whole water (no constraint removed anything):
        the features are then used as they are, without clipping.

    Returns
    -------
    list of (name, geometry)
        In order of first appearance in the layer; water bodies with no water left
        in the frame have an empty geometry (dropped later with a note).

    Examples
    --------
    >>> import geopandas, shapely
    >>> g = geopandas.GeoDataFrame(geometry=[shapely.box(0, 0, 10, 10), shapely.box(20, 0, 30, 10)], crs=32616)
    >>> [(n, round(p.area)) for n, p in water_body_strata(g, shapely.box(0, 0, 25, 10))]
    [('Water body 1', 100), ('Water body 2', 50)]
    """
    import shapely

    names = _water_body_names(gdf, name_field)
    geoms = np.asarray(gdf.geometry.values, dtype=object)
    groups: dict[str, list[int]] = {}
    for i, n in enumerate(names):
        groups.setdefault(n, []).append(i)
    bodies = [(n, geoms[ix[0]] if len(ix) == 1 else shapely.union_all(geoms[ix])) for n, ix in groups.items()]
    if whole_water:
        return [(n, _polygonal(g)) for n, g in bodies]
    frame_parts = shapely.get_parts(frame)
    tree = shapely.STRtree(frame_parts)
    out = []
    for n, g in bodies:
        near = tree.query(g, predicate="intersects")
        if len(near) == 0:
            out.append((n, shapely.Polygon()))
            continue
        local = frame_parts[near[0]] if len(near) == 1 else shapely.multipolygons(frame_parts[near])
        out.append((n, _polygonal(shapely.intersection(g, local))))
    return out


def _check_overlaps(pieces: list[tuple[str, Any]], frame_area: float, notes: list[str]) -> list[tuple[str, Any]]:
    """Overlapping strata are an error; overlaps below rounding size go to the first stratum."""
    import shapely

    geoms = [g for _, g in pieces]
    tree = shapely.STRtree(geoms)
    left, right = tree.query(geoms, predicate="intersects")
    fixed = list(geoms)
    for i, j in zip(left, right):
        if j <= i:
            continue
        ov = _area(geoms[i].intersection(geoms[j]))
        if ov <= 0:
            continue
        if ov > _SLIVER_RTOL * frame_area:
            raise LayerError(
                f"area.strata: strata {pieces[i][0]!r} and {pieces[j][0]!r} overlap by {_fmt_m2(ov)} "
                f"({100 * ov / frame_area:.3f} % of the frame) inside the frame. Each place must belong to one "
                "stratum: edit the strata layer so the polygons only touch.")
        fixed[j] = _polygonal(fixed[j].difference(geoms[i]))
    return [(n, g) for (n, _), g in zip(pieces, fixed)]


def _finish_strata(pieces: list[tuple[str, Any]], codes: list[str] | None, frame: Any, remainder: str | None,
                   water_area: float, notes: list[str], *, covers: bool = False) -> tuple[Stratum, ...]:
    import shapely

    frame_area = _area(frame)
    pieces = _check_overlaps(pieces, frame_area, notes) if len(pieces) > 1 else pieces
    if covers or (len(pieces) == 1 and pieces[0][1] is frame):  # the pieces cover the frame by construction
        rest, rest_area = shapely.Polygon(), 0.0  # the whole frame is the one stratum
    else:
        covered = _polygonal(shapely.union_all([g for _, g in pieces])) if pieces else shapely.Polygon()
        rest = _polygonal(frame.difference(covered))
        rest_area = _area(rest)
    if rest_area > _SLIVER_RTOL * frame_area:
        if remainder is None:
            raise LayerError(
                f"area.strata: {_fmt_m2(rest_area)} of the frame ({100 * rest_area / frame_area:.2f} % of it) "
                "lies in no stratum polygon. Extend the strata polygons over all the water (they may reach onto "
                'land: they are clipped to the water), or name a stratum for the rest, e.g. remainder = "Other".')
        pieces = pieces + [(str(remainder), rest)]
        if codes is not None:
            codes = codes + [_base_code(str(remainder))]
        notes.append(f"{_fmt_m2(rest_area)} of the frame in no stratum polygon forms the stratum {remainder!r}.")
    kept = []
    kept_codes = []
    for i, (name, g) in enumerate(pieces):
        if _area(g) <= _SLIVER_RTOL * frame_area:
            notes.append(f"stratum {name!r} has no water left in the frame after the constraints; it was dropped.")
            continue
        kept.append((name, g))
        if codes is not None:
            kept_codes.append(codes[i])
    if not kept:
        raise InfeasibleError("no stratum has water left in the frame; check that the strata layer covers the "
                              "water and is in the right place")
    names = [n for n, _ in kept]
    if codes is None:
        kept_codes = stratum_codes(names)
    else:
        uniq = stratum_codes(kept_codes)  # keeps explicit codes, fixes any collision
        kept_codes = uniq
    total = sum(_area(g) for _, g in kept)
    return tuple(Stratum(name=n, code=c, geometry=g, area_m2=_area(g), weight=_area(g) / total)
                 for (n, g), c in zip(kept, kept_codes))


# =========================================================================== access points
def _access_points(access: Any, crs: Any, water: Any, snap_m: float, notes: list[str]) -> list[tuple[str, float, float, float]]:
    """(name, x, y, snapped_m) for each access point, moved onto the water when it is on land nearby."""
    import shapely
    from shapely.ops import nearest_points

    from .layers import name_column

    g = _project(access, crs, "area.access", "point", notes)
    g = g.explode(index_parts=False).reset_index(drop=True)
    col = name_column(g.columns)
    out = []
    shapely.prepare(water)
    for i, geom in enumerate(g.geometry.values):
        raw = g[col].iloc[i] if col else None
        name = str(raw) if raw is not None and str(raw).strip() and str(raw) != "nan" else f"Access {i + 1}"
        dist = float(water.distance(geom))
        if dist > snap_m:
            raise LayerError(
                f"area.access: access point {name!r} is {dist:,.0f} m from the water, farther than access_snap_m = "
                f"{snap_m:g} m. Move the point to the shore, remove it, or raise access_snap_m in [area].")
        x, y = geom.x, geom.y
        if dist > 0:
            p = nearest_points(water, geom)[0]
            x, y = p.x, p.y
            if dist >= 1.0:  # closer than a metre is drawing precision, not a point on land
                notes.append(f"access point {name!r} is {dist:,.1f} m from the water (on land); it was moved to "
                             "the nearest shore.")
        out.append((name, float(x), float(y), dist))
    return out


def _routed_water(water: Any, points: Sequence[AccessPoint], snap_m: float) -> tuple[Any, int, int]:
    """The water the router covers: all of it, or, when it holds many separate water bodies,
    only those within ``snap_m`` of an access point (no over-water path leads to the others).

    Returns the geometry, the number of water bodies and the number routed.
    """
    import shapely

    parts = shapely.get_parts(water)
    if len(parts) <= _ROUTE_ALL_BODIES_UP_TO:
        return water, len(parts), len(parts)
    xy = shapely.points([[p.x, p.y] for p in points])
    _, hit = shapely.STRtree(parts).query(xy, predicate="dwithin", distance=max(snap_m, 0.0) + 1.0)
    keep = np.unique(hit)
    return shapely.multipolygons(parts[keep]) if len(keep) > 1 else parts[keep[0]], len(parts), len(keep)


# =========================================================================== the frame
def _single_name(gdf: Any) -> str:
    from .layers import name_column

    col = name_column(gdf.columns)
    if col:
        vals = {str(v) for v in gdf[col] if v is not None and str(v).strip() and str(v) != "nan"}
        if len(vals) == 1:
            return vals.pop()
    return "Whole frame"


def _step(progress: Progress | None, name: str) -> None:
    log.info(name)
    if progress is not None:
        progress(name)


def build_frame(
    water: Any,
    *,
    exclude: Sequence[tuple[str, Any]] = (),
    access: Any = None,
    reach_m: float | None = None,
    shore_m: Sequence[float] | None = None,
    strata: Any = None,
    strata_field: str | None = None,
    bands_m: Sequence[float] | None = None,
    zones: int | None = None,
    remainder: str | None = None,
    access_snap_m: float = 200.0,
    reach_resolution_m: float | None = None,
    name_field: str | None = None,
    progress: Progress | None = None,
) -> Frame:
    """Build the sampling frame from the plan's layers.

    Parameters
    ----------
    water : geopandas.GeoDataFrame
        Polygon layer of the water body, any CRS.
    exclude : sequence of (label, GeoDataFrame)
        Polygon layers removed from the frame, each recorded as ``"exclude: <label>"``.
    access : geopandas.GeoDataFrame, optional
        Point layer of launches; names from a ``name`` column, else ``"Access 1"``...
        Whenever given, :attr:`Frame.router` holds a :class:`WaterRouter`.
    reach_m : float, optional
        Keep water within this over-water travel distance of the nearest access point.
    shore_m : (min, max), optional
        Keep water whose distance to the shore (islands included) lies in ``[min, max]``.
    strata : GeoDataFrame, "shore-bands", "zones", "water-bodies" or None
        The strata; None gives one stratum named after the water layer (its single
        ``name`` value) or ``"Whole frame"``; ``"water-bodies"`` one stratum per
        feature of the water layer (see :func:`water_body_strata`).
    strata_field : str, optional
        Attribute of the strata layer naming each stratum.
    bands_m : sequence of float, optional
        Band edges for ``strata="shore-bands"``.
    zones : int, optional
        Number of compact equal-area zones for ``strata="zones"``.
    remainder : str, optional
        Name of a stratum for frame water in no stratum polygon (else that is an error).
    access_snap_m : float
        Access points on land at most this far from the water move to the nearest shore.
    reach_resolution_m : float, optional
        Grid cell of the reach distance field (default chosen from the water area).
    name_field : str, optional
        Attribute of the water layer naming each water body (for ``strata="water-bodies"``).
    progress : callable, optional
        Called with a step name at the start of each step that can take seconds.

    Returns
    -------
    Frame

    Raises
    ------
    LayerError
        Unusable layers, an access point too far from the water, overlapping strata,
        water in no stratum, an unknown strata field.
    SettingError
        Inconsistent settings (``reach_m`` without access points, bad bands...).
    InfeasibleError
        Nothing is left after the constraints (the message lists what each removed).

    Examples
    --------
    >>> import geopandas, shapely
    >>> lake = geopandas.GeoDataFrame(geometry=[shapely.box(500000, 5094000, 501000, 5095000)], crs=32616)
    >>> frame = build_frame(lake, shore_m=(0, 100))
    >>> round(frame.area_m2), frame.strata[0].name, frame.removed[0].constraint
    (360000, 'Whole frame', 'shore_m')
    """
    import shapely

    notes: list[str] = []
    _check_gdf(water, "area.water", "polygon")
    layer_notes = _layer_notes(water)  # already logged by read_layer
    _step(progress, "choosing the frame CRS")
    choice = choose_crs(water)
    crs = choice.crs
    _step(progress, "projecting and repairing the layers")
    wgdf = _project(water, crs, "area.water", "polygon", notes)
    water_geom = _union(wgdf)
    water_area = _area(water_geom)
    if water_area <= 0:
        raise LayerError("area.water: the water layer has no area (degenerate polygons). Give real polygons.")
    removed: list[Removal] = []
    frame_geom = water_geom

    def record(label: str, before: Any, after: Any, detail: str) -> None:
        a = max(_area(before) - _area(after), 0.0)
        removed.append(Removal(constraint=label, area_m2=a, percent_of_water=100.0 * a / water_area, detail=detail))

    # ---- exclusions
    excl_union = []
    if exclude:
        _step(progress, "removing the exclusion zones")
    for i, item in enumerate(exclude or ()):
        label, gdf = item if isinstance(item, tuple) else (f"exclusion {i + 1}", item)
        layer_notes += _layer_notes(gdf)
        eg = _union(_project(gdf, crs, f"area.exclude ({label})", "polygon", notes))
        excl_union.append(eg)
        after = _polygonal(frame_geom.difference(eg))
        record(f"exclude: {label}", frame_geom, after, f"polygons of {label} removed")
        frame_geom = after
    exclusions = _polygonal(shapely.union_all(excl_union)) if excl_union else None

    # ---- shore band
    if shore_m is not None:
        lo, hi = (float(v) for v in shore_m)
        if lo < 0 or hi < lo:
            raise SettingError("area.shore_m", list(shore_m), "[min, max] in metres with 0 <= min <= max")
        _step(progress, "keeping the shore band")
        after = _polygonal(frame_geom.intersection(shore_band(water_geom, lo, hi)))
        record("shore_m", frame_geom, after, f"kept water {lo:g}-{hi:g} m from the shore (islands included)")
        frame_geom = after

    # ---- access and reach
    points: list[AccessPoint] = []
    router = None
    if reach_m is not None and access is None:
        raise SettingError("area.reach_m", reach_m, "reach_m together with an access point layer",
                           fix='add access = "launches.geojson", or remove reach_m')
    if reach_m is not None and not (isinstance(reach_m, (int, float)) and not isinstance(reach_m, bool)
                                    and math.isfinite(reach_m) and reach_m > 0):
        raise SettingError("area.reach_m", reach_m, "a positive number of metres")
    if access is not None:
        layer_notes += _layer_notes(access)
        raw = _access_points(access, crs, water_geom, float(access_snap_m), notes)
        lon, lat = to_lonlat(crs, [p[1] for p in raw], [p[2] for p in raw])
        points = [AccessPoint(name=n, x=x, y=y, lat=float(la), lon=float(lo_), snapped_m=s)
                  for (n, x, y, s), lo_, la in zip(raw, lon, lat)]
        _step(progress, "building the over-water router")
        routed, n_bodies, n_routed = _routed_water(water_geom, points, float(access_snap_m))
        if n_routed < n_bodies and reach_m is None:
            raise SettingError(
                "area.reach_m", None, "reach_m when access points are given for a water layer of "
                f"more than {_ROUTE_ALL_BODIES_UP_TO} separate water bodies",
                fix=f"the water layer holds {n_bodies} separate water bodies and only {n_routed} of them have an "
                    "access point, so sites in the others could not be reached over water: add reach_m (keeps "
                    "the water reachable from the access points), or remove access (routes then follow straight "
                    "lines)")
        if n_routed < n_bodies:
            notes.append(f"the over-water router covers the {n_routed} of {n_bodies} separate water bodies that hold "
                         "an access point; reach_m removes the others.")
        router = WaterRouter(routed)
    if reach_m is not None:
        _step(progress, "measuring the over-water reach from the access points")
        zone, info = router.reach_zone([[p.x, p.y] for p in points], float(reach_m),
                                       resolution_m=reach_resolution_m)
        after = zone if frame_geom is water_geom else _polygonal(frame_geom.intersection(zone))
        record("reach_m", frame_geom, after,
               f"kept water within {reach_m:g} m over water of the nearest access point (grid {info['cell_m']:.1f} m, "
               f"stated error at most {info['error_m']:.0f} m)")
        frame_geom = after

    if _area(frame_geom) <= 0:
        raise InfeasibleError("nothing is left of the water after the constraints: "
                              + _removal_table(water_area, removed)
                              + ". Relax the constraint that removed the most (fewer exclusions, a wider shore_m, "
                                "a larger reach_m, or more access points).")

    # ---- strata
    codes = None
    covers = False
    if strata is None:
        pieces = [(_single_name(wgdf), frame_geom)]
    elif isinstance(strata, str) and strata == "shore-bands":
        if not bands_m:
            raise SettingError("area.bands_m", bands_m, "a list of band edges in metres, e.g. [0, 100, 500]",
                               fix='strata = "shore-bands" needs bands_m')
        _step(progress, "cutting the shore bands")
        pieces = shore_bands(water_geom, frame_geom, bands_m)
        codes = [f"S{i + 1}" for i in range(len(pieces))]
    elif isinstance(strata, str) and strata == "zones":
        if not zones:
            raise SettingError("area.zones", zones, "a whole number of zones >= 1",
                               fix='strata = "zones" needs zones = k')
        _step(progress, "cutting compact zones")
        pieces = [(f"Zone {i + 1}", z) for i, z in enumerate(compact_zones(frame_geom, int(zones)))]
        codes = [f"Z{i + 1}" for i in range(len(pieces))]
    elif isinstance(strata, str) and strata == "water-bodies":
        _step(progress, "making one stratum per water body")
        pieces = water_body_strata(wgdf, frame_geom, name_field=name_field, whole_water=frame_geom is water_geom)
        covers = True
    elif isinstance(strata, str):
        raise SettingError("area.strata", strata, 'a polygon layer, "shore-bands", "zones" or "water-bodies"')
    else:
        _check_gdf(strata, "area.strata", "polygon")
        layer_notes += _layer_notes(strata)
        _step(progress, "clipping the strata to the frame")
        sg = _project(strata, crs, "area.strata", "polygon", notes)
        pieces = _strata_from_layer(sg, strata_field, frame_geom, notes)
    strata_t = _finish_strata(pieces, codes, frame_geom, remainder, water_area, notes, covers=covers)
    for n in notes:
        log.warning(n)
    return Frame(
        crs=crs,
        crs_reason=choice.reason,
        water=water_geom,
        exclusions=exclusions,
        strata=strata_t,
        water_area_m2=water_area,
        removed=tuple(removed),
        access=tuple(points),
        warnings=tuple(dict.fromkeys(layer_notes + notes)),
        router=router,
    )
