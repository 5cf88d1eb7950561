"""Reading layers: formats, CRS, geometry kinds, repairs and the messages of refusals."""
from __future__ import annotations

import geopandas
import pytest
import shapely

from conftest import lonlat_box
from geosample.errors import GeosampleError, InputFileError, LayerError, SettingError
from geosample.layers import read_layer


def _gdf(geoms, crs=4326, **cols):
    return geopandas.GeoDataFrame(cols or None, geometry=list(geoms), crs=crs)


def test_reads_geojson_and_keeps_attributes(write_layer, lake_lonlat):
    path = write_layer("lake.geojson", lake_lonlat)
    gdf = read_layer(path)
    assert gdf.crs.to_epsg() == 4326
    assert list(gdf["name"]) == ["Tarn Wessel"]
    assert gdf.attrs["geosample_warnings"] == []
    # same polygon back (GeoJSON keeps 7+ decimals)
    assert gdf.geometry.iloc[0].symmetric_difference(lake_lonlat.geometry.iloc[0]).area < 1e-12


def test_reads_geopackage_layer_by_name(write_layer, lake_lonlat):
    path = write_layer("layers.gpkg", lake_lonlat, layer="water")
    zones = _gdf([lonlat_box(0, 0, 0.01, 0.01)], zone=["West"])
    zones.to_file(path, layer="zones", engine="pyogrio")
    water = read_layer(path, layer="water")
    strata = read_layer(path, layer="zones", what="strata")
    assert list(water["name"]) == ["Tarn Wessel"] and list(strata["zone"]) == ["West"]


def test_geopackage_with_several_layers_needs_a_layer_name(write_layer, lake_lonlat):
    path = write_layer("layers.gpkg", lake_lonlat, layer="water")
    lake_lonlat.to_file(path, layer="old_water", engine="pyogrio")
    with pytest.raises(LayerError) as err:
        read_layer(path)
    msg = str(err.value)
    assert "'water'" in msg and "'old_water'" in msg and "area.water_layer" in msg
    with pytest.raises(LayerError, match="has no layer 'lake'.*'old_water'"):
        read_layer(path, layer="lake")


def test_reads_shapefile(write_layer, square_lake):
    path = write_layer("lake.shp", square_lake)
    gdf = read_layer(path)
    assert gdf.crs.to_epsg() == 32614
    assert gdf.geometry.iloc[0].area == pytest.approx(4e6)


def test_missing_file_names_path_and_plan_key(tmp_path):
    missing = tmp_path / "nowhere" / "lake.geojson"
    with pytest.raises(InputFileError) as err:
        read_layer(missing, what="area.water")
    msg = str(err.value)
    assert str(missing) in msg and "area.water" in msg and "relative to the plan file" in msg
    assert isinstance(err.value, OSError) and isinstance(err.value, GeosampleError)


def test_unreadable_file_is_an_input_file_error(tmp_path):
    # a file named .geojson that is not GeoJSON: damaged, not a question of which formats are accepted
    path = tmp_path / "broken.geojson"
    path.write_text("this is not GeoJSON {", encoding="utf-8")
    with pytest.raises(InputFileError, match="named as a GeoJSON file but cannot be read as one.*export the layer"):
        read_layer(path)


def test_a_file_of_unknown_kind_gets_the_list_of_formats(tmp_path):
    path = tmp_path / "lake.txt"
    path.write_text("this is not a layer", encoding="utf-8")
    with pytest.raises(InputFileError, match="cannot be read as a spatial layer.*GeoJSON, GeoPackage"):
        read_layer(path)


def test_an_empty_file_is_called_empty_not_an_unsupported_format(tmp_path):
    for name in ("lake.geojson", "lake.gpkg"):
        path = tmp_path / name
        path.write_bytes(b"")
        with pytest.raises(InputFileError) as err:
            read_layer(path)
        assert "is empty (0 bytes)" in str(err.value)
        assert "supported file format" not in str(err.value)


def test_a_geopackage_without_layers_says_so(tmp_path):
    import sqlite3

    # a GeoPackage written by GDAL whose only layer is then dropped (its rows in the GeoPackage's own tables too)
    import geopandas
    import shapely

    path = tmp_path / "lake.gpkg"
    geopandas.GeoDataFrame({"name": ["x"]}, geometry=[shapely.box(0, 0, 1, 1)], crs=4326).to_file(path, layer="tarn")
    con = sqlite3.connect(path)
    for table in ("gpkg_contents", "gpkg_geometry_columns"):
        con.execute(f"DELETE FROM {table} WHERE table_name = 'tarn'")
    con.execute("DROP TABLE tarn")
    con.commit()
    con.close()
    with pytest.raises(LayerError, match="holds no layers"):
        read_layer(path)


def test_a_file_that_cannot_be_opened_is_not_given_format_advice(tmp_path, monkeypatch):
    # tests run as root here, so a chmod would not stop the read: make open() fail as it does without permission
    import builtins

    path = tmp_path / "lake.geojson"
    path.write_text("{}", encoding="utf-8")
    real_open = builtins.open

    def deny(file, *a, **k):
        if str(file) == str(path):
            raise PermissionError(13, "Permission denied", str(file))
        return real_open(file, *a, **k)

    monkeypatch.setattr(builtins, "open", deny)
    with pytest.raises(InputFileError) as err:
        read_layer(path)
    msg = str(err.value)
    assert "cannot be opened (Permission denied)" in msg and "not a format problem" in msg
    assert "GeoPackage" not in msg


@pytest.mark.parametrize("kind", ["polygon", "point"])
def test_a_nan_vertex_is_refused_not_repaired(tmp_path, kind):
    import json

    if kind == "polygon":
        geom = {"type": "Polygon", "coordinates": [[[-97.55, 46.05], [-97.52, 46.05], [-97.52, float("nan")],
                                                    [-97.55, 46.06], [-97.55, 46.05]]]}
    else:
        geom = {"type": "Point", "coordinates": [float("nan"), 46.05]}
    path = tmp_path / "layer.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "Pellow Tarn"}, "geometry": geom}]}), encoding="utf-8")
    with pytest.raises(LayerError) as err:
        read_layer(path, what="access" if kind == "point" else "water", kind=kind)
    msg = str(err.value)
    assert "not a number (NaN" in msg and "Pellow Tarn" in msg


def test_layer_without_crs_is_refused_with_the_way_to_declare_one(write_layer, square_lake):
    path = write_layer("lake.shp", square_lake)
    path.with_suffix(".prj").unlink()  # a Shapefile without .prj has no CRS
    with pytest.raises(LayerError) as err:
        read_layer(path, what="area.water")
    msg = str(err.value)
    assert "no coordinate reference system" in msg and 'crs = "EPSG:' in msg and ".prj" in msg


def test_declared_crs_is_assigned_only_when_the_file_has_none(write_layer, square_lake):
    path = write_layer("lake.shp", square_lake)
    path.with_suffix(".prj").unlink()
    gdf = read_layer(path, crs="EPSG:32614")
    assert gdf.crs.to_epsg() == 32614
    assert any("assumed" in w for w in gdf.attrs["geosample_warnings"])
    with_prj = write_layer("lake2.shp", square_lake)
    assert read_layer(with_prj, crs="EPSG:4326").crs.to_epsg() == 32614  # its own CRS wins


def test_unknown_declared_crs_is_a_setting_error(write_layer, square_lake):
    path = write_layer("lake.shp", square_lake)
    path.with_suffix(".prj").unlink()
    with pytest.raises(SettingError, match="area.crs = 'EPSG:99999999'"):
        read_layer(path, crs="EPSG:99999999")


def test_lines_instead_of_polygons(write_layer):
    line = shapely.LineString([(-97.55, 46.05), (-97.54, 46.06)])
    path = write_layer("shore.geojson", _gdf([line]))
    with pytest.raises(LayerError) as err:
        read_layer(path, what="area.water", kind="polygon")
    msg = str(err.value)
    assert "1 LineString" in msg and "polygons" in msg and "Polygon, MultiPolygon" in msg


def test_polygons_where_points_are_needed(write_layer, lake_lonlat):
    path = write_layer("access.geojson", lake_lonlat)
    with pytest.raises(LayerError, match="area.access.*Polygon.*needs points"):
        read_layer(path, what="access", kind="point")


def test_points_where_polygons_are_needed(write_layer):
    path = write_layer("pts.geojson", _gdf([shapely.Point(-97.55, 46.05)]))
    with pytest.raises(LayerError, match="1 Point.*area.exclude needs polygons"):
        read_layer(path, what="exclude")


def test_empty_layer(write_layer, lake_lonlat):
    path = write_layer("empty.gpkg", lake_lonlat.iloc[0:0], layer="water")
    with pytest.raises(LayerError, match="has no features"):
        read_layer(path, what="area.water")


def test_invalid_polygon_is_repaired_with_a_warning_naming_it(write_layer):
    bowtie = shapely.Polygon([(-97.56, 46.04), (-97.54, 46.06), (-97.54, 46.04), (-97.56, 46.06)])
    ok = lonlat_box(0.02, 0.0, 0.03, 0.01)
    path = write_layer("lakes.geojson", _gdf([ok, bowtie], name=["Good Pond", "Knot Pond"]))
    gdf = read_layer(path)
    assert gdf.geometry.is_valid.all()
    warnings = gdf.attrs["geosample_warnings"]
    assert len(warnings) == 1
    assert "feature 1" in warnings[0] and "'Knot Pond'" in warnings[0] and "make_valid" in warnings[0]
    # make_valid keeps both triangles of the bow tie: each has base 0.02 and height 0.01 (by hand)
    assert gdf.geometry.iloc[1].area == pytest.approx(2 * 0.5 * 0.02 * 0.01, rel=1e-6)


def test_features_without_geometry_are_dropped_with_a_warning(write_layer, lake_lonlat):
    gdf = geopandas.GeoDataFrame({"name": ["a", "b"]}, geometry=[lake_lonlat.geometry.iloc[0], None], crs=4326)
    path = write_layer("lake.gpkg", gdf, layer="w")
    out = read_layer(path)
    assert len(out) == 1 and "without a geometry" in out.attrs["geosample_warnings"][0]


def test_a_nan_vertex_past_the_first_chunk_is_found_and_named(tmp_path):
    # the check reads coordinates in chunks of features (memory of a regional layer); the bad one is in the third
    import geopandas
    import shapely

    from geosample.layers import _check_finite

    geoms = [shapely.box(i, 0, i + 0.5, 1) for i in range(45_000)]
    geoms[41_234] = shapely.Polygon([(0, 0), (1, 0), (1, float("nan")), (0, 1)])
    gdf = geopandas.GeoDataFrame({"name": [f"Lake {i}" for i in range(45_000)]}, geometry=geoms)
    with pytest.raises(LayerError, match=r"feature 41234 \(name = 'Lake 41234'\)"):
        _check_finite(gdf, tmp_path / "lakes.gpkg", "water")
