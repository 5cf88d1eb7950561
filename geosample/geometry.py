"""Layers -> sampling frame: CRS choice, repair, constraints, strata.

:func:`build_frame` turns the plan's ``[area]`` layers (GeoDataFrames, read by
:func:`geosample.layers.read_layer`) into a :class:`~geosample.model.Frame`:

1. choose a metric CRS (:func:`choose_crs`) and project every layer to it;
2. remove the exclusion layers, one :class:`~geosample.model.Removal` row each;
3. keep the shore band ``shore_m = (min, max)`` (distance to the water polygon's
   boundary, island shores included);
4. keep the water within ``reach_m`` of travel over water from the nearest access
   point (:class:`WaterRouter`), going around islands and peninsulas;
5. split what is left into strata (a layer, ``"shore-bands"`` or ``"zones"``).

Over-water distances and the reach zone come from
:class:`geosample.router.WaterRouter` (re-exported here).
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
from .names import check_unique, stratum_name
from .router import GRID_RELATIVE_ERROR, WaterRouter
from .shapes import polygonal as _polygonal

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
    """The layer's bounds in WGS 84 lon/lat.

    Only the bounding box is transformed (its edges densified, as geopandas'
    ``estimate_utm_crs`` does), not every vertex of the layer: for a projected
    layer the result contains the exact lon/lat bounds of the data.
    """
    x0, y0, x1, y1 = (float(v) for v in gdf.total_bounds)
    if gdf.crs is not None and gdf.crs.to_epsg() == 4326:
        return x0, y0, x1, y1
    from pyproj import CRS, Transformer

    t = Transformer.from_crs(CRS.from_user_input(gdf.crs), "EPSG:4326", always_xy=True)
    lon0, lat0, lon1, lat1 = t.transform_bounds(x0, y0, x1, y1, densify_pts=21)
    return float(lon0), float(lat0), float(lon1), float(lat1)


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
    geoms = np.asarray(g.geometry.values, dtype=object)
    if shapely.has_z(geoms).any():  # a copy of a regional layer costs memory: only when needed
        geoms = shapely.force_2d(geoms)
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

    geoms = np.asarray(geoms, dtype=object)
    # single polygons are their own parts: no copy of a regional layer
    parts = geoms if np.all(shapely.get_type_id(geoms) == 3) else shapely.get_parts(geoms)
    parts = parts[~shapely.is_empty(parts)]
    if len(parts) < _MANY_PARTS or not np.all(shapely.get_type_id(parts) == 3):  # 3: Polygon
        return None
    left, right = shapely.STRtree(parts).query(parts, predicate="intersects")
    return parts if bool(np.all(left == right)) else None


#: Smallest water area (m²) a design is made for; less is a drawing or CRS error.
MIN_WATER_M2 = 1.0


def _check_shore_reachable(water: Any, lo: float, hi: float) -> None:
    """When shore_m keeps nothing because the water is nowhere ``lo`` m from its shore, say so (not "widen shore_m").

    The farthest any place is from the shore is the radius of the largest circle inside the water
    (``shapely.maximum_inscribed_circle``, per part).
    """
    import shapely

    parts = shapely.get_parts(water)
    radius = max(shapely.length(shapely.maximum_inscribed_circle(p, max(math.sqrt(p.area) * 1e-4, 1e-6)))
                 for p in parts)
    if radius >= lo:
        return  # the band exists in the water; another constraint removed it (the table says which)
    sliver = radius < 1.0
    raise SettingError(
        "area.shore_m", [lo, hi] if not float(lo).is_integer() or not float(hi).is_integer() else [int(lo), int(hi)],
        f"a minimum below {radius:.2g} m: the water is nowhere more than {radius:.2g} m from its shore (at most "
        f"{2 * radius:.2g} m across)",
        fix=("the water polygon is a sliver, most likely a drawing error: check the water layer" if sliver else
             f"lower the minimum of shore_m below {radius:.2g} m, or remove shore_m"))


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
    names = [stratum_name(v, setting=f"area.strata ({field})", where=f"feature {i}")
             for i, v in enumerate(values.tolist())]
    check_unique([(n, f"feature {i}") for i, n in enumerate(names)], setting=f"area.strata ({field})",
                 fix="a stratum is one feature (a MultiPolygon for a stratum in several parts): merge those "
                     "features in the GIS, or give them different names")
    import shapely

    geoms = [g if shapely.is_valid(g) else shapely.make_valid(g) for g in gdf.geometry.values]
    return [(name, _polygonal(geoms[i].intersection(frame))) for i, name in enumerate(names)]


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
        named = text and text.lower() != "nan"
        out.append(stratum_name(text, setting=f"area.name_field ({field})", where=f"feature {i}") if named
                   else f"Water body {i + 1}")
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
        if remainder is not None:
            remainder = stratum_name(remainder, setting="area.remainder")
            check_unique([(n, f"stratum {n!r}") for n, _ in pieces] + [(remainder, "area.remainder")],
                         setting="area.remainder", fix="name the rest of the water differently from every stratum")
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
        # vectorised: a regional layer can hold a million names
        text = gdf[col].dropna().astype(str)
        text = text[(text.str.strip() != "") & (text != "nan")]
        if len(text) and (text == text.iloc[0]).all():
            return str(text.iloc[0])
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
    if water_area < MIN_WATER_M2:
        raise LayerError(f"area.water: the water covers {water_area:.2g} m², smaller than {MIN_WATER_M2:g} m²: "
                         "no water body to sample. The polygon is a drawing error, or its coordinates are not in "
                         "the units its CRS says (e.g. kilometres in a CRS of metres): check the layer and its CRS.")
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
        if _area(after) <= 0:
            _check_shore_reachable(water_geom, lo, hi)
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
