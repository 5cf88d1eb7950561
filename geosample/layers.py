"""Reading the plan's spatial layers (the file edge of the geometry stage).

:func:`read_layer` reads one vector layer with pyogrio (any format the GDAL
bundled with pyogrio reads: GeoJSON, GeoPackage, Shapefile, ...), checks that it
is usable and returns a :class:`geopandas.GeoDataFrame`. Everything after it
(:func:`geosample.geometry.build_frame`) takes GeoDataFrames and never opens a
file.

Repairs are not silent: an invalid polygon is repaired with
:func:`shapely.make_valid` and a sentence naming the feature is

* logged at WARNING level on the ``geosample.layers`` logger, and
* returned with the layer in ``gdf.attrs["geosample_warnings"]`` (a list of
  str), which :func:`geosample.geometry.build_frame` copies into
  :attr:`geosample.model.Frame.warnings`.
"""
from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from .errors import InputFileError, LayerError, SettingError

__all__ = ["read_layer", "name_column", "KINDS", "WARNINGS_KEY"]

log = logging.getLogger(__name__)

WARNINGS_KEY = "geosample_warnings"
"""Key of ``GeoDataFrame.attrs`` under which repairs and other notes are returned."""

KINDS = {
    "polygon": ("Polygon", "MultiPolygon"),
    "point": ("Point", "MultiPoint"),
}
_KIND_WORDS = {"polygon": "polygons (areas)", "point": "points"}


def _plan_key(what: str) -> str:
    """The plan key a layer role refers to (``"water"`` -> ``"area.water"``)."""
    return what if "." in what else f"area.{what}"


def name_column(columns: Any) -> str | None:
    """The attribute that names features: ``name`` in any letter case, else None.

    Examples
    --------
    >>> name_column(["id", "Name", "geometry"])
    'Name'
    >>> name_column(["id"]) is None
    True
    """
    for c in columns:
        if isinstance(c, str) and c.lower() == "name":
            return c
    return None


def _feature_label(gdf: Any, i: int, name_col: str | None) -> str:
    label = f"feature {i}"
    if name_col is not None:
        value = gdf[name_col].iloc[i]
        if value is not None and str(value) != "nan":
            label += f" ({name_col} = {str(value)!r})"
    return label


def _check_file(path: Path, what: str) -> None:
    if not path.exists():
        raise InputFileError(
            f"{_plan_key(what)}: the file {str(path)!r} does not exist. Check the path given for "
            f"{_plan_key(what)} in the plan (paths are relative to the plan file)."
        )
    if path.is_dir():
        if path.suffix.lower() in (".gdb",):
            return
        raise InputFileError(
            f"{_plan_key(what)}: {str(path)!r} is a folder, not a layer file. Give the path of a "
            "GeoJSON, GeoPackage or Shapefile (.shp) file."
        )
    try:
        with open(path, "rb") as fh:
            first = fh.read(1)
    except OSError as exc:
        raise InputFileError(
            f"{_plan_key(what)}: the file {str(path)!r} cannot be opened ({exc.strerror or exc}). This is not a "
            "format problem: check that the file is readable by you (its permissions, or a lock by another "
            "program), then run again."
        ) from None
    if not first:
        raise InputFileError(
            f"{_plan_key(what)}: the file {str(path)!r} is empty (0 bytes): it holds no layer. It was not saved "
            "completely, or it is a placeholder: export the layer again from the GIS."
        )


_FORMATS = {".geojson": "GeoJSON", ".json": "GeoJSON", ".gpkg": "GeoPackage", ".shp": "Shapefile",
            ".kml": "KML", ".gml": "GML", ".fgb": "FlatGeobuf"}


def _unreadable(path: Path, key: str, exc: Exception) -> InputFileError:
    """The message for a file GDAL cannot open: damaged, or not the format its name says, or an unknown format."""
    detail = str(exc).split("; It might help")[0].replace(str(path), path.name).strip().rstrip(".")
    fmt = _FORMATS.get(path.suffix.lower())
    if fmt is not None:
        extra = " (a Shapefile also needs its .shx and .dbf beside the .shp)" if fmt == "Shapefile" else ""
        return InputFileError(
            f"{key}: {str(path)!r} is named as a {fmt} file but cannot be read as one (GDAL: {detail}){extra}. "
            f"The file is damaged or cut short, or holds something else under a {path.suffix} name: export the "
            f"layer again from the GIS as {fmt}.")
    return InputFileError(
        f"{key}: {str(path)!r} cannot be read as a spatial layer (GDAL: {detail}). Accepted are the vector "
        "formats GDAL reads, e.g. GeoJSON, GeoPackage (.gpkg) or Shapefile (.shp with its .shx and .dbf).")


def _list_layers(path: Path, key: str) -> list[str]:
    import warnings

    import pyogrio

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # GDAL's own notes; the message below says it all
            return [str(row[0]) for row in pyogrio.list_layers(path)]
    except (pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, ValueError, OSError) as exc:
        if _sqlite_without_tables(path):
            return []  # an empty GeoPackage: GDAL does not open it, the caller says it holds no layers
        raise _unreadable(path, key, exc) from None


def _sqlite_without_tables(path: Path) -> bool:
    """True for a SQLite file (a GeoPackage) that lists no layer in ``gpkg_contents`` or has no such table."""
    import sqlite3

    try:
        with open(path, "rb") as fh:
            if fh.read(16) != b"SQLite format 3\x00":
                return False
        con = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
        try:
            tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
            if "gpkg_contents" not in tables:
                return not (tables - {"gpkg_spatial_ref_sys", "gpkg_extensions", "gpkg_geometry_columns",
                                      "gpkg_ogr_contents", "sqlite_sequence"})
            return con.execute("SELECT COUNT(*) FROM gpkg_contents").fetchone()[0] == 0
        finally:
            con.close()
    except (OSError, sqlite3.Error):
        return False


def _read(path: Path, layer: str | None, what: str) -> Any:
    import pyogrio
    import geopandas

    key = _plan_key(what)
    layers = _list_layers(path, key)
    if not layers:
        raise LayerError(f"{key}: {str(path)!r} holds no layers (an empty container). Save the water body's "
                         "polygons into it from the GIS, or give the file that holds them.")
    layer_key = f"{key}_layer" if key in ("area.water", "area.strata") else "the layer name"
    if layer is not None and layers and layer not in layers:
        raise LayerError(
            f"{key}: {str(path)!r} has no layer {layer!r}; it has: {', '.join(repr(n) for n in layers)}. "
            f"Set {layer_key} to one of these."
        )
    if layer is None and len(layers) > 1:
        raise LayerError(
            f"{key}: {str(path)!r} holds {len(layers)} layers ({', '.join(repr(n) for n in layers)}) "
            f"and none was chosen. Set {layer_key} to the one to use."
        )
    try:
        return geopandas.read_file(path, layer=layer, engine="pyogrio")
    except (pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, ValueError, OSError) as exc:
        raise _unreadable(path, key, exc) from None


def _check_finite(gdf: Any, path: Path, what: str) -> None:
    """Refuse vertices with a NaN or infinite coordinate: no repair can know where they should be."""
    import numpy as np
    import shapely

    geoms = gdf.geometry.values
    step = 20_000  # features per chunk: the coordinates of a regional layer are never copied all at once
    for start in range(0, len(geoms), step):
        coords, index = shapely.get_coordinates(geoms[start:start + step], include_z=False, return_index=True)
        bad = ~np.isfinite(coords).all(axis=1)
        if bad.any():
            break
    else:
        return
    index = index + start
    features = sorted(set(int(i) for i in index[bad]))
    name_col = name_column(gdf.columns)
    labels = ", ".join(_feature_label(gdf, i, name_col) for i in features[:5])
    first = coords[bad][0]
    raise LayerError(
        f"{_plan_key(what)}: {str(path)!r} has {int(bad.sum())} vertex(es) with a coordinate that is not a number "
        f"(NaN or infinite, e.g. ({first[0]:g}, {first[1]:g})) in {labels}. No repair can know where such a vertex "
        "belongs: correct or delete those vertices in the GIS and export the layer again.")


def _assign_crs(gdf: Any, path: Path, what: str, crs: Any, warnings: list[str]) -> Any:
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    if gdf.crs is not None:
        return gdf
    key = _plan_key(what)
    if crs is None:
        raise LayerError(
            f"{key}: {str(path)!r} has no coordinate reference system (CRS), so its coordinates cannot be "
            "placed on the Earth. Re-save the layer with its CRS (GeoJSON written to RFC 7946 is always "
            "WGS 84 lon/lat; a Shapefile needs its .prj file), or declare the CRS in the plan's [area] "
            'section, e.g. crs = "EPSG:4326" for lon/lat or crs = "EPSG:32616" for UTM zone 16N.'
        )
    try:
        declared = CRS.from_user_input(crs)
    except CRSError as exc:
        raise SettingError("area.crs", crs, 'a CRS that pyproj knows, e.g. "EPSG:4326" or "EPSG:32616"',
                           fix="write the EPSG code of the layer's coordinates") from exc
    gdf = gdf.set_crs(declared)
    warnings.append(
        f"{key}: {path.name} has no CRS of its own; the plan's crs = {crs!r} ({declared.name}) was assumed."
    )
    return gdf


def _check_kind(gdf: Any, path: Path, what: str, kind: str) -> None:
    key = _plan_key(what)
    types = gdf.geometry.geom_type
    wanted = KINDS[kind]
    bad = types[~types.isin(wanted)]
    if len(bad):
        counts = bad.value_counts()
        found = ", ".join(f"{n} {t}" for t, n in counts.items())
        other = "point" if kind == "polygon" else "polygon"
        hint = (f"{key} needs {_KIND_WORDS[kind]}" +
                (f"; a {other} layer belongs elsewhere (e.g. access points go in area.access)"
                 if kind == "polygon" else "; draw each access point as a point"))
        raise LayerError(
            f"{key}: {str(path)!r} holds {found} feature(s), but {hint}. "
            f"Accepted geometry types: {', '.join(wanted)}."
        )


def _check_lonlat_range(gdf: Any, path: Path, what: str) -> None:
    """Refuse coordinates outside -180..180, -90..90 in a layer whose CRS is geographic (lon/lat degrees)."""
    import numpy as np

    if not gdf.crs.is_geographic:
        return
    x0, y0, x1, y1 = (float(v) for v in gdf.total_bounds)
    if not all(np.isfinite([x0, y0, x1, y1])):
        return
    if -180 <= x0 and x1 <= 180 and -90 <= y0 and y1 <= 90:
        return
    key = _plan_key(what)
    where = (f"{key}: {str(path)!r} says its CRS is {gdf.crs.name} (degrees of longitude and latitude), but its "
             f"coordinates run from x = {x0:.6g} to {x1:.6g} and y = {y0:.6g} to {y1:.6g}, outside longitude "
             "-180 to 180 and latitude -90 to 90.")
    if -90 <= x0 and x1 <= 90 and -180 <= y0 and y1 <= 180:
        raise LayerError(f"{where} Longitude and latitude look swapped? The latitude exceeds 90 where the "
                         "longitude would fit: re-export the layer with x = longitude and y = latitude (GeoJSON "
                         "coordinates are [lon, lat]).")
    raise LayerError(f"{where} The CRS is wrong: these look like metres of a projected CRS (e.g. Web Mercator "
                     "EPSG:3857 or a UTM zone). Re-save the layer with its true CRS, or reproject it to "
                     "lon/lat (EPSG:4326).")


def _repair(gdf: Any, path: Path, what: str, notes: list[str]) -> Any:
    import shapely

    geoms = gdf.geometry.values
    valid = shapely.is_valid(geoms)
    if valid.all():
        return gdf
    name_col = name_column(gdf.columns)
    fixed = list(geoms)
    for i in [int(j) for j in (~valid).nonzero()[0]]:
        reason = shapely.is_valid_reason(geoms[i])
        repaired = shapely.make_valid(geoms[i], method="structure", keep_collapsed=False)
        fixed[i] = repaired
        note = (f"{_plan_key(what)}: {path.name} {_feature_label(gdf, i, name_col)} was an invalid polygon "
                f"({reason}); repaired with make_valid (area now {repaired.area:.6g} in layer units).")
        notes.append(note)
        log.warning(note)
    gdf = gdf.copy()
    gdf[gdf.geometry.name] = fixed
    return gdf


def _drop_arealess(gdf: Any, path: Path, what: str, notes: list[str]) -> Any:
    """Leave out polygons with no area (corners on one line, or collapsed by the repair); refuse if none is left."""
    import shapely

    flat = shapely.is_empty(gdf.geometry.values) | (shapely.area(gdf.geometry.values) <= 0)
    if not flat.any():
        return gdf
    key = _plan_key(what)
    name_col = name_column(gdf.columns)
    labels = ", ".join(_feature_label(gdf, int(i), name_col) for i in flat.nonzero()[0][:5])
    if flat.all():
        raise LayerError(f"{key}: {str(path)!r} has no polygon with an area ({labels}: zero area, e.g. every "
                         "corner on one line). Redraw the water body as a polygon that encloses the water.")
    note = f"{key}: {path.name} {labels} has no area (zero-area polygon); left out."
    notes.append(note)
    log.warning(note)
    return gdf[~flat].reset_index(drop=True)


def read_layer(path: str | Path, *, layer: str | None = None, what: str = "water", kind: str = "polygon",
               crs: Any = None) -> Any:
    """Read one vector layer and check it is usable.

    Parameters
    ----------
    path : str or Path
        A file GDAL reads (GeoJSON, GeoPackage, Shapefile, ...).
    layer : str, optional
        Layer name inside a multi-layer file (GeoPackage). Required when the
        file holds more than one layer.
    what : str
        The layer's role in words, used in messages: ``"water"``, ``"exclude"``,
        ``"access"``, ``"strata"`` or a plan key such as ``"area.water"``.
    kind : {"polygon", "point"}
        The geometry kind the role needs.
    crs : str or pyproj.CRS, optional
        A CRS to assign when (and only when) the file declares none. A layer
        with a CRS of its own keeps it.

    Returns
    -------
    geopandas.GeoDataFrame
        2-D geometries, index 0..n-1, null and empty geometries dropped.
        ``attrs["geosample_warnings"]`` lists repairs and assumptions (may be empty).

    Raises
    ------
    InputFileError
        The file is missing or cannot be read.
    LayerError
        No CRS (and none given), coordinates outside -180..180 / -90..90 in a lon/lat CRS (a wrong
        CRS, or longitude and latitude swapped), wrong geometry kind, no features, no polygon with an
        area, unknown layer name.
    SettingError
        ``crs`` is not a CRS pyproj knows.

    Examples
    --------
    >>> import geopandas, shapely, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> square = shapely.box(-89.01, 46.0, -89.0, 46.01)
    >>> geopandas.GeoDataFrame({"name": ["Pond"]}, geometry=[square], crs=4326).to_file(folder / "w.geojson")
    >>> gdf = read_layer(folder / "w.geojson")
    >>> len(gdf), gdf.crs.to_epsg(), gdf.attrs["geosample_warnings"]
    (1, 4326, [])
    """
    import shapely

    if kind not in KINDS:
        raise ValueError(f"kind must be one of {sorted(KINDS)}, not {kind!r}")
    path = Path(path)
    _check_file(path, what)
    gdf = _read(path, layer, what)
    warnings: list[str] = []
    key = _plan_key(what)
    if len(gdf) == 0:
        raise LayerError(f"{key}: {str(path)!r} has no features. Give a layer with at least one "
                         f"{kind}, or remove {key} from the plan.")
    missing = gdf.geometry.isna() | gdf.geometry.is_empty
    if missing.all():
        raise LayerError(f"{key}: {str(path)!r} has {len(gdf)} feature(s) but none has a geometry. "
                         f"Give a layer with at least one {kind}.")
    if missing.any():
        warnings.append(f"{key}: {path.name} has {int(missing.sum())} feature(s) without a geometry; "
                        "they were left out.")
        gdf = gdf[~missing].reset_index(drop=True)
    _check_finite(gdf, path, what)
    gdf = _assign_crs(gdf, path, what, crs, warnings)
    _check_lonlat_range(gdf, path, what)
    _check_kind(gdf, path, what, kind)
    if shapely.has_z(gdf.geometry.values).any():
        gdf = gdf.copy()
        gdf[gdf.geometry.name] = shapely.force_2d(gdf.geometry.values)
    if kind == "polygon":
        gdf = _repair(gdf, path, what, warnings)
        gdf = _drop_arealess(gdf, path, what, warnings)
    gdf = gdf.reset_index(drop=True)
    gdf.attrs[WARNINGS_KEY] = warnings
    gdf.attrs["geosample_source"] = path.name
    return gdf
