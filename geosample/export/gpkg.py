"""The design for desktop GIS: ``sites.gpkg`` (OGC GeoPackage, written with pyogrio/GDAL).

Layers, all in the frame's metric CRS (the CRS the design was measured in,
named in the manifest):

- ``sites``: one point per site with the columns of ``schedule.csv`` (the crew's
  blanks left out) and ``label`` (``NB-R2`` for reserves);
- ``routes``: one line per crew trip along the over-water path (``day``, ``trip``,
  ``name``, ``date``, ``access``, ``length_m``, ``leave``, ``back``, ``holding_ok``);
- ``frame``: the water that could be sampled (the union of the strata);
- ``strata``: ``name``, ``code``, ``area_m2``, ``weight``;
- ``exclusions``: the closed areas removed from the water (empty when there are none);
- ``access``: launches and shore access points (``snapped_m``: how far each was moved to the water).

Same bytes for the same design and the same GDAL and SQLite: GDAL stamps the
GeoPackage's ``gpkg_contents.last_change`` with the time of writing unless the
``OGR_CURRENT_DATE`` configuration option is set; it is set here to a fixed
date (:data:`FIXED_DATE`) while the file is written, and restored afterwards.
Another GDAL or SQLite version may lay the file out differently (``verify``
names the library versions when a hash differs).
"""
from __future__ import annotations

from pathlib import Path

__all__ = ["FILE_NAME", "FIXED_DATE", "LAYERS", "layers", "write_gpkg"]

FILE_NAME = "sites.gpkg"
#: The timestamp GDAL writes into the file (gpkg_contents.last_change): fixed, so bytes do not follow the clock.
FIXED_DATE = "2000-01-01T00:00:00.000Z"
LAYERS = ("sites", "routes", "frame", "strata", "exclusions", "access")


def layers(design) -> dict:
    """The layers as GeoDataFrames in the frame CRS, by name (:data:`LAYERS` order)."""
    import geopandas
    import shapely
    from shapely.geometry import LineString, Point

    from .gpx import trips
    from .table import CREW_COLUMNS, ordered_visits, reserve_label, schedule_rows

    frame = design.frame
    crs = frame.crs
    codes = {s.name: s.code for s in frame.strata}
    visits = ordered_visits(design)
    rows = schedule_rows(design)
    keep = [c for c in rows[0] if c not in CREW_COLUMNS] if rows else []
    site_rows = []
    for v, r in zip(visits, rows):
        d = {k: _typed(k, r[k]) for k in keep}
        d["label"] = reserve_label(codes.get(v.stratum, ""), v.reserve_rank)
        site_rows.append(d)
    out = {}
    out["sites"] = geopandas.GeoDataFrame(site_rows, geometry=[Point(v.x, v.y) for v in visits], crs=crs) \
        if visits else _empty(["site_id"], crs)
    trs = trips(design)
    out["routes"] = geopandas.GeoDataFrame(
        [{"day": t.day, "trip": t.trip, "name": t.name, "date": t.route.date.isoformat(), "access": t.route.access,
          "length_m": round(float(t.route.length_m), 1),
          "leave": t.route.start.isoformat(timespec="seconds") if t.route.start else "",
          "back": t.route.end.isoformat(timespec="seconds") if t.route.end else "",
          "holding_ok": bool(t.route.lab_deadline_ok)} for t in trs],
        geometry=[LineString(t.route.coords_xy) for t in trs], crs=crs) if trs else _empty(["name"], crs)
    union = shapely.union_all([s.geometry for s in frame.strata]) if frame.strata else None
    out["frame"] = geopandas.GeoDataFrame({"area_m2": [round(frame.area_m2, 1)]}, geometry=[union], crs=crs)
    out["strata"] = geopandas.GeoDataFrame(
        [{"name": s.name, "code": s.code, "area_m2": round(s.area_m2, 1), "weight": round(s.weight, 9)}
         for s in frame.strata], geometry=[s.geometry for s in frame.strata], crs=crs)
    ex = frame.exclusions
    out["exclusions"] = (geopandas.GeoDataFrame({"what": ["closed to sampling"]}, geometry=[ex], crs=crs)
                         if ex is not None and not ex.is_empty else _empty(["what"], crs))
    out["access"] = (geopandas.GeoDataFrame(
        [{"name": a.name, "lat": round(a.lat, 7), "lon": round(a.lon, 7), "snapped_m": round(a.snapped_m, 1)}
         for a in frame.access], geometry=[Point(a.x, a.y) for a in frame.access], crs=crs)
        if frame.access else _empty(["name"], crs))
    return out


_INTS = ("reserve_rank", "day", "route_order")
_FLOATS = ("lat", "lon", "x", "y", "day_inclusion_p")


def _typed(column: str, text: str):
    """A schedule cell as a GIS attribute: whole numbers and decimals as numbers, blanks as null."""
    if column in _INTS:
        return int(text) if text else None
    if column in _FLOATS:
        return float(text) if text else None
    # schedule.csv neutralises a text a spreadsheet would run as a formula; a GIS shows the text as it was
    return text[1:] if text[:1] == "'" and text[1:2] in ("=", "+", "-", "@", "\t", "\r") and text[1:2] else text


def _empty(columns, crs):
    import geopandas

    return geopandas.GeoDataFrame({c: [] for c in columns}, geometry=[], crs=crs)


def write_gpkg(design, path: str | Path) -> Path:
    """Write ``sites.gpkg`` (see the module docstring); replaces the file if it exists."""
    import pyogrio

    path = Path(path)
    if path.exists():
        path.unlink()
    old = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": FIXED_DATE})
    try:
        for name, gdf in layers(design).items():
            kw = {}
            if len(gdf) == 0:
                kw["geometry_type"] = {"sites": "Point", "access": "Point", "routes": "LineString"}.get(
                    name, "MultiPolygon")
            pyogrio.write_dataframe(gdf, path, layer=name, driver="GPKG", promote_to_multi=name in (
                "frame", "strata", "exclusions"), **kw)
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": old})
    return path
