"""sites.gpkg (geosample/export/gpkg.py), read back with pyogrio (GDAL's GeoPackage driver) and sqlite3.

The GeoPackage standard (OGC 12-128r18) keeps each layer's last change in gpkg_contents.last_change;
GDAL fills it with the clock unless OGR_CURRENT_DATE is set (GDAL GPKG driver documentation), so the file
is written with a fixed date and the same design gives the same bytes.
"""
from __future__ import annotations

import hashlib
import sqlite3

import pyogrio
import pytest
import shapely

from fixtures_design import SITES, build_design
from geosample.export.gpkg import FIXED_DATE, LAYERS, write_gpkg


@pytest.fixture(scope="module")
def gpkg(tmp_path_factory):
    return write_gpkg(build_design(), tmp_path_factory.mktemp("g") / "sites.gpkg")


def test_layers_crs_and_counts(gpkg):
    assert [name for name, _ in pyogrio.list_layers(gpkg)] == list(LAYERS)
    sites = pyogrio.read_dataframe(gpkg, layer="sites")
    assert sites.crs.to_epsg() == 32616  # the frame's CRS
    assert sorted(sites["site_id"]) == sorted(s[0] for s in SITES)
    xy = {s[0]: (s[4], s[5]) for s in SITES}
    for sid, geom in zip(sites["site_id"], sites.geometry):
        assert (geom.x, geom.y) == pytest.approx(xy[sid])
    assert dict(zip(sites["site_id"], sites["label"]))["NB-005"] == "NB-R2"
    assert sites["reserve_rank"].dtype.kind == "i" and sites["lat"].dtype.kind == "f"
    assert "result" not in sites.columns  # the crew's blanks stay in schedule.csv
    routes = pyogrio.read_dataframe(gpkg, layer="routes")
    assert list(routes["name"]) == ["Day 1 2027-06-14", "Day 2 2027-06-16"]
    d = build_design()
    assert [list(g.coords) for g in routes.geometry] == [list(r.coords_xy) for r in d.schedule.routes]
    strata = pyogrio.read_dataframe(gpkg, layer="strata")
    assert list(strata["code"]) == ["NB", "SB"]
    frame = pyogrio.read_dataframe(gpkg, layer="frame")
    assert frame.geometry[0].area == pytest.approx(d.frame.area_m2, rel=1e-9)
    ex = pyogrio.read_dataframe(gpkg, layer="exclusions")
    assert shapely.equals(ex.geometry[0].normalize(), shapely.MultiPolygon([d.frame.exclusions]).normalize())
    access = pyogrio.read_dataframe(gpkg, layer="access")
    assert list(access["name"]) == ["West launch"]


def test_fixed_date_and_identical_bytes(gpkg, tmp_path):
    with sqlite3.connect(gpkg) as con:
        stamps = {row[0] for row in con.execute("select last_change from gpkg_contents")}
    assert stamps == {FIXED_DATE}
    again = write_gpkg(build_design(), tmp_path / "again.gpkg")
    assert hashlib.sha256(again.read_bytes()).digest() == hashlib.sha256(gpkg.read_bytes()).digest()
    assert pyogrio.get_gdal_config_option("OGR_CURRENT_DATE") is None  # restored after writing


def test_empty_layers_without_access_or_exclusions(tmp_path):
    import dataclasses

    d = build_design()
    frame = dataclasses.replace(d.frame, access=(), exclusions=None)
    path = write_gpkg(dataclasses.replace(d, frame=frame), tmp_path / "e.gpkg")
    assert [n for n, _ in pyogrio.list_layers(path)] == list(LAYERS)
    assert len(pyogrio.read_dataframe(path, layer="access")) == 0
