"""The field package: what a crew takes into the field and what a regulator reads.

:func:`write_package` writes, into one folder:

- ``schedule.csv`` (:mod:`.table`): one row per site, with columns for the crew's results;
- ``sites.geojson`` (:mod:`.geo`): RFC 7946 points with the schedule's attributes;
- ``sites.gpx`` (:mod:`.gpx`): GPX 1.1 waypoints and one route and track per crew trip, over water;
- ``sites.gpkg`` (:mod:`.gpkg`): a GeoPackage for desktop GIS (sites, routes, frame, strata,
  exclusions, access), written with a fixed GDAL date so its bytes do not follow the clock;
- ``map.html`` (:mod:`.map`): a self-contained map that works with no network;
- ``report.html`` (:mod:`.report`): why this many samples, how they were drawn, what a
  result may claim, and field cautions;
- ``days/`` (:mod:`.days`): per field day a GPX (stops, reserves, route and track over
  water), a CSV and a one-page printable field sheet (``day-03-2027-06-14.gpx`` ...).

Every file is a function of the :class:`~geosample.model.Design` alone (no clock
time, no random ids), so the same design gives byte-identical files: the
manifest records their SHA-256 and ``geosample verify`` re-writes and compares them.
Heavy libraries (gpxpy, jinja2) are imported only when a file is written.
"""
from __future__ import annotations

import functools
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    import jinja2

    from ..model import Design

__all__ = ["PACKAGE_FILES", "write_package", "template_environment"]

#: The files :func:`write_package` writes, in the order written.
PACKAGE_FILES = ("schedule.csv", "sites.geojson", "sites.gpx", "sites.gpkg", "map.html", "report.html")


@functools.lru_cache(maxsize=1)
def template_environment() -> "jinja2.Environment":
    """The jinja2 environment for the package's HTML templates (autoescape always on)."""
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("geosample.export", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def write_package(design: "Design", folder: str | Path) -> dict[str, Path]:
    """Write the field package into ``folder`` (created if missing; files replaced).

    Parameters
    ----------
    design : Design
        A complete design (:func:`geosample.design.make_design`).
    folder : str or Path

    Returns
    -------
    dict
        File name -> path, for :data:`PACKAGE_FILES` in that order, then the files of
        ``days/`` (keys ``"days/<name>"``, relative to ``folder``).
        ``manifest.json`` is written afterwards by :func:`geosample.audit.write_manifest`.
    """
    from .days import write_days
    from .geo import write_geojson
    from .gpkg import write_gpkg
    from .gpx import write_gpx
    from .map import write_map
    from .report import write_report
    from .table import write_schedule

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    writers = {
        "schedule.csv": write_schedule,
        "sites.geojson": write_geojson,
        "sites.gpx": write_gpx,
        "sites.gpkg": write_gpkg,
        "map.html": write_map,
        "report.html": write_report,
    }
    out = {name: writer(design, folder / name) for name, writer in writers.items()}
    out.update(write_days(design, folder))
    return out
