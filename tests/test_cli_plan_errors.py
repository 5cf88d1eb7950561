"""`geosample plan` on broken layers: exit code 2, a message naming the problem, no output folder."""
from __future__ import annotations

import geopandas
import pytest
import shapely

from geosample.cli import main

from conftest import lonlat_box

PLAN = """
[survey]
timezone = "America/Chicago"
[area]
water = "water.geojson"
{extra}
[size]
tolerance = 20
range = 80
[draw]
seed = 7
[time]
start = 2027-06-01
end = 2027-08-31
"""


def _run(tmp_path, capsys, extra: str = "") -> tuple[int, str]:
    (tmp_path / "plan.toml").write_text(PLAN.format(extra=extra))
    out = tmp_path / "design"
    code = main(["plan", str(tmp_path / "plan.toml"), "-o", str(out)])
    err = capsys.readouterr().err
    assert not out.exists(), "a failed run must not leave an output folder"
    assert "Traceback" not in err
    return code, err


def test_layer_without_crs(tmp_path, capsys, lake_lonlat):
    # A Shapefile written without a .prj has no CRS (a GeoJSON is WGS 84 by RFC 7946).
    gdf = geopandas.GeoDataFrame(geometry=[lake_lonlat.geometry.iloc[0]])
    with pytest.warns(UserWarning):
        gdf.to_file(tmp_path / "water.shp", engine="pyogrio")
    (tmp_path / "plan.toml").write_text(PLAN.format(extra="").replace("water.geojson", "water.shp"))
    out = tmp_path / "design"
    code = main(["plan", str(tmp_path / "plan.toml"), "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "CRS" in err and "water.shp" in err and "Traceback" not in err
    assert not out.exists()


def test_lines_instead_of_polygons(tmp_path, capsys, write_layer, lake_lonlat):
    lines = geopandas.GeoDataFrame(geometry=[lake_lonlat.geometry.iloc[0].exterior], crs=4326)
    write_layer("water.geojson", lines)
    code, err = _run(tmp_path, capsys)
    assert code == 2 and "polygon" in err.lower() and "water.geojson" in err


def test_empty_layer(tmp_path, capsys):
    (tmp_path / "water.geojson").write_text('{"type":"FeatureCollection","features":[]}')
    code, err = _run(tmp_path, capsys)
    assert code == 2 and ("empty" in err.lower() or "no features" in err.lower())


def test_strata_field_that_does_not_exist_lists_the_fields(tmp_path, capsys, write_layer, lake_lonlat):
    write_layer("water.geojson", lake_lonlat)
    zones = geopandas.GeoDataFrame({"basin": ["West", "East"]},
                                   geometry=[lonlat_box(0.0, 0.0, 0.015, 0.01), lonlat_box(0.015, 0.0, 0.03, 0.01)],
                                   crs=4326)
    write_layer("zones.geojson", zones)
    code, err = _run(tmp_path, capsys, 'strata = "zones.geojson"\nstrata_field = "zone"')
    assert code == 2 and "zone" in err and "basin" in err


def test_exclusions_that_remove_everything(tmp_path, capsys, write_layer, lake_lonlat):
    write_layer("water.geojson", lake_lonlat)
    write_layer("closed.geojson", geopandas.GeoDataFrame(geometry=[lonlat_box(-0.01, -0.01, 0.04, 0.02)], crs=4326))
    code, err = _run(tmp_path, capsys, 'exclude = ["closed.geojson"]')
    assert code == 2 and "closed.geojson" in err


@pytest.mark.parametrize("extra,setting", [('reach_m = 500', "area.reach_m"), ('shore_m = [300, 100]', "area.shore_m")])
def test_area_settings_that_do_not_fit_together(tmp_path, capsys, write_layer, lake_lonlat, extra, setting):
    write_layer("water.geojson", lake_lonlat)
    code, err = _run(tmp_path, capsys, extra)
    assert code == 2 and setting in err
