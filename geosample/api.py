"""A Python API for notebooks: a design's frame, strata, sites and schedule as tables, without files.

``geosample plan`` writes a field package; in a notebook one wants the same design as
tables to look at, plot and join. :func:`design_tables` runs the plan exactly as
``geosample plan`` does (same stages, same seed handling, same validation) and
returns :class:`DesignTables`, whose attributes are pandas/geopandas tables:

- ``frame``: one row, the sampling frame polygon (frame CRS);
- ``strata``: one row per stratum (name, code, area, weight, polygon);
- ``sites``: one row per site, primary and reserve (the ``schedule.csv`` columns, points);
- ``schedule``: the ``schedule.csv`` rows as a DataFrame (strings, as the crew sees them);
- ``routes``: one row per day route (lines over water);
- ``design``: the :class:`~geosample.model.Design` itself, for everything else.

:func:`assess_table` assesses results given as a DataFrame (``site_id``, ``result``,
and optionally ``qualifier``, ``sampled_at``...) against a design folder, through the
same reader and checks as ``geosample assess`` (``docs/api.md`` has worked examples).
Nothing here writes into the design folder.
"""
from __future__ import annotations

import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = ["DesignTables", "design_tables", "tables_from_design", "assess_table"]


@dataclass(frozen=True)
class DesignTables:
    """A design as tables (see the module docstring)."""

    design: Any
    frame: Any
    strata: Any
    sites: Any
    schedule: Any
    routes: Any


def tables_from_design(design: Any) -> DesignTables:
    """The tables of a :class:`~geosample.model.Design` already made (e.g. by ``make_design``)."""
    import geopandas
    import pandas
    import shapely

    from .export.table import COLUMNS, schedule_rows

    crs = design.frame.crs
    frame = geopandas.GeoDataFrame(
        {"water_area_m2": [design.frame.water_area_m2], "area_m2": [design.frame.area_m2]},
        geometry=[shapely.union_all([s.geometry for s in design.frame.strata])], crs=crs)
    strata = geopandas.GeoDataFrame(
        {"name": [s.name for s in design.frame.strata], "code": [s.code for s in design.frame.strata],
         "area_m2": [s.area_m2 for s in design.frame.strata], "weight": [s.weight for s in design.frame.strata]},
        geometry=[s.geometry for s in design.frame.strata], crs=crs)
    rows = schedule_rows(design)
    schedule = pandas.DataFrame(rows, columns=[c for c in COLUMNS if not rows or c in rows[0]])
    sites = geopandas.GeoDataFrame(
        schedule.drop(columns=[c for c in ("result", "qualifier", "sampled_at", "sampler", "notes")
                               if c in schedule.columns]),
        geometry=geopandas.points_from_xy(schedule["x"].astype(float), schedule["y"].astype(float)), crs=crs)
    routes = geopandas.GeoDataFrame(
        {"date": [r.date.isoformat() for r in design.schedule.routes],
         "access": [r.access for r in design.schedule.routes],
         "sites": [" ".join(r.site_ids).strip() for r in design.schedule.routes],
         "length_m": [r.length_m for r in design.schedule.routes],
         "start": [r.start.isoformat() for r in design.schedule.routes],
         "end": [r.end.isoformat() for r in design.schedule.routes]},
        geometry=[shapely.LineString(r.coords_xy) if len(r.coords_xy) > 1 else shapely.Point(r.coords_xy[0])
                  for r in design.schedule.routes], crs=crs)
    return DesignTables(design, frame, strata, sites, schedule, routes)


def design_tables(plan: str | Path, *, seed: int | None = None) -> DesignTables:
    """Run a plan file as ``geosample plan`` would, without writing anything, and return its tables.

    Parameters
    ----------
    plan : path
        The plan file (TOML). Its layers are read from the paths it names.
    seed : int, optional
        Overrides the plan's seed (for trying the plan out; a design handed to a regulator
        comes from ``geosample plan`` or a registered draw, whose seed is recorded).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from geosample.workflow import copy_demo
    >>> plan = copy_demo(pathlib.Path(tempfile.mkdtemp()) / "demo")
    >>> t = design_tables(plan)
    >>> list(t.strata["name"])
    ['North Basin', 'South Basin', 'Alder Bay']
    >>> int((t.sites["role"] == "primary").sum()) == t.design.allocation.total
    True
    """
    from .design import load_layers, make_design
    from .plan import load_plan

    p = load_plan(plan)
    design = make_design(p, layers=load_layers(p), seed=seed)
    return tables_from_design(design)


def assess_table(design_folder: str | Path, results: Any, **options: Any) -> Any:
    """Assess results given as a DataFrame against a design folder, as ``geosample assess`` does.

    Parameters
    ----------
    design_folder : path
        The folder ``geosample plan`` wrote (its ``manifest.json`` and ``schedule.csv`` are read).
    results : pandas.DataFrame
        At least ``site_id`` and ``result`` (text such as ``"<10"`` or numbers); any other
        ``schedule.csv`` columns the crew filled (``qualifier``, ``sampled_at``, ``notes``,
        ``replaced_by``, ``replacement_reason``...).
    **options
        Passed to :func:`geosample.stats.assessment.assess` (e.g. ``adjust="bh"``).

    Returns
    -------
    Assessment
        The same object ``geosample assess --json`` prints.

    Notes
    -----
    The table goes through the results reader (its checks of ids, values and times),
    by way of a CSV in a private temporary folder that is removed afterwards.
    """
    from .results import read_design_folder, read_results
    from .stats.assessment import assess

    manifest, rows = read_design_folder(design_folder)
    with tempfile.TemporaryDirectory(prefix="geosample-") as tmp:
        path = Path(tmp) / "results.csv"
        results.to_csv(path, index=False)
        res = read_results(path, manifest, rows)
    return assess(res, manifest, schedule_rows=rows, **options)
