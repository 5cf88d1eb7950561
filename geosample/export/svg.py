"""Small static maps as inline SVG, for printed pages (the day sheets and the report).

No network, no tiles, no script: land in grey, the frame's water, strata, closed areas, routes
and sites, drawn from the frame's metric CRS (so a metre is a metre in both
directions, and up is grid north), clipped to an extent, with a scale bar.
Coordinates are rounded to 0.1 px so identical designs give identical bytes.
Every label is escaped (:func:`html.escape`).

Colours are those of the map (``export/map.py``): strata from Paul Tol's *light*
scheme, routes from Okabe & Ito (2008), both colour-blind safe.
"""
from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
import shapely
from shapely.geometry import MultiPolygon, Polygon

__all__ = ["Marker", "Line", "svg_map", "padded_extent", "nice_length"]

STRATUM_COLOURS = ("#77AADD", "#EE8866", "#EEDD88", "#FFAABB", "#99DDFF", "#44BB99", "#BBCC33", "#AAAA00")
ROUTE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#000000")
WATER_EDGE = "#4477AA"
CLOSED = "#555555"


@dataclass(frozen=True)
class Marker:
    """A point to draw: ``kind`` is ``stop`` (disc with ``label`` inside), ``reserve`` (square, label beside),
    ``access`` (diamond, label beside) or ``dot`` (a small disc, no label)."""

    x: float
    y: float
    kind: str
    label: str = ""
    colour: str = "#000000"


@dataclass(frozen=True)
class Line:
    """A polyline (frame CRS), e.g. a route's over-water path."""

    coords: tuple[tuple[float, float], ...]
    colour: str = ROUTE_COLOURS[0]
    width: float = 2.0
    dash: str = ""


def nice_length(target: float) -> float:
    """The largest 1, 2 or 5 x 10^k not above ``target`` (a scale bar's length).

    Examples
    --------
    >>> nice_length(730), nice_length(1999), nice_length(0.3)
    (500.0, 1000.0, 0.2)
    """
    if target <= 0:
        return 0.0
    k = math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * 10 ** k <= target:
            return float(m * 10 ** k)
    return float(10 ** k)


@dataclass
class _Canvas:
    extent: tuple[float, float, float, float]
    width: float
    height: float
    scale: float = field(init=False)
    ox: float = field(init=False)
    oy: float = field(init=False)

    def __post_init__(self) -> None:
        x0, y0, x1, y1 = self.extent
        self.scale = min(self.width / max(x1 - x0, 1e-9), self.height / max(y1 - y0, 1e-9))
        # centre the extent on the canvas
        self.ox = (self.width - (x1 - x0) * self.scale) / 2
        self.oy = (self.height - (y1 - y0) * self.scale) / 2

    def xy(self, x: float, y: float) -> tuple[float, float]:
        x0, y0, x1, y1 = self.extent
        return (round(self.ox + (x - x0) * self.scale, 1), round(self.oy + (y1 - y) * self.scale, 1))

    def ring(self, coords: Any) -> str:
        pts = [self.xy(x, y) for x, y in list(coords)[:-1]]
        if len(pts) < 3:
            return ""
        return "M" + "L".join(f"{a:g} {b:g}" for a, b in pts) + "Z"

    def area(self, geom: Any) -> str:
        parts = []
        for poly in _polygons(geom):
            parts.append(self.ring(poly.exterior.coords))
            parts += [self.ring(r.coords) for r in poly.interiors]
        return "".join(parts)

    def line(self, coords: Sequence[tuple[float, float]]) -> str:
        pts = [self.xy(x, y) for x, y in coords]
        return "M" + "L".join(f"{a:g} {b:g}" for a, b in pts) if len(pts) >= 2 else ""


def _polygons(geom: Any) -> list[Polygon]:
    if geom is None or geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return list(geom.geoms)
    if hasattr(geom, "geoms"):
        return [g for part in geom.geoms for g in _polygons(part)]
    return []


def _prepare(geom: Any, extent: tuple[float, float, float, float], tol: float) -> Any:
    """``geom`` clipped to the extent and simplified by ``tol`` (0.4 px).

    A frame of many parts (a regional layer of lakes) is simplified part by part,
    and parts less than ``tol`` across, which no pixel would show, are left out:
    simplifying 100,000 lakes as one geometry with topology kept takes minutes.
    """
    if geom is None or geom.is_empty:
        return None
    clipped = shapely.clip_by_rect(geom, *extent)
    if tol <= 0:
        return clipped
    parts = shapely.get_parts(clipped)
    if len(parts) <= 1:
        return shapely.simplify(clipped, tol, preserve_topology=True)
    b = shapely.bounds(parts)
    parts = parts[np.maximum(b[:, 2] - b[:, 0], b[:, 3] - b[:, 1]) >= tol]
    return shapely.GeometryCollection(list(shapely.simplify(parts, tol, preserve_topology=True)))


def padded_extent(geoms: Sequence[Any], pad: float = 0.08, min_size_m: float = 400.0,
                  aspect: float | None = None) -> tuple[float, float, float, float]:
    """The bounds of ``geoms`` widened by ``pad`` of their size (at least ``min_size_m`` across),
    then to the ``aspect`` (width / height) if given."""
    x0, y0, x1, y1 = shapely.GeometryCollection([g for g in geoms if g is not None and not g.is_empty]).bounds
    w, h = max(x1 - x0, min_size_m), max(y1 - y0, min_size_m)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    w, h = w * (1 + 2 * pad), h * (1 + 2 * pad)
    if aspect:
        if w / h < aspect:
            w = h * aspect
        else:
            h = w / aspect
    return (cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)


def svg_map(frame: Any, extent: tuple[float, float, float, float], *, width: float = 600, height: float = 300,
            lines: Sequence[Line] = (), markers: Sequence[Marker] = (), strata_labels: bool = True,
            title: str = "") -> str:
    """An SVG map of ``frame`` clipped to ``extent`` (frame CRS), with lines and markers on top.

    Parameters
    ----------
    frame : Frame
    extent : (minx, miny, maxx, maxy) in the frame CRS
    width, height : float
        Size of the drawing in CSS pixels (the SVG scales with its box).
    lines, markers :
        Drawn in order over the water.
    strata_labels : bool
        Write each stratum's code at a point inside it.
    title : str
        The SVG's accessible title.

    Returns
    -------
    str
        ``<svg ...>...</svg>``, safe to insert in HTML (every label escaped).
    """
    c = _Canvas(extent, width, height)
    tol = 0.4 / c.scale  # 0.4 px
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width:g} {height:g}" '
           f'class="gs-svgmap" role="img" aria-label="{html.escape(title or "Map", quote=True)}">',
           f"<title>{html.escape(title or 'Map')}</title>",
           '<defs><pattern id="gs-hatch" width="6" height="6" patternUnits="userSpaceOnUse" '
           f'patternTransform="rotate(45)"><line x1="0" y1="0" x2="0" y2="6" stroke="{CLOSED}" '
           'stroke-width="1.2"/></pattern></defs>',
           f'<rect x="0" y="0" width="{width:g}" height="{height:g}" fill="#dedbd2"/>']
    water = _prepare(frame.water, extent, tol)
    if water is not None:
        out.append(f'<path d="{c.area(water)}" fill="#ffffff" stroke="{WATER_EDGE}" stroke-width="1" '
                   'fill-rule="evenodd"/>')
    labels = []
    for i, s in enumerate(frame.strata):
        g = _prepare(s.geometry, extent, tol)
        if g is None or g.is_empty:
            continue
        colour = STRATUM_COLOURS[i % len(STRATUM_COLOURS)]
        out.append(f'<path d="{c.area(g)}" fill="{colour}" fill-opacity="0.45" stroke="{colour}" '
                   'stroke-width="0.8" fill-rule="evenodd"/>')
        if strata_labels:
            p = g.representative_point()
            px, py = c.xy(p.x, p.y)
            labels.append(f'<text x="{px:g}" y="{py:g}" class="gs-stratum">{html.escape(s.code)}</text>')
    closed = _prepare(frame.exclusions, extent, tol)
    if closed is not None and not closed.is_empty:
        out.append(f'<path d="{c.area(closed)}" fill="url(#gs-hatch)" stroke="{CLOSED}" stroke-width="0.8" '
                   'stroke-dasharray="4 3" fill-rule="evenodd"/>')
    out += labels
    for ln in lines:
        d = c.line(ln.coords)
        if d:
            dash = f' stroke-dasharray="{ln.dash}"' if ln.dash else ""
            out.append(f'<path d="{d}" fill="none" stroke="{ln.colour}" stroke-width="{ln.width:g}" '
                       f'stroke-linejoin="round"{dash}/>')
    for m in markers:
        out.append(_marker(c, m))
    out.append(_scale_bar(c, width, height))
    out.append("</svg>")
    return "".join(out)


def _marker(c: _Canvas, m: Marker) -> str:
    x, y = c.xy(m.x, m.y)
    label = html.escape(m.label)
    if m.kind == "stop":
        return (f'<g class="gs-stop"><circle cx="{x:g}" cy="{y:g}" r="7" fill="#fff" stroke="{m.colour}" '
                f'stroke-width="2"/><text x="{x:g}" y="{y + 3:g}" text-anchor="middle">{label}</text></g>')
    if m.kind == "reserve":
        return (f'<g class="gs-reserve"><rect x="{x - 3.5:g}" y="{y - 3.5:g}" width="7" height="7" fill="#fff" '
                f'stroke="#333" stroke-width="1" stroke-dasharray="2 1"/><text x="{x + 6:g}" y="{y + 3:g}" class="gs-rl">'
                f"{label}</text></g>")
    if m.kind == "access":
        return (f'<g class="gs-access"><path d="M{x:g} {y - 6:g}L{x + 6:g} {y:g}L{x:g} {y + 6:g}L{x - 6:g} {y:g}Z" '
                f'fill="#000"/><text x="{x + 8:g}" y="{y + 3:g}">{label}</text></g>')
    return f'<circle cx="{x:g}" cy="{y:g}" r="2.2" fill="{m.colour}" stroke="#fff" stroke-width="0.6"/>'


def _scale_bar(c: _Canvas, width: float, height: float) -> str:
    metres = nice_length(0.25 * width / c.scale)
    px = metres * c.scale
    x0, y0 = 8.0, height - 10.0
    text = f"{metres / 1000:g} km" if metres >= 1000 else f"{metres:g} m"
    return (f'<g class="gs-scale"><rect x="{x0 - 4:g}" y="{y0 - 14:g}" width="{px + 8:.1f}" height="20" '
            f'fill="#fff" fill-opacity="0.8"/><path d="M{x0:g} {y0 - 4:g}V{y0:g}H{x0 + px:.1f}V{y0 - 4:g}" '
            f'fill="none" stroke="#000" stroke-width="1.2"/><text x="{x0 + 2:g}" y="{y0 - 5:g}">{text}</text>'
            f'<text x="{width - 8:g}" y="14" text-anchor="end">\u2191 grid north</text></g>')
