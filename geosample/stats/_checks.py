"""Argument checks and number formatting shared by the sizing modules (private).

Every check raises :class:`~geosample.errors.SettingError` naming the setting as the caller
calls it: ``names`` maps a key (``"tolerance"``, ``"range"``...) to the option name
(:data:`CLI_NAMES`), the plan key (:data:`PLAN_NAMES`) or the plain key.
"""
from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

from ..errors import SettingError

_KEYS = ("tolerance", "range", "sd", "confidence", "bound", "sides", "n", "statistic",
         "weights", "strata", "method", "cost", "min_per_stratum")

#: Option names used in messages when the command line calls the library.
CLI_NAMES = {k: "--" + k.replace("_", "-") for k in _KEYS}

#: Plan keys used in messages when a plan calls :func:`allocate`.
PLAN_NAMES = {k: f"size.{k}" for k in _KEYS}
PLAN_NAMES.update(weights="frame stratum weights", strata="frame stratum names", method="size.allocation",
                  cost="size.strata.<name>.cost")

_PLAIN_NAMES = {k: k for k in _KEYS}

_REL = 1e-9  # relative slack for floating-point noise


def _num(x: float) -> str:
    return f"{x:.4g}"


def _pct(c: float) -> str:
    return f"{c * 100:.4g}%"


def _names(names: Mapping[str, str] | None, default: Mapping[str, str] = _PLAIN_NAMES) -> dict[str, str]:
    out = dict(default)
    if names:
        out.update(names)
    return out


def _finite(x: Any) -> bool:
    try:
        return math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def _check_positive(value: Any, key: str, names: dict[str, str], what: str) -> float:
    if isinstance(value, bool) or not _finite(value) or float(value) <= 0:
        raise SettingError(names[key], value, f"a positive number ({what})")
    return float(value)


def _check_confidence(confidence: Any, names: dict[str, str]) -> float:
    if isinstance(confidence, bool) or not _finite(confidence) or not 0 < float(confidence) < 1:
        raise SettingError(names["confidence"], confidence, "a number strictly between 0 and 1",
                           fix="write 0.95 for 95%")
    return float(confidence)


def _check_choice(value: Any, key: str, choices: Sequence[str], names: dict[str, str]) -> str:
    if value not in choices:
        raise SettingError(names[key], value, "one of " + ", ".join(choices))
    return value


def _check_n(n: Any, names: dict[str, str], least: int = 1, why: str = "") -> int:
    if isinstance(n, bool) or not isinstance(n, (int,)) and not (_finite(n) and float(n).is_integer()):
        raise SettingError(names["n"], n, f"a whole number >= {least}{why}")
    if int(n) < least:
        raise SettingError(names["n"], n, f"a whole number >= {least}{why}")
    return int(n)


def _tol_ceil(x: float) -> int:
    """Ceiling that does not round a whole number up through floating-point noise."""
    return int(math.ceil(x - _REL * max(1.0, abs(x))))


def _meets(p: float, a: float) -> bool:
    return p <= a * (1.0 + _REL)


def _weights(weights: Any, nm: dict[str, str]) -> list[float]:
    try:
        w = [float(x) for x in weights]
    except (TypeError, ValueError):
        raise SettingError(nm["weights"], weights, "a sequence of non-negative numbers (area shares)") from None
    if not w or any(not math.isfinite(x) or x < 0 for x in w) or sum(w) <= 0:
        raise SettingError(nm["weights"], tuple(weights), "non-negative numbers (area shares) with a positive sum",
                           fix="check the strata: each needs a non-negative area and the frame a positive one")
    total = sum(w)
    return [x / total for x in w]


def _per(value: Any, k: int, key: str, nm: dict[str, str], what: str) -> list[float | None]:
    if value is None:
        return [None] * k
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return [_check_positive(value, key, nm, what)] * k
    vals = list(value)
    if len(vals) != k:
        raise SettingError(nm[key], tuple(vals), f"one number or {k} numbers (one per stratum)")
    return [None if v is None else _check_positive(v, key, nm, what) for v in vals]


def _check_nh(n_h: Any, k: int, nm: dict[str, str], least: int) -> list[int]:
    vals = list(n_h)
    if len(vals) != k or any(isinstance(v, bool) or not _finite(v) or not float(v).is_integer() or v < least
                             for v in vals):
        raise SettingError(nm["n"], tuple(vals), f"{k} whole numbers >= {least} (one per stratum)")
    return [int(v) for v in vals]
