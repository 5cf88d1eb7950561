"""Coordinates as a crew reads them: decimal degrees, degrees and decimal minutes, UTM with its zone.

- :func:`ddm`: degrees and decimal minutes with the hemisphere letter, the form
  most hand-held GPS units show by default (``46°03.168' N``; 3 decimals of a
  minute is about 1.9 m of latitude).
- :func:`utm`: the point's own UTM zone and latitude band (``14T``), easting and
  northing in metres, projected with pyproj (WGS 84 / UTM zone N, EPSG 326NN
  north of the equator and 327NN south of it). The zone is the standard one:
  6° wide from 180° W, with the exceptions of southwest Norway (zone 32 widened
  to 3° E..12° E between 56° N and 64° N) and Svalbard (zones 31, 33, 35, 37
  between 72° N and 84° N); bands are 8° tall from 80° S, letters C..X without
  I and O, band X 12° tall (common practice; the UTM grid as published by the
  US NGA).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

__all__ = ["UtmCoord", "ddm", "utm", "utm_zone", "utm_band"]

_BANDS = "CDEFGHJKLMNPQRSTUVWX"


def _ddm_one(value: float, pos: str, neg: str, width: int) -> str:
    hemi = pos if value >= 0 else neg
    total = round(abs(value) * 60, 3)  # minutes, rounded once so 59.9996' never prints as 60.000'
    deg, minutes = divmod(total, 60)
    return f"{int(deg):0{width}d}°{minutes:06.3f}' {hemi}"


def ddm(lat: float, lon: float) -> tuple[str, str]:
    """Latitude and longitude as degrees and decimal minutes.

    Examples
    --------
    >>> ddm(46.052797, -97.561661)
    ("46°03.168' N", "097°33.700' W")
    >>> ddm(-0.5, 0.0)
    ("00°30.000' S", "000°00.000' E")
    """
    return _ddm_one(lat, "N", "S", 2), _ddm_one(lon, "E", "W", 3)


def utm_zone(lat: float, lon: float) -> int:
    """The UTM zone number of a point (with the Norway and Svalbard exceptions).

    Examples
    --------
    >>> utm_zone(46.05, -97.56), utm_zone(60.0, 5.0), utm_zone(78.0, 20.0), utm_zone(0.0, 180.0)
    (14, 32, 33, 60)
    """
    lon = ((lon + 180.0) % 360.0) - 180.0 if lon != 180.0 else 179.999999
    zone = int(math.floor((lon + 180.0) / 6.0)) + 1
    if 56.0 <= lat < 64.0 and 3.0 <= lon < 12.0:
        return 32
    if 72.0 <= lat < 84.0 and 0.0 <= lon < 42.0:
        return 31 if lon < 9.0 else 33 if lon < 21.0 else 35 if lon < 33.0 else 37
    return zone


def utm_band(lat: float) -> str:
    """The latitude band letter (C..X; X runs to 84° N).

    Examples
    --------
    >>> utm_band(46.05), utm_band(-33.9), utm_band(83.0)
    ('T', 'H', 'X')
    """
    if lat < -80.0 or lat > 84.0:
        raise ValueError(f"latitude {lat} is outside the UTM grid (80° S to 84° N)")
    return _BANDS[min(int((lat + 80.0) // 8.0), len(_BANDS) - 1)]


@functools.lru_cache(maxsize=16)
def _transformer(epsg: int):
    import pyproj

    return pyproj.Transformer.from_crs("EPSG:4326", f"EPSG:{epsg}", always_xy=True)


@dataclass(frozen=True)
class UtmCoord:
    """A point in its own UTM zone: ``text`` is what a crew reads (``"14T 611268 E 5100919 N"``)."""

    zone: int
    band: str
    easting: float
    northing: float
    epsg: int

    @property
    def text(self) -> str:
        return f"{self.zone}{self.band} {self.easting:.0f} E {self.northing:.0f} N"


def utm(lat: float, lon: float) -> UtmCoord:
    """The point in its own UTM zone (WGS 84), projected with pyproj.

    Examples
    --------
    >>> u = utm(46.052797, -97.561661)
    >>> u.zone, u.band, u.epsg, round(u.easting), round(u.northing)
    (14, 'T', 32614, 611268, 5100919)
    """
    zone = utm_zone(lat, lon)
    epsg = (32600 if lat >= 0 else 32700) + zone
    e, n = _transformer(epsg).transform(lon, lat)
    return UtmCoord(zone, utm_band(lat), float(e), float(n), epsg)
