"""Fake results and manifests for the assessment tests, and the coverage helpers they share.

``fake_manifest`` builds the settings through ``test_results.resolved_settings`` (the
plan loader's defaults); ``fake_results`` stands in for :class:`geosample.results.Results`.
"""
from __future__ import annotations

import math
from types import SimpleNamespace


def at_least_nominal(cover: float, nominal: float, reps: int) -> bool:
    """Coverage at or above nominal minus 3 Monte Carlo standard errors (a false alarm about 0.1% per check)."""
    return cover >= nominal - 3 * math.sqrt(nominal * (1 - nominal) / reps)


def fake_manifest(strata=(("North basin", 0.5), ("South basin", 0.3), ("Reed bay", 0.2)), **kw) -> dict:
    from test_results import resolved_settings

    settings = resolved_settings(**kw)
    return {"settings": settings,
            "frame": {"area_m2": 2.4e6, "strata": [{"name": n, "code": n[:2].upper(), "area_m2": w * 2.4e6,
                                                     "weight": w} for n, w in strata]},
            "allocation": {"strata": [n for n, _ in strata], "n": [5] * len(strata), "total": 5 * len(strata)},
            "itinerary": {}}


def fake_results(values: dict[str, list[float]], *, days: dict[str, tuple] | None = None,
                 censored: dict[str, tuple] | None = None, **kw) -> SimpleNamespace:
    """``days``: the field day of each value per stratum (else none is known); ``censored``: "", "left", "right"."""
    strata = [SimpleNamespace(name=k, values=tuple(v),
                              censored=tuple((censored or {}).get(k, ("",) * len(v))),
                              **({} if days is None else {"days": tuple(days[k])})) for k, v in values.items()]
    base = dict(strata=strata, flags=(), notes=(), order=(), range_exceeded=(), outside_support=())
    base.update(kw)
    return SimpleNamespace(**base)
