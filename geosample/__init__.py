"""geosample: randomized, verifiable sampling designs for water bodies in space and time.

The four stages are visible at the top of the package:

- :mod:`geosample.geometry`   water layers and access constraints -> :class:`Frame`
- :mod:`geosample.stats`      sample sizes and allocation; estimates after the field work
- :mod:`geosample.randomizer` sites (space) and field days and times (time)
- :mod:`geosample.export`     the field package (map, GPX, CSV, GeoJSON, report)

Heavy modules are imported when first used, so ``import geosample`` is cheap.
"""
from __future__ import annotations

from importlib import import_module
from typing import Any

from .errors import (
    GeosampleError,
    InfeasibleError,
    InputFileError,
    LayerError,
    OutputExistsError,
    PlanError,
    ResultsError,
    SettingError,
)
from .model import (
    AccessPoint,
    Allocation,
    FieldDay,
    Frame,
    Removal,
    Route,
    Schedule,
    Site,
    SiteDraw,
    Stratum,
    Visit,
)

from .version import __version__

_LAZY = {
    "sample_size": "geosample.stats.sizing",
    "achieved": "geosample.stats.sizing",
    "allocate": "geosample.stats.sizing",
    "build_frame": "geosample.geometry",
    "draw_sites": "geosample.randomizer.space",
    "load_plan": "geosample.plan",
    "make_design": "geosample.design",
    "design_tables": "geosample.api",
    "assess_table": "geosample.api",
}

__all__ = [
    "__version__",
    "GeosampleError",
    "InfeasibleError",
    "InputFileError",
    "LayerError",
    "OutputExistsError",
    "PlanError",
    "ResultsError",
    "SettingError",
    "AccessPoint",
    "Allocation",
    "FieldDay",
    "Frame",
    "Removal",
    "Route",
    "Schedule",
    "Site",
    "SiteDraw",
    "Stratum",
    "Visit",
    *_LAZY,
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'geosample' has no attribute {name!r}")
