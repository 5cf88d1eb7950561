"""The population file of ``geosample simulate``: a season built to test a design against.

A simulated result at site ``(x, y)`` of stratum ``h``, on allowed day ``d``, at the
fraction ``u`` of that day's sampling window (0 at its start, 1 at its end) is, on the
plan's analysis scale (log10 units for a ``geomean`` plan)::

    m = level + strata[h] + per_km * (distance along bearing_deg from the frame's centroid, km)
        + day_d + amplitude * (1 - 2 u)
    y = clip(m + e, lower, lower + range)          (normal noise, e ~ N(0, sd^2))
    y = clip(m * exp(sd Z - sd^2 / 2), ...)        (lognormal noise: sd on the log scale, mean m)

``day_d = sd_day * Z_d + wet_effect * B_d`` (``B_d`` ~ Bernoulli(wet_probability)) is drawn
afresh for EVERY allowed day of each simulated season. ``lower`` and ``range`` are the
plan's declared support (:func:`geosample.stats.intervals.declared_support`); without a
range nothing is clipped. Results below ``censoring.below`` or above ``censoring.above``
(plan units, i.e. ``10 ** y`` for a geomean plan) are reported as ``"<below"`` / ``">above"``.

The TRUE mean of a simulated season is computed, not sampled (:func:`true_mean`):
the stratum offsets and the linear gradient integrate exactly over each stratum's
polygon (area-weighted value at its centroid), the time-of-day term integrates to 0
over any window, and the day effects are averaged over all allowed days. Clipping is
not linear: its effect is the expectation of the clipped value (closed forms for
normal and lognormal noise), summed numerically over a grid of points in each stratum
(about :data:`GRID_POINTS` a stratum), every allowed day and :data:`TIME_POINTS`
times a window (midpoint rule), added to the exact unclipped mean as the difference
between clipped and unclipped on that grid. When no grid value comes within 9 noise
sds of a clipping end the correction is exactly 0.

For a ``geomean`` plan the "mean" is the mean of the log10 values (the log of the
geometric mean), as ``assess`` estimates it.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputFileError, SettingError

__all__ = ["Population", "load_population", "population_from_dict", "KEYS", "GRID_POINTS", "TIME_POINTS",
           "SeasonTruth", "season_effects", "structural", "expected_clipped", "true_mean", "draw_values"]

#: Grid points per stratum for the clipping correction of the true mean.
GRID_POINTS = 400
#: Times per window (midpoint rule) for the clipping correction of the true mean.
TIME_POINTS = 8

#: Every key of the population file: (table, key) -> (kind, default, help). docs/population-file.md lists them.
KEYS: dict[tuple[str, str], tuple[str, Any, str]] = {
    ("population", "level"): ("number", None, "base level in the plan's units (log10 units for a geomean plan); "
                                             "required"),
    ("population.strata", "NAME"): ("number", 0.0, "added to the level in stratum NAME (a stratum of the plan)"),
    ("population.gradient", "per_km"): ("number", 0.0, "linear trend across the frame, plan units per km"),
    ("population.gradient", "bearing_deg"): ("number", 0.0, "direction in which the trend rises, degrees clockwise "
                                                            "from grid north (0-360)"),
    ("population.day", "sd"): ("non-negative number", 0.0, "sd of a normal day effect shared by every sample of a "
                                                          "day, drawn afresh for every allowed day of every season"),
    ("population.day", "wet_probability"): ("probability", 0.0, "chance that an allowed day is wet (0-1)"),
    ("population.day", "wet_effect"): ("number", 0.0, "added to every sample of a wet day"),
    ("population.time_of_day", "amplitude"): ("number", 0.0, "+amplitude at the window's start, -amplitude at its "
                                                             "end, linear in between"),
    ("population.noise", "distribution"): ("\"normal\" or \"lognormal\"", "normal", "the within-day noise of "
                                           "each sample"),
    ("population.noise", "sd"): ("non-negative number", 0.0, "sd of the noise (lognormal: sd of its natural log; "
                                                            "the noise then multiplies the value, mean kept)"),
    ("population.censoring", "below"): ("number", None, "results below it are reported as \"<below\" "
                                                       "(plan units)"),
    ("population.censoring", "above"): ("number", None, "results above it are reported as \">above\" "
                                                       "(plan units)"),
}


@dataclass(frozen=True)
class Population:
    """A validated population file (see the module docstring)."""

    level: float
    strata: tuple[tuple[str, float], ...] = ()
    per_km: float = 0.0
    bearing_deg: float = 0.0
    day_sd: float = 0.0
    wet_probability: float = 0.0
    wet_effect: float = 0.0
    amplitude: float = 0.0
    distribution: str = "normal"
    noise_sd: float = 0.0
    below: float | None = None
    above: float | None = None
    source: str = "population file"

    def offset(self, name: str) -> float:
        return dict(self.strata).get(name, 0.0)

    def shifted(self, delta: float) -> "Population":
        """The same population with the level moved by ``delta`` (for the operating characteristic)."""
        from dataclasses import replace

        return replace(self, level=self.level + delta)

    def as_dict(self) -> dict[str, Any]:
        return {"level": self.level, "strata": dict(self.strata), "gradient": {"per_km": self.per_km,
                "bearing_deg": self.bearing_deg}, "day": {"sd": self.day_sd, "wet_probability": self.wet_probability,
                "wet_effect": self.wet_effect}, "time_of_day": {"amplitude": self.amplitude},
                "noise": {"distribution": self.distribution, "sd": self.noise_sd},
                "censoring": {"below": self.below, "above": self.above}}


def _err(source: str, key: str, value: Any, accepted: str, fix: str) -> SettingError:
    return SettingError(f"{source}: {key}", value, accepted, fix=fix)


def _number(source: str, table: dict, name: str, key: str, default: Any, *, low: float | None = None,
            high: float | None = None) -> Any:
    if key not in table:
        return default
    v = table[key]
    what = "a number" + (f" from {low:g}" if low is not None else "") + (f" to {high:g}" if high is not None else "")
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise _err(source, f"{name}.{key}", v, what, f"write {name}.{key} as a plain number, e.g. {key} = 1")
    if (low is not None and v < low) or (high is not None and v > high):
        raise _err(source, f"{name}.{key}", v, what, f"set {name}.{key} within that range")
    return float(v)


def _table(source: str, raw: dict, name: str, allowed: set[str] | None) -> dict:
    v = raw.get(name.split(".")[-1], {}) if "." in name else raw
    if not isinstance(v, dict):
        raise _err(source, name, v, "a table", f"write [{name}] as a TOML table")
    if allowed is not None:
        unknown = sorted(k for k, x in v.items() if k not in allowed and not isinstance(x, dict))
        unknown += sorted(k for k, x in v.items() if isinstance(x, dict) and k not in allowed)
        if unknown:
            raise _err(source, f"{name}.{unknown[0]}", v[unknown[0]], "one of the keys " + ", ".join(sorted(allowed)),
                       f"remove or rename {name}.{unknown[0]} (docs/population-file.md lists every key)")
    return v


def population_from_dict(raw: Any, *, source: str = "population file", strata: list[str] | None = None
                         ) -> Population:
    """Validate a parsed population file; ``strata`` (the plan's stratum names) checks ``[population.strata]``."""
    if not isinstance(raw, dict) or set(raw) != {"population"}:
        keys = sorted(raw) if isinstance(raw, dict) else raw
        raise _err(source, "top-level tables", keys, "a single [population] table",
                   "put every setting under [population] (docs/population-file.md)")
    pop = raw["population"]
    if not isinstance(pop, dict):
        raise _err(source, "population", pop, "a table", "write [population] as a TOML table")
    subs = {"strata", "gradient", "day", "time_of_day", "noise", "censoring"}
    _table(source, pop, "population", {"level"} | subs)
    for s in subs:
        _table(source, pop, f"population.{s}", None)
    if "level" not in pop:
        raise _err(source, "population.level", None, "a number (the base level, plan units)",
                   "add level = ... under [population]")
    level = _number(source, pop, "population", "level", None)
    st = pop.get("strata", {})
    for k, v in st.items():
        _number(source, st, "population.strata", k, 0.0)
        if strata is not None and k not in strata:
            raise _err(source, f"population.strata.{k}", v, "the name of a stratum of the plan: "
                       + ", ".join(repr(n) for n in strata), "rename the key to a stratum of the plan's frame "
                       "(quote names with spaces: \"North Basin\" = 5)")
    g = _table(source, pop, "population.gradient", {"per_km", "bearing_deg"})
    d = _table(source, pop, "population.day", {"sd", "wet_probability", "wet_effect"})
    t = _table(source, pop, "population.time_of_day", {"amplitude"})
    n = _table(source, pop, "population.noise", {"distribution", "sd"})
    c = _table(source, pop, "population.censoring", {"below", "above"})
    dist = n.get("distribution", "normal")
    if dist not in ("normal", "lognormal"):
        raise _err(source, "population.noise.distribution", dist, "\"normal\" or \"lognormal\"",
                   "write distribution = \"normal\" (additive) or \"lognormal\" (multiplicative, sd on the log scale)")
    below = _number(source, c, "population.censoring", "below", None)
    above = _number(source, c, "population.censoring", "above", None)
    if below is not None and above is not None and below >= above:
        raise _err(source, "population.censoring.above", above, f"a number above censoring.below = {below:g}",
                   "swap the two limits")
    return Population(
        level=level, strata=tuple((str(k), float(v)) for k, v in st.items()),
        per_km=_number(source, g, "population.gradient", "per_km", 0.0),
        bearing_deg=_number(source, g, "population.gradient", "bearing_deg", 0.0, low=0, high=360),
        day_sd=_number(source, d, "population.day", "sd", 0.0, low=0),
        wet_probability=_number(source, d, "population.day", "wet_probability", 0.0, low=0, high=1),
        wet_effect=_number(source, d, "population.day", "wet_effect", 0.0),
        amplitude=_number(source, t, "population.time_of_day", "amplitude", 0.0),
        distribution=dist, noise_sd=_number(source, n, "population.noise", "sd", 0.0, low=0),
        below=below, above=above, source=source)


def load_population(path: str | Path, *, strata: list[str] | None = None) -> Population:
    """Read and validate a population file (TOML)."""
    path = Path(path)
    source = f"population file {str(path)!r}"
    if not path.is_file():
        raise InputFileError(f"{source} does not exist or is not a file. Give a TOML file with a [population] "
                             "table (docs/population-file.md).")
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputFileError(f"{source} is not UTF-8 text. Save it as UTF-8.") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputFileError(f"{source} is not valid TOML ({exc}). Fix the line named.") from None
    return population_from_dict(raw, source=source, strata=strata)


# --------------------------------------------------------------------------- the model
def _direction(pop: Population) -> tuple[float, float]:
    b = math.radians(pop.bearing_deg)
    return math.sin(b), math.cos(b)  # x east, y north (frame CRS)


def structural(pop: Population, stratum_offset: np.ndarray, x: np.ndarray, y: np.ndarray, origin: tuple[float, float],
               day_effect: np.ndarray, u: np.ndarray) -> np.ndarray:
    """The value before noise and clipping (arrays broadcast)."""
    dx, dy = _direction(pop)
    along_km = ((x - origin[0]) * dx + (y - origin[1]) * dy) / 1000.0
    return pop.level + stratum_offset + pop.per_km * along_km + day_effect + pop.amplitude * (1 - 2 * u)


def season_effects(pop: Population, n_days: int, rng: np.random.Generator) -> np.ndarray:
    """One simulated season's effect of each allowed day (normal day effect plus wet days)."""
    normal = rng.standard_normal(n_days) * pop.day_sd
    wet = rng.random(n_days) < pop.wet_probability
    return normal + np.where(wet, pop.wet_effect, 0.0)


def expected_clipped(m: np.ndarray, pop: Population, lower: float, upper: float) -> np.ndarray:
    """E[clip(value, lower, upper)] for structural value(s) ``m`` under the population's noise (closed forms)."""
    from scipy.special import ndtr

    def pdf(z: np.ndarray) -> np.ndarray:
        return np.exp(-0.5 * z * z) / math.sqrt(2 * math.pi)

    m = np.asarray(m, float)
    s = pop.noise_sd
    if s == 0:
        return np.clip(m, lower, upper)
    if pop.distribution == "normal":
        a, b = (lower - m) / s, (upper - m) / s
        with np.errstate(invalid="ignore"):
            inside = m * (ndtr(b) - ndtr(a)) + s * (pdf(a) - pdf(b))
            return (np.where(np.isfinite(a), lower * ndtr(a), 0.0) + np.where(np.isfinite(b), upper * ndtr(-b), 0.0)
                    + inside)
    # lognormal: X = m exp(s Z - s^2/2) for m > 0 (mean m); m <= 0 gives X = m... clipped to lower
    out = np.clip(m, lower, upper).astype(float)
    pos = m > 0
    if pos.any():
        mp = m[pos]
        mu = np.log(mp) - s * s / 2

        def cdf(c: float) -> np.ndarray:  # P(X < c)
            return ndtr((math.log(c) - mu) / s) if c > 0 else np.zeros_like(mp)

        def partial(c: float) -> np.ndarray:  # E[X; X < c]
            return mp * ndtr((math.log(c) - mu - s * s) / s) if c > 0 else np.zeros_like(mp)

        hi_term = 0.0 if math.isinf(upper) else upper * (1 - cdf(upper))
        hi_part = mp if math.isinf(upper) else partial(upper)
        out[pos] = lower * cdf(lower) + hi_term + hi_part - partial(lower)
    return out


def draw_values(m: np.ndarray, pop: Population, rng: np.random.Generator) -> np.ndarray:
    """Structural values plus one draw of the noise (before clipping)."""
    z = rng.standard_normal(np.shape(m))
    if pop.distribution == "normal":
        return m + pop.noise_sd * z
    return m * np.exp(pop.noise_sd * z - pop.noise_sd ** 2 / 2)


@dataclass(frozen=True)
class StratumGrid:
    """What the true mean needs of one stratum: weight, area, centroid and a grid of points inside."""

    name: str
    weight: float
    centroid: tuple[float, float]
    x: np.ndarray
    y: np.ndarray
    lower: float
    upper: float  # inf without a declared range


@dataclass(frozen=True)
class SeasonTruth:
    """The frame's parts the population is evaluated on (built once per simulation)."""

    origin: tuple[float, float]
    strata: tuple[StratumGrid, ...]


def frame_grid(frame: Any, settings: dict, points: int = GRID_POINTS) -> SeasonTruth:
    """Centroids, weights and a regular grid of about ``points`` points in each stratum of the frame."""
    import shapely

    from ..stats.intervals import declared_support

    union_c = shapely.union_all([s.geometry for s in frame.strata]).centroid
    out = []
    for s in frame.strata:
        g = s.geometry
        x0, y0, x1, y1 = g.bounds
        step = math.sqrt(max(g.area, 1e-9) / points)
        xs = np.arange(x0 + step / 2, x1, step)
        ys = np.arange(y0 + step / 2, y1, step)
        gx, gy = np.meshgrid(xs, ys)
        gx, gy = gx.ravel(), gy.ravel()
        keep = shapely.contains_xy(g, gx, gy)
        if not keep.any():
            gx, gy, keep = np.array([g.representative_point().x]), np.array([g.representative_point().y]), [True]
        lower, L = declared_support(settings, s.name)
        c = g.centroid
        out.append(StratumGrid(s.name, float(s.weight), (c.x, c.y), gx[keep], gy[keep], lower,
                               lower + L if L is not None else math.inf))
    return SeasonTruth((union_c.x, union_c.y), tuple(out))


def true_mean(pop: Population, truth: SeasonTruth, day_effects: np.ndarray, times: int = TIME_POINTS) -> float:
    """The season's true mean over the frame, all allowed days and their windows (analysis scale).

    Exact for the unclipped part; the clipping correction is a numerical sum over the
    grid (see the module docstring).
    """
    day_mean = float(np.mean(day_effects)) if len(day_effects) else 0.0
    u = (np.arange(times) + 0.5) / times
    total = 0.0
    for st in truth.strata:
        off = pop.offset(st.name)
        exact = float(structural(pop, off, np.array(st.centroid[0]), np.array(st.centroid[1]), truth.origin,
                                 np.array(day_mean), np.array(0.5)))
        base = structural(pop, off, st.x, st.y, truth.origin, 0.0, 0.5)  # (points,)
        tod = pop.amplitude * (1 - 2 * u)  # (times,); base is at u = 0.5, where the term is 0
        lo_m = base.min() + np.min(day_effects, initial=0.0) + tod.min()
        hi_m = base.max() + np.max(day_effects, initial=0.0) + tod.max()
        reach = 9 * pop.noise_sd * (max(abs(lo_m), abs(hi_m), 1.0) if pop.distribution == "lognormal" else 1.0)
        correction = 0.0
        if lo_m - reach < st.lower or hi_m + reach > st.upper:
            # the full grid: points x days x times
            m = base[:, None, None] + np.asarray(day_effects, float)[None, :, None] + tod[None, None, :]
            correction = float(np.mean(expected_clipped(m, pop, st.lower, st.upper)) - np.mean(m))
        total += st.weight * (exact + correction)
    return total
