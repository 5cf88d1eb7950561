"""The sites as GeoJSON: ``sites.geojson``.

RFC 7946: a FeatureCollection of Point features in WGS 84 longitude, latitude
order (section 3.1.1), no ``crs`` member (section 4), coordinates rounded to 7
decimals (about 1 cm; section 11.2 recommends not carrying more precision than
the data have). One feature per site, in the order of ``schedule.csv``, with the
properties ``site_id, stratum, role, reserve_rank, visit_date, planned_time, day,
route_order, x, y`` (null where the schedule cell is blank; ``x``/``y`` are metres
in the frame CRS, for checking against the schedule).

The text is written with :mod:`json` one feature per line, keys in a fixed
order, UTF-8, so identical designs give identical bytes.
"""
from __future__ import annotations

import json
from pathlib import Path

from ..model import Design
from .table import day_numbers, format_time, ordered_visits

__all__ = ["FILE_NAME", "COORD_DECIMALS", "site_features", "write_geojson"]

FILE_NAME = "sites.geojson"
COORD_DECIMALS = 7


def site_features(design: Design) -> list[dict]:
    """The site features as plain dicts (GeoJSON Feature objects).

    Parameters
    ----------
    design : Design

    Returns
    -------
    list of dict
    """
    visits = ordered_visits(design)
    days = day_numbers(visits)
    out = []
    for v in visits:
        scheduled = v.role == "primary" and v.visit_date is not None
        props = {
            "site_id": v.site_id,
            "stratum": v.stratum,
            "role": v.role,
            "reserve_rank": int(v.reserve_rank),
            "visit_date": v.visit_date.isoformat() if scheduled else None,
            "planned_time": format_time(v.planned_time) if scheduled else None,
            "day": days[v.visit_date] if scheduled else None,
            "route_order": int(v.route_order) if scheduled and v.route_order is not None else None,
            "x": round(float(v.x), 1),
            "y": round(float(v.y), 1),
        }
        out.append({
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [round(float(v.lon), COORD_DECIMALS),
                                                          round(float(v.lat), COORD_DECIMALS)]},
            "properties": props,
        })
    return out


def write_geojson(design: Design, path: str | Path) -> Path:
    """Write ``sites.geojson`` (RFC 7946; see the module docstring).

    Parameters
    ----------
    design : Design
    path : str or Path
        The file to write (replaced if it exists).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    features = site_features(design)
    body = ",\n".join(json.dumps(f, ensure_ascii=False, separators=(",", ":")) for f in features)
    text = '{"type":"FeatureCollection","features":[\n' + body + ("\n" if body else "") + "]}\n"
    path.write_text(text, encoding="utf-8", newline="\n")
    return path
