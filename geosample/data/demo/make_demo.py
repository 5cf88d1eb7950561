"""Draw the demo water body, Quillmere Lake, and write its layers (deterministic).

Quillmere Lake and every name here are invented; the lake is placed on open
land near 46.05 N, 97.55 W only so that its coordinates, CRS and time zone are
plausible. The shapes are drawn from smooth closed formulas in UTM zone 14N
metres and written as RFC 7946 GeoJSON (WGS 84 lon/lat, 7 decimals), so running
this script again reproduces the committed files byte for byte::

    python geosample/data/demo/make_demo.py

Layers
------
water.geojson   the lake: irregular shoreline, a bay lobe (Alder Bay), a peninsula
                (Harl Point), three islands (holes)
closed.geojson  Quill Harbor Marina: closed to sampling (boat traffic)
swim.geojson    Sandy Reach swimming area: boats may not enter the buoy line, so it
                is excluded from the boat survey (the beach program samples it)
access.geojson  three launches with a "name" field; Birch Landing lies a little
                inland, to show how an access point is snapped to the shore
zones.geojson   three strata with a "zone" field; they reach onto land and are
                clipped to the water by geosample
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import shapely
from pyproj import Transformer
from shapely.geometry.polygon import orient

HERE = Path(__file__).resolve().parent
UTM = "EPSG:32614"
CENTRE_LON, CENTRE_LAT = -97.55, 46.05


def _centre_xy() -> tuple[float, float]:
    t = Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    x, y = t.transform(CENTRE_LON, CENTRE_LAT)
    return round(x), round(y)


def _blob(cx: float, cy: float, radius: float, terms: list[tuple[int, float, float]], n: int = 360,
          stretch: float = 1.0) -> shapely.Polygon:
    """A closed smooth outline r(theta) = radius * (1 + sum a_k cos(k theta + phase_k))."""
    pts = []
    for i in range(n):
        th = 2 * math.pi * i / n
        r = radius * (1 + sum(a * math.cos(k * th + ph) for k, a, ph in terms))
        pts.append((cx + stretch * r * math.cos(th), cy + r * math.sin(th)))
    return shapely.Polygon(pts)


def shapes() -> dict:
    """Every demo geometry, in local metres around (0, 0)."""
    outline = _blob(0, 0, 1700, [(2, 0.16, -0.4), (3, 0.07, 1.1), (5, 0.04, 0.3), (7, 0.025, 2.0)],
                    n=720, stretch=1.15)
    bay = shapely.Point(-1650, -1050).buffer(620, quad_segs=32)
    neck = shapely.LineString([(-1650, -1050), (-900, -500)]).buffer(380, quad_segs=16)
    lake = outline.union(bay).union(neck)
    peninsula = shapely.LineString([(2600, 250), (1250, 120), (820, 260)]).buffer(95, quad_segs=16)
    islands = {
        "Fenn Island": _blob(-450, 600, 170, [(2, 0.2, 0.5), (3, 0.08, 1.0)], n=96),
        "Little Fenn": _blob(-120, 820, 70, [(2, 0.15, 2.0)], n=48),
        "Crow Isle": _blob(550, -720, 120, [(2, 0.25, -1.0), (3, 0.1, 0.2)], n=72),
    }
    water = lake.difference(peninsula)
    for isl in islands.values():
        water = water.difference(isl)
    water = max(shapely.get_parts(water), key=lambda p: p.area)  # the main water body
    marina = shapely.box(-300, 1500, 200, 2100)
    swim = shapely.Point(1250, -1250).buffer(260, quad_segs=16)
    big = shapely.box(-4000, -3500, 4500, 3500)
    alder = shapely.Point(-1650, -1050).buffer(900, quad_segs=32)
    north = shapely.Polygon([(-4000, -500), (4500, 600), (4500, 3500), (-4000, 3500)]).difference(alder)
    south = big.difference(north).difference(alder)
    strata = {"North Basin": north, "South Basin": south, "Alder Bay": alder}
    return {"water": water, "marina": marina, "swim": swim, "strata": strata, "islands": islands}


def _shore_point(water: shapely.Polygon, angle_deg: float, inland_m: float = 0.0) -> tuple[float, float]:
    """Where a ray from the centre at ``angle_deg`` leaves the lake's outer shore (moved inland_m outward)."""
    th = math.radians(angle_deg)
    ray = shapely.LineString([(0, 0), (6000 * math.cos(th), 6000 * math.sin(th))])
    hit = ray.intersection(water.exterior)
    pts = shapely.get_coordinates(hit)
    far = max(pts, key=lambda p: math.hypot(*p))
    return far[0] + inland_m * math.cos(th), far[1] + inland_m * math.sin(th)


def _to_lonlat(geom, cx: float, cy: float):
    t = Transformer.from_crs(UTM, "EPSG:4326", always_xy=True)
    moved = shapely.affinity.translate(geom, cx, cy)
    return shapely.transform(moved, lambda xy: __import__("numpy").column_stack(t.transform(xy[:, 0], xy[:, 1])))


def _coords(geom) -> list:
    geom = shapely.set_precision(geom, 1e-7)  # the written precision, applied so the shapes stay valid

    def ring(r):
        return [[round(x, 7), round(y, 7)] for x, y in r.coords]

    if geom.geom_type == "Point":
        return [round(geom.x, 7), round(geom.y, 7)]
    if geom.geom_type == "Polygon":
        g = orient(geom, sign=1.0)  # RFC 7946: exterior counter-clockwise, holes clockwise
        return [ring(g.exterior)] + [ring(h) for h in g.interiors]
    if geom.geom_type == "MultiPolygon":
        return [_coords(p) for p in geom.geoms]
    raise ValueError(geom.geom_type)


def _write(name: str, features: list[tuple[dict, object]]) -> None:
    fc = {"type": "FeatureCollection", "name": name.split(".")[0], "features": [
        {"type": "Feature", "properties": props, "geometry": {"type": geom.geom_type, "coordinates": _coords(geom)}}
        for props, geom in features]}
    (HERE / name).write_text(json.dumps(fc, indent=1) + "\n", encoding="utf-8")


def main() -> None:
    cx, cy = _centre_xy()
    s = shapes()
    water = s["water"]
    ll = lambda g: _to_lonlat(g, cx, cy)  # noqa: E731
    _write("water.geojson", [({"name": "Quillmere Lake"}, ll(water))])
    _write("closed.geojson", [({"name": "Quill Harbor Marina", "reason": "boat traffic"}, ll(s["marina"]))])
    _write("swim.geojson", [({"name": "Sandy Reach swimming area", "reason": "swimmers"}, ll(s["swim"]))])
    launches = [("Birch Landing", 97.0, 18.0), ("Quill Park Launch", 168.0, 0.0), ("Sedge Cove Ramp", 330.0, 0.0)]
    _write("access.geojson", [({"name": n}, ll(shapely.Point(_shore_point(water, a, inland))))
                              for n, a, inland in launches])
    _write("zones.geojson", [({"zone": n}, ll(g)) for n, g in s["strata"].items()])


if __name__ == "__main__":
    main()
