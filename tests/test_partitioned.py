"""Draws from a partitioned frame (dask-geopandas) equal local draws of the same polygons.

Reference: the project's own local draw (space.draw_sites) on a Frame holding the same
polygons, with the same seed and stratum name; the claim tested is exact equality of every
site's coordinates and order. shapely.contains_xy checks independently that each site
lies in a lake.
"""
from __future__ import annotations

import dask
import dask_geopandas
import numpy as np
import pyproj
import pytest
import shapely

from conftest import invented_lakes
from geosample.errors import SettingError
from geosample.model import Allocation, Frame, Stratum
from geosample.randomizer import space
from geosample.randomizer.partitioned import draw_partitioned, partitioned_frame


def lakes(n: int):
    return invented_lakes(n, seed=3)


def local_draw(gdf, n, method, reserve, seed):
    region = shapely.multipolygons(list(gdf.geometry))
    frame = Frame(crs=pyproj.CRS("EPSG:32616"), crs_reason="test", water=region, exclusions=None,
                  strata=(Stratum("Region", "RG", region, region.area, 1.0),), water_area_m2=region.area)
    alloc = Allocation(("Region",), (n,), n, "proportional", "chebyshev", "two", 0.95, None, 0.05, None, (1.0,))
    return space.draw_sites(frame, alloc, method=method, reserve=reserve, seed=seed, measure_balance=False)


@pytest.mark.parametrize("method", ["balanced", "simple"])
@pytest.mark.parametrize("npartitions", [1, 7])
def test_partitioned_draw_equals_the_local_draw(method, npartitions):
    gdf = lakes(2000)
    ddf = dask_geopandas.from_geopandas(gdf, npartitions=npartitions)
    with dask.config.set(scheduler="threads"):
        frame = partitioned_frame(ddf)
        far = draw_partitioned(frame, 150, method=method, reserve=0.5, seed=2027, name="Region", code="RG")
    near = local_draw(gdf, 150, method, 0.5, 2027)
    assert [s.site_id for s in far.sites] == [s.site_id for s in near.sites]
    np.testing.assert_array_equal([(s.x, s.y) for s in far.sites], [(s.x, s.y) for s in near.sites])
    assert [s.role for s in far.sites].count("reserve") == 75
    xy = np.array([(s.x, s.y) for s in far.sites])
    assert shapely.contains_xy(shapely.multipolygons(list(gdf.geometry)), xy[:, 0], xy[:, 1]).all()
    assert frame.area_m2 == pytest.approx(gdf.area.sum(), rel=1e-12)


def test_partitioned_draw_refuses_methods_that_need_the_whole_frame():
    ddf = dask_geopandas.from_geopandas(lakes(50), npartitions=2)
    with dask.config.set(scheduler="threads"):
        frame = partitioned_frame(ddf)
        with pytest.raises(SettingError, match="draw.method"):
            draw_partitioned(frame, 10, method="grts", seed=1)


def test_a_geographic_layer_needs_a_metric_crs():
    ddf = dask_geopandas.from_geopandas(lakes(20).to_crs(4326), npartitions=1)
    with pytest.raises(SettingError, match="projected CRS in metres"):
        partitioned_frame(ddf)
