"""The field map: ``map.html``, one self-contained page that works with no network.

What it shows (folium builds it, Leaflet draws it):

- the water outside the frame (white), the strata filled with Paul Tol's *light*
  qualitative scheme (colour-blind safe, designed for filled areas under dark
  labels), the closed areas hatched grey;
- the access points (black diamonds);
- one layer per field day with its route over water and its sites, each a
  numbered disc (the number is the stop in that day's route; the disc's ring
  and the route line share the day's colour from Okabe & Ito's palette, with a
  dash pattern after the fifth day);
- the reserves in a layer that is off by default (a square labelled with the
  reserve rank: use them only in rank order);
- popups (site id, stratum, role, date, planned time, coordinates), a legend,
  a layer control and a scale bar.

Offline: a crew on the water often has no signal, so the page needs nothing
from the network. Leaflet's JavaScript and CSS (vendored in ``static/``, with
its licence) are inlined, the few images its CSS names become ``data:`` URIs,
and folium's CDN links (Leaflet, jQuery, Bootstrap, Font Awesome) are not
written: nothing here needs them (popups and tooltips are bound with plain
Leaflet calls). There is no basemap by default; :func:`write_map` can add a
tile layer as an overlay that is off until the user turns it on, so the page
makes no request unless asked to (see ``docs/offline-map.md``).

Every user text (title, stratum names, site ids, access point names) is escaped
for HTML, and for JavaScript where it sits in a script (:func:`json.dumps` with
``<``, ``>``, ``&`` and ``'`` as ``\\u`` escapes). folium gives its elements
random ids; they are renumbered in tree order before rendering so the same
design always gives the same bytes.

Palettes: Okabe, M. & Ito, K. (2008) "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people"
(jfly.uni-koeln.de/color); Tol, P. (2021) "Colour Schemes", SRON technical note
SRON/EPS/TN/09-002, issue 3.2, "light" scheme (hex values from memory).
"""
from __future__ import annotations

import base64
import datetime as dt
import functools
import html
import itertools
import json
import re
from collections import OrderedDict
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import folium
import numpy as np
import pyproj
import shapely
from branca.element import Element
from shapely.geometry import mapping

from ..model import Design, Route, Visit
from . import template_environment
from .table import day_numbers, ordered_visits

__all__ = ["FILE_NAME", "STRATUM_COLOURS", "ROUTE_COLOURS", "ROUTE_DASHES", "render_map", "write_map"]

FILE_NAME = "map.html"

#: Strata fills: Paul Tol's "light" qualitative scheme (Tol 2021; pale grey left out).
STRATUM_COLOURS = ("#77AADD", "#EE8866", "#EEDD88", "#FFAABB", "#99DDFF", "#44BB99", "#BBCC33", "#AAAA00")
#: Day routes and site rings: the darker colours of Okabe & Ito (2008), then black.
ROUTE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#000000")
#: Dash patterns, cycled after every colour has been used once.
ROUTE_DASHES = (None, "10 6", "3 6")
CLOSED_COLOUR = "#555555"
WATER_EDGE = "#4477AA"  # Tol "bright" blue, for the shoreline

_STATIC = Path(__file__).with_name("static")
_DECIMALS = 6  # about 0.1 m; enough for a map


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


# --------------------------------------------------------------------------- helpers
def _lonlat_transformer(crs: Any) -> pyproj.Transformer:
    return pyproj.Transformer.from_crs(pyproj.CRS.from_user_input(crs), "EPSG:4326", always_xy=True)


def _to_lonlat(geom: Any, transformer: pyproj.Transformer) -> Any:
    """A shapely geometry from the frame CRS to lon/lat, rounded to :data:`_DECIMALS`."""

    def fn(xy: np.ndarray) -> np.ndarray:
        lon, lat = transformer.transform(xy[:, 0], xy[:, 1])
        return np.round(np.column_stack([lon, lat]), _DECIMALS)

    return shapely.transform(geom, fn)


def _feature(geom: Any) -> dict:
    return {"type": "FeatureCollection",
            "features": [{"type": "Feature", "properties": {}, "geometry": mapping(geom)}]}


def _ll(lat: float, lon: float) -> list[float]:
    return [round(float(lat), _DECIMALS), round(float(lon), _DECIMALS)]


def _esc(value: Any) -> str:
    """HTML-escape user text; braces too, so no text can open a template tag when folium re-reads a script."""
    return html.escape(str(value), quote=True).replace("{", "&#123;").replace("}", "&#125;")


def _js(obj: Any) -> str:
    """``obj`` as a JavaScript literal that is safe inside ``<script>`` (JSON, ``< > & '`` and non-ASCII escaped)."""
    text = json.dumps(obj, ensure_ascii=True, separators=(",", ":"))
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("'", "\\u0027"))


def _popup(title: str, rows: Sequence[tuple[str, Any]]) -> str:
    """Popup HTML: an escaped title and a two-column table of escaped cells."""
    body = "".join(f"<tr><th>{_esc(k)}</th><td>{_esc(v)}</td></tr>" for k, v in rows)
    return f'<div class="gs-popup"><b>{_esc(title)}</b><table>{body}</table></div>'


def _clock(t: dt.datetime | None) -> str:
    if t is None:
        return ""
    z = t.strftime("%z")
    return t.strftime("%Y-%m-%d %H:%M") + (f" (UTC{z[:3]}:{z[3:]})" if z else "")


def _coords(v: Any) -> str:
    return f"{v.lat:.6f}, {v.lon:.6f}"


def _km(m: float) -> str:
    return f"{m / 1000:.1f} km"


def day_style(k: int) -> tuple[str, str | None]:
    """Colour and dash pattern of the ``k``-th field day (0-based).

    Examples
    --------
    >>> day_style(0), day_style(5)
    (('#0072B2', None), ('#0072B2', '10 6'))
    """
    n = len(ROUTE_COLOURS)
    return ROUTE_COLOURS[k % n], ROUTE_DASHES[(k // n) % len(ROUTE_DASHES)]


class _Raw(Element):
    """Text written into the page as it is (branca would otherwise compile it as a jinja template)."""

    def __init__(self, text: str):
        super().__init__()
        self._name = "Raw"
        self.text = text

    def render(self, **kwargs: Any) -> str:
        return self.text


class _Script(Element):
    """JavaScript added to the page's script after its parent's, built from the parent's JS name.

    folium's own elements pass their rendered script through jinja a second time; this one
    does not, so user text in it can never be read as a template.
    """

    def __init__(self, build: Callable[[str], str]):
        super().__init__()
        self._name = "Script"
        self._build = build

    def render(self, **kwargs: Any) -> str:
        self.get_root().script.add_child(_Raw(self._build(self._parent.get_name())), name=self.get_name())
        return ""


def _bind(layer: Element, popup: str | None = None, tooltip: str | None = None) -> None:
    """Bind a popup (HTML, already escaped) and a tooltip (HTML, already escaped) to ``layer``."""

    def build(name: str) -> str:
        out = name
        if popup:
            out += f".bindPopup({_js(popup)},{_js(_POPUP_OPTIONS)})"
        if tooltip:
            out += f".bindTooltip({_js(tooltip)},{_js(_TOOLTIP_OPTIONS)})"
        return out + ";\n"

    layer.add_child(_Script(build))


_POPUP_OPTIONS = {"maxWidth": 400}
_TOOLTIP_OPTIONS = {"direction": "top", "offset": [0, -12]}

# Markers of one layer: [lat, lon, label HTML, popup HTML, tooltip HTML] each, drawn as DivIcons
# (no image, so nothing to fetch).
_MARKERS_JS = """(function (group, sites, style) {
  for (var i = 0; i < sites.length; i++) {
    var s = sites[i];
    var icon = L.divIcon({html: '<div class="' + style.inner + '" style="border-color:' + style.ring + '">' + s[2]
      + '</div>', className: style.cls, iconSize: style.size, iconAnchor: style.anchor});
    L.marker([s[0], s[1]], {icon: icon}).bindPopup(s[3], style.popup).bindTooltip(s[4], style.tooltip)
      .addTo(group);
  }
})(%s, %s, %s);
"""

_LEGEND_JS = """(function (map) {
  var box = document.getElementById("gs-legend");
  var control = L.control({position: "topright"});
  control.onAdd = function () {
    L.DomEvent.disableClickPropagation(box);
    L.DomEvent.disableScrollPropagation(box);
    box.style.display = "block";
    return box;
  };
  control.addTo(map);
})(%s);
"""


def _markers(group: Element, sites: list[list[Any]], *, inner: str, cls: str, ring: str,
             size: tuple[int, int]) -> None:
    style = {"inner": inner, "cls": cls, "ring": ring, "size": list(size), "anchor": [size[0] // 2, size[1] // 2],
             "popup": _POPUP_OPTIONS, "tooltip": _TOOLTIP_OPTIONS}
    group.add_child(_Script(lambda name: _MARKERS_JS % (name, _js(sites), _js(style))))


def _renumber(root: Element) -> None:
    """Give every element of the tree a sequential id (folium's are random), keeping names unique."""
    counter = itertools.count()
    seen: set[int] = set()

    def visit(el: Element) -> None:
        if id(el) in seen:
            return
        seen.add(id(el))
        old = [(key, child, key == child.get_name()) for key, child in el._children.items()]
        el._id = f"{next(counter):05d}"
        for _, child, _same in old:
            visit(child)
        for attr in ("header", "html", "script"):
            sub = getattr(el, attr, None)
            if isinstance(sub, Element):
                visit(sub)
        el._children = OrderedDict((child.get_name() if same else key, child) for key, child, same in old)

    visit(root)


# --------------------------------------------------------------------------- layers
def _site_popup(v: Visit, day: int | None) -> str:
    rows: list[tuple[str, Any]] = [("Stratum", v.stratum)]
    if v.role == "primary":
        rows += [("Role", "primary"), ("Date", v.visit_date.isoformat() if v.visit_date else ""),
                 ("Planned time", _clock(v.planned_time)),
                 ("Day, stop", f"day {day}, stop {v.route_order}" if day else "")]
    else:
        rows += [("Role", f"reserve, rank {v.reserve_rank}"),
                 ("Use", "only to replace a primary of this stratum, in rank order")]
    rows += [("Lat, lon (WGS 84)", _coords(v)), ("x, y (m)", f"{v.x:.1f}, {v.y:.1f}")]
    return _popup(v.site_id, rows)


def _route_popup(name: str, route: Route, first: dt.datetime | None, lab_minutes: float,
                 holding_h: float | None) -> str:
    rows: list[tuple[str, Any]] = [("Access point", route.access or "(none)"), ("Sites", len(route.site_ids)),
                                   ("Length over water", _km(route.length_m))]
    if route.start is not None and route.end is not None:
        rows.append(("Leave, back", f"{route.start.strftime('%H:%M')}, {route.end.strftime('%H:%M')}"))
        if first is not None:
            age_h = ((route.end - first).total_seconds() / 60 + lab_minutes) / 60
            limit = f" (limit {holding_h:g} h)" if holding_h else ""
            rows.append(("First sample to lab", f"{age_h:.1f} h{limit}"))
    rows.append(("Holding time", "met" if route.lab_deadline_ok else "NOT met"))
    rows += [("Note", n) for n in route.notes]
    return _popup(name, rows)


def _trip_names(design: Design, days: dict[dt.date, int]) -> list[tuple[Route, str, int]]:
    """Each route with its name ("Day 3 2027-06-14", "... trip 2") and its crew-day number."""
    from .gpx import route_name

    routes = sorted(design.schedule.routes, key=lambda r: (r.date, r.day_index))
    per_date: dict[dt.date, list[Route]] = {}
    for r in routes:
        per_date.setdefault(r.date, []).append(r)
    out = []
    for date, trips in per_date.items():
        day = days.get(date) or (sorted(per_date).index(date) + 1)
        for k, r in enumerate(trips, start=1):
            out.append((r, route_name(day, r, k, len(trips)), day))
    return out


def _line_swatch(colour: str, dash: str | None) -> str:
    """A short line in the day's colour and dash pattern (SVG), for the layer list and the legend."""
    pattern = f' stroke-dasharray="{dash}"' if dash else ""
    return (f'<svg class="gs-line" width="28" height="10" aria-hidden="true"><line x1="1" y1="5" x2="27" y2="5" '
            f'stroke="{colour}" stroke-width="3.5"{pattern}/></svg>')


def _legend_context(design: Design, day_entries: list[dict]) -> dict:
    alloc = design.allocation.as_dict()
    strata = [{"name": s.name, "colour": STRATUM_COLOURS[i % len(STRATUM_COLOURS)], "n": alloc.get(s.name, 0)}
              for i, s in enumerate(design.frame.strata)]
    return {
        "title": design.survey.get("title") or "Sampling design",
        "parameter": design.survey.get("parameter") or "",
        "strata": strata,
        "has_closed": design.frame.exclusions is not None and not shapely.is_empty(design.frame.exclusions),
        "has_access": bool(design.frame.access),
        "days": day_entries,
        "n_reserves": sum(1 for v in design.schedule.visits if v.role != "primary"),
        "closed_colour": CLOSED_COLOUR,
        "water_edge": WATER_EDGE,
    }


def build_map(design: Design, *, tiles: str | None = None, attribution: str | None = None) -> folium.Map:
    """The folium map of ``design`` (not yet renumbered or inlined; see :func:`render_map`)."""
    frame = design.frame
    tr = _lonlat_transformer(frame.crs)
    water = frame.water if frame.water is not None else shapely.union_all([s.geometry for s in frame.strata])
    water_ll = _to_lonlat(water, tr)
    west, south, east, north = water_ll.bounds
    title = design.survey.get("title") or "Sampling design"

    # A far-out start zoom makes Leaflet jump to the fitted view (no zoom animation, so the page is
    # still at once; Leaflet animates only zoom changes up to zoomAnimationThreshold = 4).
    m = folium.Map(location=[(south + north) / 2, (west + east) / 2], zoom_start=2, tiles=None,
                   control_scale=True, prefer_canvas=False)
    m.default_js = []  # Leaflet is inlined below; nothing needs jQuery, Bootstrap or Font Awesome
    m.default_css = []
    m.options["max_zoom"] = 20
    m.get_root().title = _esc(title)

    base = folium.FeatureGroup(name=_esc("Water and strata"), control=True, show=True)
    folium.GeoJson(_feature(water_ll), style_function=lambda _: {
        "color": WATER_EDGE, "weight": 1.5, "fillColor": "#FFFFFF", "fillOpacity": 1.0}, control=False,
        smooth_factor=0.5).add_to(base)
    alloc = design.allocation.as_dict()
    for i, s in enumerate(frame.strata):
        colour = STRATUM_COLOURS[i % len(STRATUM_COLOURS)]
        gj = folium.GeoJson(_feature(_to_lonlat(s.geometry, tr)), style_function=lambda _, c=colour: {
            "color": "#333333", "weight": 0.8, "fillColor": c, "fillOpacity": 0.75}, control=False,
            smooth_factor=0.5)
        _bind(gj, popup=_popup(s.name, [("Stratum code", s.code), ("Area", f"{s.area_m2 / 1e6:.3f} km²"),
                                        ("Weight", f"{s.weight:.3f}"), ("Primary sites", alloc.get(s.name, 0))]))
        gj.add_to(base)
    base.add_to(m)

    if frame.exclusions is not None and not shapely.is_empty(frame.exclusions):
        closed = folium.FeatureGroup(name=_esc("Closed areas"), show=True)
        clipped = shapely.intersection(frame.exclusions, water) if water is not None else frame.exclusions
        if shapely.is_empty(clipped):
            clipped = frame.exclusions
        gj = folium.GeoJson(_feature(_to_lonlat(clipped, tr)), style_function=lambda _: {
            "color": "#222222", "weight": 1.2, "dashArray": "4 3", "fillColor": CLOSED_COLOUR,
            "fillOpacity": 0.9}, control=False, class_name="gs-closed", smooth_factor=0.5)
        _bind(gj, popup=_popup("Closed", [("", "Excluded from the frame: no site is drawn here.")]))
        gj.add_to(closed)
        closed.add_to(m)

    visits = ordered_visits(design)
    days = day_numbers(visits)
    t = design.settings.get("time", {})
    lab_minutes = float(t.get("lab_minutes") or 0)
    holding_h = t.get("holding_h")
    by_id = {v.site_id: v for v in visits}
    day_entries: list[dict] = []
    groups: dict[dt.date, folium.FeatureGroup] = {}
    sites_of_day: dict[dt.date, list[list[Any]]] = {}
    for date in sorted(days):
        colour, dash = day_style(days[date] - 1)
        n_sites = sum(1 for v in visits if v.role == "primary" and v.visit_date == date)
        label = f"Day {days[date]} · {date.isoformat()} ({n_sites} site{'' if n_sites == 1 else 's'})"
        groups[date] = folium.FeatureGroup(name=_line_swatch(colour, dash) + _esc(label), show=True)
        day_entries.append({"label": f"Day {days[date]} · {date.isoformat()}", "colour": colour,
                            "dash": dash or "none"})
    for r, name, day in _trip_names(design, days):
        if r.date not in groups:  # a route with no scheduled visit: still show it
            groups[r.date] = folium.FeatureGroup(name=_esc(name), show=True)
        colour, dash = day_style(day - 1)
        first = min((by_id[s].planned_time for s in r.site_ids if s in by_id and by_id[s].planned_time), default=None)
        line = folium.PolyLine([_ll(lat, lon) for lon, lat in r.coords_lonlat], color=colour, weight=3.5,
                               opacity=0.9, dash_array=dash, class_name="gs-route")
        _bind(line, popup=_route_popup(name, r, first, lab_minutes, holding_h), tooltip=_esc(name))
        line.add_to(groups[r.date])
    for v in visits:
        if v.role != "primary" or v.visit_date is None:
            continue
        day = days[v.visit_date]
        number = "" if v.route_order is None else str(int(v.route_order))
        sites_of_day.setdefault(v.visit_date, []).append(
            _ll(v.lat, v.lon) + [_esc(number), _site_popup(v, day), _esc(f"{v.site_id} · day {day}, stop {number}")])
    for date in sorted(groups):
        if date in sites_of_day:
            _markers(groups[date], sites_of_day[date], inner="gs-pin", cls="gs-marker gs-site",
                     ring=day_style(days[date] - 1)[0], size=(26, 26))
        groups[date].add_to(m)

    reserves = [v for v in visits if v.role != "primary"]
    if reserves:
        rgroup = folium.FeatureGroup(name=_esc(f"Reserves ({len(reserves)}; use in rank order)"), show=False)
        _markers(rgroup, [_ll(v.lat, v.lon) + [_esc(f"R{int(v.reserve_rank)}"), _site_popup(v, None),
                                               _esc(f"{v.site_id} · reserve {v.reserve_rank}")] for v in reserves],
                 inner="gs-res", cls="gs-marker gs-reserve", ring="#333333", size=(30, 20))
        rgroup.add_to(m)

    if frame.access:
        agroup = folium.FeatureGroup(name=_esc("Access points"), show=True)
        rows = []
        for a in frame.access:
            cells = [("Lat, lon (WGS 84)", f"{a.lat:.6f}, {a.lon:.6f}"), ("x, y (m)", f"{a.x:.1f}, {a.y:.1f}")]
            if a.snapped_m:
                cells.append(("Moved to the water", f"{a.snapped_m:.0f} m"))
            rows.append(_ll(a.lat, a.lon) + ["", _popup(a.name, cells), _esc(a.name)])
        _markers(agroup, rows, inner="gs-acc", cls="gs-marker gs-access", ring="#FFFFFF", size=(18, 18))
        agroup.add_to(m)

    if tiles:
        folium.TileLayer(tiles=tiles, attr=attribution or "", name=_esc("Basemap (needs a network)"),
                         overlay=True, control=True, show=False).add_to(m)

    env = template_environment()
    root = m.get_root()
    root.header.add_child(_Raw(f"<style>\n{env.get_template('map.css').render()}</style>\n"), name="gs_style")
    legend = env.get_template("map_legend.html.j2").render(**_legend_context(design, day_entries))
    root.html.add_child(_Raw(legend), name="gs_legend")
    folium.LayerControl(collapsed=False, position="topright").add_to(m)
    # The legend goes in the same corner, below the layer list (Leaflet stacks controls: no overlap).
    m.add_child(_Script(lambda name: _LEGEND_JS % name), name="gs_legend_control")
    # Keep the lake clear of the layer list and the legend (top right).
    m.fit_bounds([[south, west], [north, east]], padding_top_left=(20, 20), padding_bottom_right=(320, 20))
    return m


def render_map(design: Design, *, tiles: str | None = None, attribution: str | None = None) -> str:
    """``map.html`` as text: the folium map with Leaflet inlined and ids made deterministic.

    Parameters
    ----------
    design : Design
    tiles : str, optional
        A tile URL template (or a folium tile name) offered as a basemap overlay,
        off by default. Without it the map has no basemap and makes no request.
    attribution : str, optional
        The tiles' attribution (required by most tile providers).

    Returns
    -------
    str
    """
    m = build_map(design, tiles=tiles, attribution=attribution)
    js, css = _leaflet_assets()
    root = m.get_root()
    # Leaflet first in the head, before folium's own style and the map script.
    header = root.header
    assets = OrderedDict([("leaflet_css", _Raw(f"<style>\n{css}\n</style>\n")),
                          ("leaflet_js", _Raw(f"<script>\n{js}\n</script>\n"))])
    for key, el in assets.items():
        el._parent = header
    header._children = OrderedDict(list(header._children.items())[:1] + list(assets.items())
                                   + list(header._children.items())[1:])
    _renumber(root)
    text = root.render()
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
