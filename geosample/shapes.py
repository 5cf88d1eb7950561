"""Small shapely helpers shared by the frame and the router."""
from __future__ import annotations

from typing import Any

__all__ = ["polygonal"]


def polygonal(geom: Any) -> Any:
    """The polygonal part of ``geom`` (drops points and lines left by make_valid)."""
    import shapely

    if geom is None or geom.is_empty:
        return shapely.Polygon()
    if geom.geom_type in ("Polygon", "MultiPolygon"):
        return geom
    parts = [g for g in shapely.get_parts(geom) if g.geom_type in ("Polygon", "MultiPolygon")]
    return shapely.union_all(parts) if parts else shapely.Polygon()
