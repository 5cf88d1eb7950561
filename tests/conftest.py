"""Shared fixtures: small layers built in code and written to temporary folders.

Add fixtures here only when more than one test module needs them; keep each one
small (a few features) so the default test run stays fast.
"""
from __future__ import annotations

from pathlib import Path
from typing import Callable

import geopandas
import pytest
import shapely

# A spot of open land; the water bodies drawn here are invented.
LON0, LAT0 = -97.55, 46.05


def invented_lakes(n: int, seed: int = 1) -> geopandas.GeoDataFrame:
    """n invented round lakes (radius 50-400 m, 16-32 vertices) on a jittered 1 km grid, UTM 16N,
    named "Lake 1".."Lake n" (shared by the many-lakes tests and benchmarks)."""
    import numpy as np

    rng = np.random.default_rng(seed)
    g = int(np.ceil(np.sqrt(n)))
    cell = rng.permutation(g * g)[:n]
    cx = 500_000 + (cell % g) * 1000.0 + 500 + rng.uniform(-50, 50, n)
    cy = 4_800_000 + (cell // g) * 1000.0 + 500 + rng.uniform(-50, 50, n)
    r = np.exp(rng.uniform(np.log(50), np.log(400), n))
    polys = shapely.buffer(shapely.points(cx, cy), r, quad_segs=rng.integers(4, 9))
    return geopandas.GeoDataFrame({"name": [f"Lake {i + 1}" for i in range(n)]}, geometry=polys, crs=32616)


def lonlat_box(dlon0: float, dlat0: float, dlon1: float, dlat1: float) -> shapely.Polygon:
    """A lon/lat rectangle given as offsets in degrees from (LON0, LAT0)."""
    return shapely.box(LON0 + dlon0, LAT0 + dlat0, LON0 + dlon1, LAT0 + dlat1)


@pytest.fixture
def write_layer(tmp_path: Path) -> Callable[..., Path]:
    """``write_layer(name, gdf, driver=None, layer=None)`` writes ``gdf`` under a temporary folder.

    The driver follows from the file name (GeoJSON, GPKG, ESRI Shapefile) unless given.
    Returns the path.
    """

    def write(name: str, gdf: geopandas.GeoDataFrame, driver: str | None = None, layer: str | None = None) -> Path:
        path = tmp_path / name
        kwargs = {"engine": "pyogrio"}
        if driver:
            kwargs["driver"] = driver
        if layer:
            kwargs["layer"] = layer
        gdf.to_file(path, **kwargs)
        return path

    return write


@pytest.fixture
def lake_lonlat() -> geopandas.GeoDataFrame:
    """An invented lake about 2.3 km x 1.1 km in WGS 84 lon/lat, with one island (a hole)."""
    outer = lonlat_box(0.0, 0.0, 0.03, 0.01)
    island = lonlat_box(0.012, 0.004, 0.016, 0.006)
    return geopandas.GeoDataFrame({"name": ["Tarn Wessel"]}, geometry=[outer.difference(island)], crs=4326)


@pytest.fixture
def square_lake() -> geopandas.GeoDataFrame:
    """A 2 km square lake in UTM zone 14N metres (no islands)."""
    x0, y0 = 610000.0, 5100000.0
    return geopandas.GeoDataFrame({"name": ["Square Pond"]}, geometry=[shapely.box(x0, y0, x0 + 2000, y0 + 2000)],
                                  crs=32614)


@pytest.fixture(autouse=True, scope="session")
def _history_store(tmp_path_factory):
    """Keep the per-user draw history of every test run out of the real user's data folder."""
    import os

    old = os.environ.get("GEOSAMPLE_HISTORY_DIR")
    os.environ["GEOSAMPLE_HISTORY_DIR"] = str(tmp_path_factory.mktemp("draw-history"))
    yield
    if old is None:
        os.environ.pop("GEOSAMPLE_HISTORY_DIR", None)
    else:
        os.environ["GEOSAMPLE_HISTORY_DIR"] = old
