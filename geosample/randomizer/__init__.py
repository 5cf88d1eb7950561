"""The random draw: sites in space (:mod:`.space`) and field days and times (:mod:`.time`).

Submodules are imported when used, so importing this package stays cheap.
"""
from __future__ import annotations

from importlib import import_module
from typing import Any

_LAZY = {
    "METHODS": "geosample.randomizer.space",
    "draw_sites": "geosample.randomizer.space",
    "halton": "geosample.randomizer.space",
    "radical_inverse": "geosample.randomizer.space",
    "reverse_hierarchical_order": "geosample.randomizer.space",
    "spatial_balance": "geosample.randomizer.space",
}

__all__ = list(_LAZY)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'geosample.randomizer' has no attribute {name!r}")
