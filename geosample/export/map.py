"""The field map: ``map.html``, one self-contained page that works with no network.

A jinja2 template (``templates/map.html.j2``) with Leaflet inlined, the design as
one JSON block, the outlines as another, and a small script (``templates/map.js``)
that draws from them. It is made for a phone on the water first:

- on open the water fills the screen (no room kept for controls); the layer
  list and the legend start folded;
- a day picker shows one field day (its route, its sites numbered in visit order,
  the reserves of its strata) or all days; ``map.html#day=3`` opens day 3;
- a tapped site's popup is kept clear of the controls (Leaflet's autoPan, with
  the controls' size as padding, computed when the popup opens);
- "Show my location" uses the browser's geolocation (Leaflet's ``locate``), only
  after the user asks; it needs no network;
- sites, reserves and access points are canvas markers, popups are built when
  tapped from the design data, so a map of thousands of sites stays quick;
- lake outlines are simplified for display (by a tolerance that grows with the
  extent of the water, stated in the legend) so a frame of many lakes stays light.

What it shows: the water outside the frame (white), the strata filled with Paul
Tol's *light* qualitative scheme (colour-blind safe, for filled areas under dark
labels), the closed areas hatched grey, the access points (black diamonds), each
field day's route over water and its sites (white discs numbered with the stop;
the ring and the route line share the day's colour from Okabe & Ito's palette,
with a dash pattern after the fifth day), the reserves (dashed boxes labelled
with the stratum code and rank, ``NB-R1``: use them only in rank order).

The design block ``<script type="application/json" id="geosample-design">`` holds
the sites, days and routes exactly as the page draws them (see
:func:`design_block`); :func:`read_design_block` reads it back, so ``verify`` can
compare the design in a page rather than its bytes.

Offline: Leaflet's JavaScript and CSS (vendored in ``static/``, with its licence)
are inlined, the few images its CSS names become ``data:`` URIs. There is no
basemap by default; :func:`write_map` can add a tile layer as an overlay that is
off until the user turns it on, so the page makes no request unless asked to
(see ``docs/offline-map.md``).

Untrusted text (title, stratum names, site ids, access point names): in the
HTML it is escaped by jinja2's autoescape; in the JSON blocks ``<``, ``>``, ``&``
and ``'`` are ``\\u`` escapes, so no text can close the script element; the
script puts every text into the page with ``textContent``, never as HTML.

Palettes: Okabe, M. & Ito, K. (2008) "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people"
(jfly.uni-koeln.de/color); Tol, P. (2021) "Colour Schemes", SRON technical note
SRON/EPS/TN/09-002, issue 3.2, "light" scheme (hex values from memory).
"""
from __future__ import annotations

import base64
import datetime as dt
import functools
import json
import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pyproj
import shapely
from markupsafe import Markup

from ..model import Design, Route, Visit
from . import template_environment
from .gpx import trips
from .table import day_numbers, format_time, ordered_visits, reserve_label

__all__ = ["FILE_NAME", "DESIGN_BLOCK_ID", "DESIGN_FORMAT", "STRATUM_COLOURS", "ROUTE_COLOURS", "ROUTE_DASHES",
           "day_style", "design_block", "read_design_block", "outline_tolerance_m", "render_map",
           "write_map"]

FILE_NAME = "map.html"
#: id of the ``<script type="application/json">`` element that holds :func:`design_block`.
DESIGN_BLOCK_ID = "geosample-design"
DESIGN_FORMAT = "geosample-map-design/1"
LAYERS_BLOCK_ID = "geosample-layers"

#: Strata fills: Paul Tol's "light" qualitative scheme (Tol 2021; pale grey left out).
STRATUM_COLOURS = ("#77AADD", "#EE8866", "#EEDD88", "#FFAABB", "#99DDFF", "#44BB99", "#BBCC33", "#AAAA00")
#: Day routes and site rings: the darker colours of Okabe & Ito (2008), then black.
ROUTE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#000000")
#: Dash patterns, cycled after every colour has been used once.
ROUTE_DASHES = (None, "10 6", "3 6")
CLOSED_COLOUR = "#555555"
WATER_EDGE = "#4477AA"  # Tol "bright" blue, for the shoreline

_STATIC = Path(__file__).with_name("static")
_TEMPLATES = Path(__file__).with_name("templates")
_DECIMALS = 6  # about 0.1 m; enough for a map
#: Outlines: lat/lon stored as integers of 1e-5 degree (about 1 m), each vertex as the step from the last.
_OUTLINE_SCALE = 100_000
#: The outline tolerance is the water's extent (bounding-box diagonal) divided by this.
_OUTLINE_FRACTION = 4000
#: Budget for the outlines in the page; the tolerance is raised until they fit (issue 14: map <= 10 MB).
OUTLINE_BUDGET_BYTES = 7 * 2**20
_LEGEND_STRATA = 12  # strata listed by name in the legend; more are counted


# --------------------------------------------------------------------------- assets
@functools.lru_cache(maxsize=1)
def _leaflet_assets() -> tuple[str, str]:
    """Leaflet's JS and CSS, the CSS's images inlined as data: URIs."""
    js = (_STATIC / "leaflet.js").read_text(encoding="utf-8")
    css = (_STATIC / "leaflet.css").read_text(encoding="utf-8")

    def inline(m: re.Match) -> str:
        data = base64.b64encode((_STATIC / m.group(1)).read_bytes()).decode("ascii")
        return f"url(data:image/png;base64,{data})"

    css = re.sub(r"url\(images/([A-Za-z0-9_.-]+\.png)\)", inline, css)
    # No source map: a browser's developer tools would try to fetch it.
    js = re.sub(r"^//# sourceMappingURL=.*$", "", js, flags=re.M)
    if "</script" in js.lower() or "</style" in css.lower():  # pragma: no cover - vendored files are checked
        raise RuntimeError("vendored Leaflet assets contain a closing tag and cannot be inlined")
    return js, css


@functools.lru_cache(maxsize=1)
def _page_assets() -> tuple[str, str]:
    """The page's own script and style (plain files, not templates: nothing is substituted into them)."""
    return (_TEMPLATES / "map.js").read_text(encoding="utf-8"), (_TEMPLATES / "map.css").read_text(encoding="utf-8")


# --------------------------------------------------------------------------- helpers
def _json_block(obj: Any) -> str:
    """``obj`` as JSON that is safe inside ``<script>`` (``< > & '`` and non-ASCII as ``\\u`` escapes)."""
    text = json.dumps(obj, ensure_ascii=True, separators=(",", ":"), sort_keys=True, allow_nan=False)
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("'", "\\u0027"))


def _round(v: float) -> float:
    return round(float(v), _DECIMALS)


def day_style(k: int) -> tuple[str, str | None]:
    """Colour and dash pattern of the ``k``-th field day (0-based).

    Examples
    --------
    >>> day_style(0), day_style(5)
    (('#0072B2', None), ('#0072B2', '10 6'))
    """
    n = len(ROUTE_COLOURS)
    return ROUTE_COLOURS[k % n], ROUTE_DASHES[(k // n) % len(ROUTE_DASHES)]


# --------------------------------------------------------------------------- design data
def _site(v: Visit, code: str, days: dict[dt.date, int]) -> dict:
    scheduled = v.role == "primary" and v.visit_date is not None
    return {
        "id": v.site_id, "stratum": v.stratum, "code": code, "role": v.role, "rank": int(v.reserve_rank),
        "label": (str(int(v.route_order)) if scheduled and v.route_order is not None else "") if v.role == "primary"
        else reserve_label(code, v.reserve_rank),
        "day": days[v.visit_date] if scheduled else None,
        "date": v.visit_date.isoformat() if scheduled else None,
        "planned_time": format_time(v.planned_time) if scheduled else None,
        "order": int(v.route_order) if scheduled and v.route_order is not None else None,
        "lat": _round(v.lat), "lon": _round(v.lon), "x": round(float(v.x), 1), "y": round(float(v.y), 1),
    }


def _route(r: Route, name: str, day: int, first: dt.datetime | None, lab_minutes: float,
           holding_h: float | None) -> dict:
    lab_h = None
    if r.end is not None and first is not None:
        # timestamps, not aware-datetime subtraction: two times in one ZoneInfo subtract on the
        # wall clock, an hour off across a daylight-saving change
        lab_h = round(((r.end.timestamp() - first.timestamp()) / 60 + lab_minutes) / 60, 2)
    return {
        "day": day, "date": r.date.isoformat(), "name": name, "access": r.access, "sites": list(r.site_ids),
        "length_m": round(float(r.length_m), 1), "start": format_time(r.start) if r.start else None,
        "end": format_time(r.end) if r.end else None, "first_to_lab_h": lab_h,
        "holding_h": float(holding_h) if holding_h else None, "holding_ok": bool(r.lab_deadline_ok),
        "notes": list(r.notes), "coords": [[_round(lat), _round(lon)] for lon, lat in r.coords_lonlat],
    }


def design_block(design: Design) -> dict:
    """The design as the map draws it: strata, field days, routes, sites and access points.

    This is the content of the page's ``geosample-design`` block (sorted keys, JSON).
    Coordinates are WGS 84 rounded to 6 decimals; times are ISO 8601 with the UTC offset,
    as in ``schedule.csv``; ``day`` is the crew-day number of ``schedule.csv``.
    """
    alloc = design.allocation.as_dict()
    codes = {s.name: s.code for s in design.frame.strata}
    strata = [{"name": s.name, "code": s.code, "colour": STRATUM_COLOURS[i % len(STRATUM_COLOURS)],
               "n": int(alloc.get(s.name, 0)), "area_km2": round(s.area_m2 / 1e6, 4), "weight": round(s.weight, 4)}
              for i, s in enumerate(design.frame.strata)]
    visits = ordered_visits(design)
    days = day_numbers(visits)
    t = design.settings.get("time", {})
    lab_minutes = float(t.get("lab_minutes") or 0)
    holding_h = t.get("holding_h")
    by_id = {v.site_id: v for v in visits}
    routes = []
    for trip in trips(design):  # the GPX's names and crew-day numbers
        r = trip.route
        first = min((by_id[s].planned_time for s in r.site_ids if s in by_id and by_id[s].planned_time),
                    default=None)
        routes.append(_route(r, trip.name, trip.day, first, lab_minutes, holding_h))
    day_list = []
    for date, k in sorted(days.items(), key=lambda kv: kv[1]):
        colour, dash = day_style(k - 1)
        n = sum(1 for v in visits if v.role == "primary" and v.visit_date == date)
        day_list.append({"day": k, "date": date.isoformat(), "colour": colour, "dash": dash, "sites": n})
    access = [{"name": a.name, "lat": _round(a.lat), "lon": _round(a.lon), "x": round(float(a.x), 1),
               "y": round(float(a.y), 1), "snapped_m": round(float(a.snapped_m), 1)} for a in design.frame.access]
    return {
        "format": DESIGN_FORMAT,
        "title": design.survey.get("title") or "Sampling design",
        "parameter": design.survey.get("parameter") or "",
        "strata": strata,
        "days": day_list,
        "routes": routes,
        "sites": [_site(v, codes.get(v.stratum, v.stratum), days) for v in visits],
        "access": access,
    }


def read_design_block(text: str) -> dict:
    """The :func:`design_block` written in a ``map.html`` (its text), for comparing designs, not bytes.

    Raises
    ------
    ValueError
        The page has no design block.
    """
    m = re.search(r'<script type="application/json" id="' + DESIGN_BLOCK_ID + r'">(.*?)</script>', text, re.S)
    if m is None:
        raise ValueError(f"no <script id=\"{DESIGN_BLOCK_ID}\"> block in the map page")
    return json.loads(m.group(1))


# --------------------------------------------------------------------------- outlines
def _polygons(geom: Any) -> np.ndarray:
    """The polygons of ``geom`` (any nesting of multi-parts and collections)."""
    parts = np.asarray([geom], dtype=object)
    while True:
        types = shapely.get_type_id(parts)
        if not np.isin(types, (4, 5, 6, 7)).any():
            break
        parts = shapely.get_parts(parts)
    return parts[(shapely.get_type_id(parts) == 3) & ~shapely.is_empty(parts)]


def outline_tolerance_m(water: Any) -> float:
    """Display tolerance of the outlines (metres): the water's bounding-box diagonal / 4000.

    At the whole-water view that is about a quarter of a pixel on a 1,000-pixel screen, so the
    simplification shows only when zoomed in; a 5 km lake gets 1.25 m, a 400 km region 100 m.

    Examples
    --------
    >>> outline_tolerance_m(shapely.box(0, 0, 3000, 4000))
    1.25
    """
    x0, y0, x1, y1 = shapely.bounds(water)
    return math.hypot(x1 - x0, y1 - y0) / _OUTLINE_FRACTION


def _encode_outline(geom: Any, transformer: pyproj.Transformer, tolerance: float) -> str:
    """``geom`` as JSON text: a list of polygons, each a list of rings, each ``[lat0, lon0, dlat, dlon, ...]``.

    Simplified by ``tolerance`` metres, each polygon on its own (Douglas-Peucker; a polygon it would
    erase keeps a simplified ring instead): outlines move by at most ``tolerance``, neighbours may part
    or overlap by that much and a ring may cross itself, which a display allows; lat/lon
    in 1e-5 degree integers, the first vertex of a ring absolute, each next one as the step from the
    last; the closing vertex left out.
    """
    if geom is None or shapely.is_empty(geom):
        return "[]"
    polys = _polygons(geom)
    if tolerance > 0:
        # Polygon by polygon (one call on a whole MultiPolygon grows with its square); the fast
        # Douglas-Peucker first, the topology-keeping one only for the polygons it would erase.
        simple = shapely.simplify(polys, tolerance, preserve_topology=False)
        gone = shapely.is_empty(simple) | (shapely.area(simple) <= 0)
        simple[gone] = shapely.simplify(polys[gone], tolerance, preserve_topology=True)
        polys = _polygons(shapely.geometrycollections(simple))
    if len(polys) == 0:
        return "[]"
    rings, ring_poly = shapely.get_rings(polys, return_index=True)
    xy, coord_ring = shapely.get_coordinates(rings, return_index=True)
    # Drop each ring's closing vertex.
    last = np.r_[np.flatnonzero(np.diff(coord_ring)), len(coord_ring) - 1]
    keep = np.ones(len(coord_ring), bool)
    keep[last] = False
    xy, coord_ring = xy[keep], coord_ring[keep]
    lon, lat = transformer.transform(xy[:, 0], xy[:, 1])
    q = np.round(np.column_stack([lat, lon]) * _OUTLINE_SCALE).astype(np.int64)
    steps = np.diff(q, axis=0, prepend=np.zeros((1, 2), np.int64))
    starts = np.r_[0, np.flatnonzero(np.diff(coord_ring)) + 1]
    steps[starts] = q[starts]
    cells = steps.ravel().astype(str)
    bounds = np.r_[starts, len(coord_ring)] * 2
    ring_text = [",".join(cells[a:b]) for a, b in zip(bounds[:-1], bounds[1:])]
    present = coord_ring[starts]  # rings that kept vertices, in order
    owner = ring_poly[present]
    out: list[str] = []
    current, buf = -1, []
    for text, p in zip(ring_text, owner):
        if p != current and buf:
            out.append("[[" + "],[".join(buf) + "]]")
            buf = []
        current = p
        buf.append(text)
    if buf:
        out.append("[[" + "],[".join(buf) + "]]")
    return "[" + ",".join(out) + "]"


def _outlines(design: Design, tolerance: float) -> dict[str, Any]:
    frame = design.frame
    tr = pyproj.Transformer.from_crs(pyproj.CRS.from_user_input(frame.crs), "EPSG:4326", always_xy=True)
    water = frame.water if frame.water is not None else shapely.union_all([s.geometry for s in frame.strata])
    # Water outside the frame is drawn only where there is some (saves the outlines twice).
    outside = None
    if frame.water_area_m2 - frame.area_m2 > 1e-6 * max(frame.water_area_m2, 1.0):
        outside = water
    closed = None
    if frame.exclusions is not None and not shapely.is_empty(frame.exclusions):
        closed = shapely.intersection(frame.exclusions, water)
        if shapely.is_empty(closed):
            closed = frame.exclusions
    return {
        "water": _encode_outline(outside, tr, tolerance),
        "strata": [_encode_outline(s.geometry, tr, tolerance) for s in frame.strata],
        "closed": _encode_outline(closed, tr, tolerance),
    }


def _outlines_within_budget(design: Design) -> tuple[dict[str, Any], float]:
    frame = design.frame
    water = frame.water if frame.water is not None else shapely.union_all([s.geometry for s in frame.strata])
    tolerance = outline_tolerance_m(water)
    while True:
        parts = _outlines(design, tolerance)
        size = len(parts["water"]) + sum(len(s) for s in parts["strata"]) + len(parts["closed"])
        if size <= OUTLINE_BUDGET_BYTES or tolerance > 1e5:
            return parts, tolerance
        tolerance *= 2


def _layers_json(parts: dict[str, Any], tolerance: float) -> str:
    return ('{"closed":' + parts["closed"] + ',"scale":' + str(_OUTLINE_SCALE) + ',"strata":['
            + ",".join(parts["strata"]) + '],"tolerance_m":' + json.dumps(round(tolerance, 2)) + ',"water":'
            + parts["water"] + "}")


# --------------------------------------------------------------------------- page
def _legend_context(data: dict, tolerance: float) -> dict:
    strata = data["strata"]
    return {
        "title": data["title"],
        "parameter": data["parameter"],
        "strata": strata[:_LEGEND_STRATA],
        "more_strata": max(0, len(strata) - _LEGEND_STRATA),
        "days": data["days"],
        "n_reserves": sum(1 for s in data["sites"] if s["role"] != "primary"),
        "tolerance": f"{tolerance:.0f}" if tolerance >= 1 else "1",
    }


def render_map(design: Design, *, tiles: str | None = None, attribution: str | None = None) -> str:
    """``map.html`` as text.

    Parameters
    ----------
    design : Design
    tiles : str, optional
        A tile URL template offered as a basemap overlay, off by default. Without it the
        map has no basemap and makes no request.
    attribution : str, optional
        The tiles' attribution (required by most tile providers).

    Returns
    -------
    str
    """
    data = design_block(design)
    parts, tolerance = _outlines_within_budget(design)
    frame = design.frame
    has_closed = parts["closed"] != "[]"
    options = {"tiles": tiles or None, "attribution": attribution or "", "water_edge": WATER_EDGE,
               "closed_colour": CLOSED_COLOUR, "has_water": parts["water"] != "[]"}
    leaflet_js, leaflet_css = _leaflet_assets()
    page_js, page_css = _page_assets()
    ctx = _legend_context(data, tolerance)
    ctx.update(has_closed=has_closed, has_access=bool(frame.access), has_water=options["has_water"])
    env = template_environment()
    text = env.get_template("map.html.j2").render(
        title=data["title"], leaflet_css=Markup(leaflet_css), leaflet_js=Markup(leaflet_js),
        page_css=Markup(page_css), page_js=Markup(page_js), legend=ctx,
        design_json=Markup(_json_block(data)), layers_json=Markup(_layers_json(parts, tolerance)),
        options_json=Markup(_json_block(options)), design_id=DESIGN_BLOCK_ID, layers_id=LAYERS_BLOCK_ID)
    return text if text.endswith("\n") else text + "\n"


def write_map(design: Design, path: str | Path, *, tiles: str | None = None,
              attribution: str | None = None) -> Path:
    """Write ``map.html`` (self-contained, offline; see the module docstring).

    Parameters
    ----------
    design : Design
    path : str or Path
        The file to write (replaced if it exists).
    tiles, attribution : str, optional
        An optional basemap overlay, off by default (:func:`render_map`).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    path.write_text(render_map(design, tiles=tiles, attribution=attribution), encoding="utf-8", newline="\n")
    return path
