"""Draws from a frame held in partitions (dask-geopandas), for frames beyond one machine.

A regional frame of a million lakes fits on one machine (``docs/performance.md``), but
a frame of many millions, or one kept on a cluster, need not: it can be read in
partitions (``dask_geopandas.read_file``), sorted along a Hilbert curve so each
partition holds nearby lakes (``spatial_shuffle(by="hilbert")``), and drawn from
without ever being gathered.

The draw is the same as :func:`geosample.randomizer.space.draw_sites` on the whole
frame: the ``simple`` and ``balanced`` draws keep, in stream order, the points of one
global candidate stream (uniform or random-start Halton points of the frame's bounding
box) that fall in the frame, and which candidates are kept does not depend on how the
stream is cut into batches. Here each batch of candidates is sent to every partition,
each partition answers which of them fall in its lakes, and the answers are joined.
With the same seed and stratum name, the sites are exactly those of a local draw of the
same polygons (tested). Spacing and GRTS need the whole frame at once and are refused.

Use it when the frame's layer does not fit in memory or already lives on a cluster;
below a few million lakes the local draw (``geosample plan``) is simpler and faster.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import SettingError
from ..model import SiteDraw
from ..rng import stream
from . import space

__all__ = ["PartitionedFrame", "partitioned_frame", "draw_partitioned", "PARTITIONED_METHODS"]

#: Draw methods that work from partitions (both keep points of one global candidate stream).
PARTITIONED_METHODS = ("simple", "balanced")


def _prepare(part: Any) -> tuple[tuple[float, float, float, float], Any, Any]:
    """One partition's lakes ready for point tests: bounds, geometry array, STRtree."""
    import shapely

    geoms = np.asarray(part.geometry.values, dtype=object)
    geoms = geoms[~shapely.is_empty(geoms)] if len(geoms) else geoms
    if not len(geoms):
        return (np.inf, np.inf, -np.inf, -np.inf), geoms, None
    shapely.prepare(geoms)
    x0, y0, x1, y1 = shapely.total_bounds(geoms)
    return (float(x0), float(y0), float(x1), float(y1)), geoms, shapely.STRtree(geoms)


def _inside(prepared: tuple, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Indices of the points (x, y) that fall inside one of the partition's lakes (boundary excluded,
    as ``shapely.contains_xy``)."""
    import shapely

    (x0, y0, x1, y1), geoms, tree = prepared
    if tree is None:
        return np.zeros(0, dtype=np.int64)
    near = np.flatnonzero((x > x0) & (x < x1) & (y > y0) & (y < y1))
    if not near.size:
        return near
    pts = shapely.points(x[near], y[near])
    point_idx, geom_idx = tree.query(pts, predicate="intersects")
    hit = shapely.contains_xy(geoms[geom_idx], x[near][point_idx], y[near][point_idx])
    return np.unique(near[point_idx[hit]])


def _bounds(prepared: tuple) -> tuple[float, float, float, float]:
    return prepared[0]


def _area(part: Any) -> float:
    return float(part.geometry.area.sum())


@dataclass(frozen=True)
class PartitionedFrame:
    """A one-stratum frame held in partitions: the prepared partitions, bounds and area.

    Attributes
    ----------
    parts : list
        Persisted dask objects, one per partition (bounds, geometries, STRtree).
    bounds : tuple
        The frame's bounding box in its metric CRS.
    area_m2 : float
        The frame's area (the lakes are disjoint: the sum of their areas).
    crs : pyproj.CRS
        The frame's metric CRS.
    npartitions : int
    """

    parts: tuple
    bounds: tuple[float, float, float, float]
    area_m2: float
    crs: Any
    npartitions: int


def partitioned_frame(ddf: Any, *, crs: Any = None, hilbert: bool = True) -> PartitionedFrame:
    """Prepare a dask-geopandas GeoDataFrame of disjoint lakes for :func:`draw_partitioned`.

    Parameters
    ----------
    ddf : dask_geopandas.GeoDataFrame
        The lakes (polygons), e.g. from ``dask_geopandas.read_file(path, npartitions=k)``.
    crs : optional
        The metric CRS to draw in; default: the layer's own CRS, which must then be
        projected in metres (use :func:`geosample.geometry.choose_crs` on a sample).
    hilbert : bool
        Sort the lakes along a Hilbert curve first (``spatial_shuffle``), so each partition
        covers a compact part of the region and most candidates skip most partitions.
    """
    import dask
    from pyproj import CRS

    if ddf.crs is None:
        raise SettingError("frame layer CRS", None, "a layer with a CRS", fix="set one with set_crs")
    target = CRS.from_user_input(crs) if crs is not None else CRS.from_user_input(ddf.crs)
    if not target.is_projected or abs(target.axis_info[0].unit_conversion_factor - 1.0) > 1e-12:
        raise SettingError("crs", target.name, "a projected CRS in metres",
                           fix="pass crs= (e.g. the frame CRS geosample.geometry.choose_crs picks)")
    if CRS.from_user_input(ddf.crs) != target:
        ddf = ddf.to_crs(target)
    if hilbert and ddf.npartitions > 1:
        ddf = ddf.spatial_shuffle(by="hilbert")
    parts = [dask.delayed(_prepare)(p) for p in ddf.to_delayed()]
    parts = dask.persist(*parts)
    bounds = dask.compute(*[dask.delayed(_bounds)(p) for p in parts])
    area = float(sum(dask.compute(*[dask.delayed(_area)(p) for p in ddf.to_delayed()])))
    x0 = min(b[0] for b in bounds)
    y0 = min(b[1] for b in bounds)
    x1 = max(b[2] for b in bounds)
    y1 = max(b[3] for b in bounds)
    return PartitionedFrame(tuple(parts), (x0, y0, x1, y1), area, target, len(parts))


class _PartitionedRegion(space._Region):
    """The draw's view of a partitioned frame: bounds, area and a point test answered by the partitions."""

    def __init__(self, frame: PartitionedFrame):  # no call to super: there is no single geometry
        self.geom = None
        self.area = frame.area_m2
        self.bounds = frame.bounds
        x0, y0, x1, y1 = self.bounds
        self.box_area = (x1 - x0) * (y1 - y0)
        self.share = self.area / self.box_area if self.box_area > 0 else 0.0
        self._frame = frame
        self._grid = None
        self._use_grid = False
        self._pieces = None

    def contains(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        import dask

        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        found = dask.compute(*[dask.delayed(_inside)(p, x, y) for p in self._frame.parts])
        out = np.zeros(len(x), dtype=bool)
        for idx in found:
            out[idx] = True
        return out


def draw_partitioned(frame: PartitionedFrame, n: int, *, method: str = "balanced", reserve: float = 0.5,
                     seed: int | np.random.SeedSequence, name: str = "Frame", code: str = "FR") -> SiteDraw:
    """Primary and reserve sites from a partitioned frame, exactly as a local draw of one stratum.

    Parameters
    ----------
    frame : PartitionedFrame
        From :func:`partitioned_frame`.
    n : int
        Primary sites; ``ceil(reserve * n)`` reserves follow in rank order.
    method : {"simple", "balanced"}
    seed : int or SeedSequence
        The design's root seed; the stream is ``stream(seed, "space/<name>")`` as in
        :func:`geosample.randomizer.space.draw_sites`, so a local draw of a stratum of the
        same name over the same polygons gives the same sites.
    name, code : str
        The stratum's name and site-id code.

    Returns
    -------
    SiteDraw
        ``balance`` is None (the Voronoi measure needs the whole frame).
    """
    if method not in PARTITIONED_METHODS:
        raise SettingError("draw.method", method, " or ".join(PARTITIONED_METHODS) + " for a partitioned frame",
                           fix="use balanced (or simple); GRTS and spacing need the whole frame at once")
    n = space._check_count(name, n)
    reserve = space._check_reserve(reserve)
    n_total = n + space._reserve_count(reserve, n)
    region = _PartitionedRegion(frame)
    rng = stream(seed, f"space/{name}")
    drawer = space._method(method)
    xy = drawer(region, n_total, rng) if n_total else np.zeros((0, 2))
    lon, lat = space._lonlat_transformer(frame.crs)(xy[:, 0], xy[:, 1])
    sites = space._site_records(name, code, n, xy, lon, lat)
    return SiteDraw(sites=tuple(sites), method=method, reserve=reserve, spacing_m=None,
                    balance={name: None}, warnings=())
