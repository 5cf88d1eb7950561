"""Sample sizes for the mean of bounded measurements, and their allocation over strata.

Notation: ``d`` the tolerance (half-width of the interval), ``a = 1 - confidence``
the error probability, ``L`` the range (largest possible difference between two
measurements), ``sigma`` a bound on the standard deviation, ``k = 2`` for a
two-sided statement and ``1`` for a one-sided one.

Every bound has three faces, all here:

- :func:`error_probability` -- the error probability it guarantees at ``n`` for ``d``;
- :func:`half_width` -- the tolerance it guarantees at ``n`` for a confidence;
- :func:`sample_size` -- the smallest ``n`` whose error probability is at most ``a``
  (from the closed form where there is one, then checked against the error
  probability, so rounding can never break the guarantee).

Stratified designs (:func:`allocate`, :func:`stratified_error_bound`,
:func:`stratified_half_width`) use the variance of the stratified mean,
``V = sum_h W_h^2 sigma_h^2 / n_h`` (Cochran, Sampling Techniques, 3rd ed. 1977,
ch. 5). ``docs/methods.md`` ("Sample size") gives every formula with its source.

Comparisons of a bound with ``a`` and ceilings of whole numbers allow a relative
slack of 1e-9, so floating-point noise (``1 - 0.9 = 0.09999999999999998``) never
adds a sample: Cantelli's ``n`` for ``L = 80, d = 15, a = 0.10`` is exactly 64.

Only the ``t`` bound needs scipy (``scipy.special``'s t distribution); it is imported inside the functions that use it,
so ``geosample size`` starts fast.
"""
from __future__ import annotations

import builtins
import math
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any, Mapping, Sequence

from ..errors import InfeasibleError, SettingError
from ..model import Allocation

__all__ = [
    "BOUNDS",
    "SIDES",
    "STATISTICS",
    "ALLOCATION_METHODS",
    "ASSUMPTIONS",
    "FORMULAS",
    "BOUND_NAMES",
    "CLI_NAMES",
    "PLAN_NAMES",
    "SampleSize",
    "Achieved",
    "sample_size",
    "achieved",
    "error_probability",
    "half_width",
    "allocate",
    "shares",
    "largest_remainder",
    "stratified_error_bound",
    "stratified_half_width",
]

BOUNDS = ("chebyshev", "cantelli", "hoeffding", "bernstein", "t", "betting")
SIDES = ("two", "one")
STATISTICS = ("mean", "geomean")
ALLOCATION_METHODS = ("proportional", "equal", "neyman", "optimal")

#: One sentence per bound: what it assumes about the samples.
ASSUMPTIONS = {
    "chebyshev": (
        "Chebyshev's inequality: the samples are pairwise independent (random sites and times), and the sd of "
        "a measurement is at most the given sd or, without one, range/2 (Popoviciu's inequality); used "
        "one-sided it stays valid but is conservative (cantelli is the one-sided form)."
    ),
    "cantelli": (
        "Cantelli's inequality (one-sided Chebyshev): the samples are pairwise independent, and the sd of a "
        "measurement is at most the given sd or, without one, range/2 (Popoviciu's inequality); one-sided only."
    ),
    "hoeffding": (
        "Hoeffding's inequality: the samples are independent, and every measurement lies inside a known "
        "interval whose length is the range."
    ),
    "bernstein": (
        "Bernstein's inequality: the samples are independent, every measurement lies inside a known interval "
        "whose length is the range, and the sd of a measurement is at most the given sd."
    ),
    "t": (
        "Student's t approximation: the sample mean is approximately normal (normal data, or enough "
        "independent samples for the central limit theorem), and the pilot sd is taken as the true sd; "
        "the guarantee is approximate, not a bound."
    ),
    "betting": (
        "Sized with Hoeffding's inequality (independent samples, every measurement inside a known interval "
        "whose length is the range), which is conservative for the betting interval used at assessment."
    ),
}

#: The sizing rule of each bound, as text (single stratum).
FORMULAS = {
    "chebyshev": "n >= sigma^2 / (a d^2), sigma = sd or range/2",
    "cantelli": "n >= sigma^2 (1 - a) / (a d^2), sigma = sd or range/2",
    "hoeffding": "n >= L^2 ln(k/a) / (2 d^2), k = 2 two-sided, 1 one-sided",
    "bernstein": "n >= ln(k/a) (2 sigma^2 + 2 L d / 3) / d^2, k = 2 two-sided, 1 one-sided",
    "t": "smallest n with n >= (t_{q, n-1} s / d)^2, q = 1 - a/2 two-sided, 1 - a one-sided (iterated)",
    "betting": "as hoeffding: n >= L^2 ln(k/a) / (2 d^2)",
}

#: How a bound is named in a sentence.
BOUND_NAMES = {
    "chebyshev": "Chebyshev's inequality",
    "cantelli": "Cantelli's inequality",
    "hoeffding": "Hoeffding's inequality",
    "bernstein": "Bernstein's inequality",
    "t": "the Student t approximation",
    "betting": "Hoeffding's inequality (sizing for the betting interval)",
}

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
range_ = builtins.range  # several functions take a keyword argument called ``range``


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class SampleSize:
    """The sample size for a mean within the tolerance, and what it guarantees.

    Attributes
    ----------
    n : int
        The smallest number of samples that meets the guarantee.
    bound, sides, statistic : str
        The bound used, ``"two"`` or ``"one"``, ``"mean"`` or ``"geomean"``.
    confidence : float
        The confidence asked for (``1 - a``).
    tolerance : float
        The half-width ``d`` (log10 units for ``geomean``).
    range, sd : float or None
        The inputs (``sd`` as given; ``sigma`` is what the bound used).
    sigma : float or None
        The sd bound the formula used (``sd``, or ``range/2`` by Popoviciu).
    assumption : str
        The bound's assumptions, with the figures of this case.
    error_bound : float
        The error probability the bound guarantees at ``n`` (at most ``1 - confidence``;
        approximate for ``t``).
    half_width : float
        The tolerance guaranteed at ``n`` for ``confidence`` (at most ``tolerance``).
    formula : str
        The sizing rule with the figures filled in.
    tolerance_factor : float or None
        ``10 ** tolerance`` for ``geomean`` (the tolerance as a factor), else None.
    notes : tuple of str
        Anything the user should know (an sd capped at range/2, ...).
    """

    n: int
    bound: str
    sides: str
    confidence: float
    tolerance: float
    range: float | None
    sd: float | None
    sigma: float | None
    assumption: str
    error_bound: float
    half_width: float
    formula: str
    statistic: str = "mean"
    tolerance_factor: float | None = None
    notes: tuple[str, ...] = ()

    def sentence(self) -> str:
        """The guarantee in one plain sentence (a statement about the sampling procedure)."""
        return (f"{self.n} samples: by {BOUND_NAMES[self.bound]} ({_short_assumption(self)}), "
                + _claim(self.n, self.tolerance, self.error_bound, self.bound, self.sides, self.statistic,
                         self.confidence) + ".")

    def as_dict(self) -> dict[str, Any]:
        """The fields as a plain dict (for JSON)."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


@dataclass(frozen=True)
class Achieved:
    """What ``n`` samples buy: the confidence for a tolerance, the tolerance for a confidence.

    Attributes
    ----------
    n : int
    bound, sides, statistic : str
    range, sd, sigma : float or None
    assumption : str
    tolerance : float or None
        The tolerance asked about (None if none was given).
    error_bound : float or None
        The error probability guaranteed for ``tolerance`` at ``n`` (capped at 1:
        1 means no guarantee); None without a tolerance.
    confidence_reached : float or None
        ``1 - error_bound``.
    confidence : float
        The confidence the half-width is computed for.
    half_width : float
        The tolerance guaranteed at ``n`` for ``confidence``.
    tolerance_factor, half_width_factor : float or None
        ``10 ** tolerance`` and ``10 ** half_width`` for ``geomean``.
    """

    n: int
    bound: str
    sides: str
    range: float | None
    sd: float | None
    sigma: float | None
    assumption: str
    tolerance: float | None
    error_bound: float | None
    confidence_reached: float | None
    confidence: float
    half_width: float
    statistic: str = "mean"
    tolerance_factor: float | None = None
    half_width_factor: float | None = None
    notes: tuple[str, ...] = ()

    def sentence(self) -> str:
        """What ``n`` samples buy, in one plain sentence."""
        head = f"{self.n} samples: by {BOUND_NAMES[self.bound]} ({_short_assumption(self)}), "
        at = _pct(self.confidence)
        tail = f"for {at} confidence the tolerance is {_pm(self.half_width, self.statistic, self.sides)}"
        if self.tolerance is None:
            return head + tail + "."
        if self.error_bound is not None and self.error_bound >= 1.0:
            what = f"the bound guarantees nothing for a tolerance of {_num(self.tolerance)} at this n"
        else:
            what = _claim(self.n, self.tolerance, self.error_bound, self.bound, self.sides, self.statistic)
        return head + what + "; " + tail + "."

    def as_dict(self) -> dict[str, Any]:
        """The fields as a plain dict (for JSON)."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


# --------------------------------------------------------------------------- wording
def _num(x: float) -> str:
    return f"{x:.4g}"


def _pct(c: float) -> str:
    return f"{c * 100:.4g}%"


def _pm(d: float, statistic: str, sides: str) -> str:
    sign = "±" if sides == "two" else "+/-"
    if statistic == "geomean":
        return f"{sign}{_num(d)} log10 units (a factor of {_num(10 ** d)})"
    return f"{sign}{_num(d)}" if sides == "two" else f"{_num(d)} on the side that matters"


def _short_assumption(r: SampleSize | Achieved) -> str:
    b = r.bound
    if b in ("chebyshev", "cantelli"):
        s = f"pairwise independent samples; sd at most {_num(r.sigma)}"
        popoviciu = r.sd is None or (r.range is not None and r.sigma < r.sd)
        s += " = range/2 by Popoviciu" if popoviciu else " (given)"
        if b == "chebyshev" and r.sides == "one":
            s += "; one-sided use, conservative"
        return s
    if b in ("hoeffding", "betting"):
        s = f"independent samples; every value inside a known range of length {_num(r.range)}"
        return s + ("; conservative for the betting interval" if b == "betting" else "")
    if b == "bernstein":
        return (f"independent samples; every value inside a known range of length {_num(r.range)}; "
                f"sd at most {_num(r.sigma)}")
    return f"approximately normal sample mean; pilot sd {_num(r.sd)} taken as the true sd"


def _claim(n: int, d: float, p: float, bound: str, sides: str, statistic: str,
           confidence: float | None = None) -> str:
    """The guarantee as a clause: the probability is ``confidence`` if given, else ``1 - p``."""
    geo = statistic == "geomean"
    what = f"the {'geometric mean' if geo else 'mean'} of {n} randomly drawn samples"
    truth = f"the true {'geometric mean' if geo else 'mean'}"
    approx = bound == "t"
    conf = 1 - p if confidence is None else confidence
    prob = (f"with probability {'about' if approx else 'at least'} {_pct(conf)} "
            f"(error probability {'about' if approx else 'at most'} {p:.3g}"
            + (", if the approximation holds)" if approx else ")"))
    if geo:
        f = f"a factor of {_num(10 ** d)} ({_num(d)} log10 units)"
        if sides == "two":
            return f"{what} will be within {f} of {truth} {prob}"
        return (f"{what} will be less than {f} above {truth} {prob}; the same holds for falling short of it "
                "by that factor")
    if sides == "two":
        return f"{what} will be within ±{_num(d)} of {truth} {prob}"
    return (f"{what} will be less than {_num(d)} above {truth} {prob}; the same holds for falling "
            f"{_num(d)} or more below it")


# --------------------------------------------------------------------------- checks
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


def _check_bound_sides(bound: Any, sides: Any, names: dict[str, str]) -> tuple[str, str]:
    _check_choice(bound, "bound", BOUNDS, names)
    _check_choice(sides, "sides", SIDES, names)
    if bound == "cantelli" and sides == "two":
        raise SettingError(names["sides"], sides, '"one" with the cantelli bound (a one-sided bound)',
                           fix=f'set {names["sides"]} to one, or use {names["bound"]} chebyshev for a two-sided '
                               "interval")
    return bound, sides


def _needs(bound: str) -> tuple[bool, bool]:
    """(needs range, needs sd) for ``bound``; chebyshev/cantelli need one of the two."""
    return bound in ("hoeffding", "betting", "bernstein"), bound in ("t", "bernstein")


def _check_scales(bound: str, range_: Any, sd: Any, names: dict[str, str]) -> tuple[float | None, float | None]:
    L = None if range_ is None else _check_positive(range_, "range", names, "the largest possible difference "
                                                                              "between two measurements")
    s = None if sd is None else _check_positive(sd, "sd", names, "a standard deviation")
    need_range, need_sd = _needs(bound)
    if need_range and L is None:
        raise SettingError(names["range"], None, f"a positive number: the {bound} bound needs the range L",
                           fix=f"give {names['range']} L, the largest possible difference between two "
                               "measurements")
    if need_sd and s is None:
        raise SettingError(names["sd"], None, f"a positive number: the {bound} bound needs a pilot sd",
                           fix=f"give {names['sd']} S from a pilot study or an earlier season")
    if bound in ("chebyshev", "cantelli") and L is None and s is None:
        raise SettingError(names["range"], None, f"a positive number (or an sd): the {bound} bound needs the "
                                                 "range L or an sd", fix=f"give {names['range']} L or "
                                                                         f"{names['sd']} S")
    return L, s


def _sigma(L: float | None, s: float | None) -> float | None:
    """The sd bound: the given sd, capped at range/2 (Popoviciu) when both are known."""
    if L is None:
        return s
    if s is None:
        return L / 2.0
    return min(s, L / 2.0)


def _sigma_note(L: float | None, s: float | None, label: str = "") -> tuple[str, ...]:
    if L is not None and s is not None and s > L / 2.0:
        where = f" in {label}" if label else ""
        return (f"sd {_num(s)}{where} is more than range/2 = {_num(L / 2)}, the largest sd values in a range "
                f"of {_num(L)} can have (Popoviciu); range/2 was used",)
    return ()


def _tol_ceil(x: float) -> int:
    """Ceiling that does not round a whole number up through floating-point noise."""
    return int(math.ceil(x - _REL * max(1.0, abs(x))))


def _meets(p: float, a: float) -> bool:
    return p <= a * (1.0 + _REL)


def _k(sides: str) -> float:
    return 2.0 if sides == "two" else 1.0


def _q(a: float, sides: str) -> float:
    return 1.0 - a / 2.0 if sides == "two" else 1.0 - a


# --------------------------------------------------------------------------- stratified core
def _t_ppf(q: float, df: float) -> float:
    """Student t quantile (``scipy.special.stdtrit``: same values as ``scipy.stats.t.ppf``, faster import)."""
    from scipy import special

    return float(special.stdtrit(df, q))


def _t_sf(x: float, df: float) -> float:
    """Student t upper tail ``P(T_df >= x)`` (``scipy.special.stdtr``, as ``scipy.stats.t.sf``)."""
    from scipy import special

    return float(special.stdtr(df, -x))


def _v(w: Sequence[float], n: Sequence[float], s: Sequence[float]) -> float:
    return sum(wi * wi * si * si / ni for wi, ni, si in zip(w, n, s))


def _welch_df(w, n, s) -> float:
    parts = [wi * wi * si * si / ni for wi, ni, si in zip(w, n, s)]
    den = sum(p * p / (ni - 1.0) for p, ni in zip(parts, n))
    return sum(parts) ** 2 / den if den > 0 else math.inf


def _err(bound: str, sides: str, w, n, d: float, sig, L, sd, *, normal: bool = False) -> float:
    """Error probability of the stratified mean (per-stratum lists; no checks)."""
    if any(ni <= 0 for ni in n):
        return 1.0
    k = _k(sides)
    if bound == "chebyshev":
        return min(1.0, _v(w, n, sig) / (d * d))
    if bound == "cantelli":
        V = _v(w, n, sig)
        return V / (V + d * d)
    if bound in ("hoeffding", "betting"):
        S = _v(w, n, L)
        return min(1.0, k * math.exp(-2.0 * d * d / S))
    if bound == "bernstein":
        V = _v(w, n, sig)
        M = max(wi * Li / ni for wi, Li, ni in zip(w, L, n))
        return min(1.0, k * math.exp(-d * d / (2.0 * V + 2.0 * M * d / 3.0)))
    # t
    V = _v(w, n, sd)
    z = d / math.sqrt(V)
    if normal:
        return min(1.0, k * (1.0 - NormalDist().cdf(z)))
    if any(ni < 2 for ni in n):
        return 1.0
    return min(1.0, k * _t_sf(z, _welch_df(w, n, sd)))


def _hw(bound: str, sides: str, w, n, a: float, sig, L, sd) -> float:
    """Half-width of the stratified mean at error probability ``a`` (per-stratum lists; no checks)."""
    if any(ni <= 0 for ni in n):
        return math.inf
    k = _k(sides)
    if bound == "chebyshev":
        return math.sqrt(_v(w, n, sig) / a)
    if bound == "cantelli":
        return math.sqrt(_v(w, n, sig) * (1.0 - a) / a)
    if bound in ("hoeffding", "betting"):
        return math.sqrt(_v(w, n, L) * math.log(k / a) / 2.0)
    if bound == "bernstein":
        u = math.log(k / a)
        V = _v(w, n, sig)
        M = max(wi * Li / ni for wi, Li, ni in zip(w, L, n))
        b = M * u / 3.0
        return b + math.sqrt(b * b + 2.0 * V * u)
    if any(ni < 2 for ni in n):
        return math.inf
    return _t_ppf(_q(a, sides), _welch_df(w, n, sd)) * math.sqrt(_v(w, n, sd))


# --------------------------------------------------------------------------- single sample
def _single(bound, sides, range_, sd, names):
    bound, sides = _check_bound_sides(bound, sides, names)
    L, s = _check_scales(bound, range_, sd, names)
    return bound, sides, L, s, _sigma(L, s)


def error_probability(n: int, tolerance: float, *, range: float | None = None, sd: float | None = None,
                      bound: str = "chebyshev", sides: str = "two",
                      names: Mapping[str, str] | None = None) -> float:
    """The error probability ``bound`` guarantees for the mean of ``n`` samples and tolerance ``d``.

    Two-sided: a bound on ``P(|mean - mu| >= d)``; one-sided: on ``P(mean - mu >= d)``
    (and, equally, on ``P(mu - mean >= d)``). Capped at 1 (1 means no guarantee).

    Parameters
    ----------
    n : int
        Number of samples (``t`` needs at least 2).
    tolerance : float
        ``d``, the half-width.
    range, sd : float, optional
        ``L`` and a bound on the sd (which each bound needs: see :data:`ASSUMPTIONS`).
    bound : str
        One of :data:`BOUNDS`.
    sides : str
        ``"two"`` or ``"one"``.
    names : mapping, optional
        Setting names used in error messages (e.g. :data:`CLI_NAMES`).

    Returns
    -------
    float
        ``sigma^2 / (n d^2)`` (Chebyshev), ``sigma^2 / (sigma^2 + n d^2)`` (Cantelli),
        ``k exp(-2 n d^2 / L^2)`` (Hoeffding, betting), ``k exp(-n d^2 / (2 sigma^2 + 2 L d / 3))``
        (Bernstein), ``k P(T_{n-1} >= d sqrt(n) / s)`` (t, approximate).

    Raises
    ------
    SettingError
        For a value that is not accepted (the message names the setting).

    Examples
    --------
    >>> round(error_probability(72, 15, range=80, bound="chebyshev"), 4)
    0.0988
    """
    nm = _names(names)
    bound, sides, L, s, sig = _single(bound, sides, range, sd, nm)
    d = _check_positive(tolerance, "tolerance", nm, "the half-width D of the interval")
    n = _check_n(n, nm, 2 if bound == "t" else 1, " (the t bound needs 2)" if bound == "t" else "")
    return _err(bound, sides, [1.0], [n], d, [sig], [L], [s])


def half_width(n: int, confidence: float = 0.95, *, range: float | None = None, sd: float | None = None,
               bound: str = "chebyshev", sides: str = "two", names: Mapping[str, str] | None = None) -> float:
    """The tolerance ``bound`` guarantees for the mean of ``n`` samples at ``confidence``.

    Returns
    -------
    float
        ``sigma / sqrt(n a)`` (Chebyshev), ``sigma sqrt((1 - a) / (n a))`` (Cantelli),
        ``L sqrt(ln(k/a) / (2 n))`` (Hoeffding, betting), ``b + sqrt(b^2 + 2 sigma^2 u / n)`` with
        ``u = ln(k/a)``, ``b = L u / (3 n)`` (Bernstein), ``t_{q, n-1} s / sqrt(n)`` (t).

    Examples
    --------
    >>> round(half_width(43, 0.90, range=80, bound="hoeffding"), 3)
    14.931
    """
    nm = _names(names)
    bound, sides, L, s, sig = _single(bound, sides, range, sd, nm)
    a = 1.0 - _check_confidence(confidence, nm)
    n = _check_n(n, nm, 2 if bound == "t" else 1, " (the t bound needs 2)" if bound == "t" else "")
    return _hw(bound, sides, [1.0], [n], a, [sig], [L], [s])


def _closed_form(bound: str, sides: str, d: float, a: float, sig, L, s) -> tuple[float, str]:
    k = _k(sides)
    if bound == "chebyshev":
        x = sig * sig / (a * d * d)
        return x, f"n >= sigma^2 / (a d^2) = {_num(sig)}^2 / ({_num(a)} x {_num(d)}^2) = {x:.6g}"
    if bound == "cantelli":
        x = sig * sig * (1 - a) / (a * d * d)
        return x, f"n >= sigma^2 (1 - a) / (a d^2) = {_num(sig)}^2 x {_num(1 - a)} / ({_num(a)} x {_num(d)}^2) = {x:.6g}"
    if bound in ("hoeffding", "betting"):
        x = L * L * math.log(k / a) / (2 * d * d)
        return x, f"n >= L^2 ln({_num(k)}/a) / (2 d^2) = {_num(L)}^2 ln({_num(k)}/{_num(a)}) / (2 x {_num(d)}^2) = {x:.6g}"
    if bound == "bernstein":
        x = math.log(k / a) * (2 * sig * sig + 2 * L * d / 3) / (d * d)
        return x, (f"n >= ln({_num(k)}/a) (2 sigma^2 + 2 L d / 3) / d^2 = ln({_num(k)}/{_num(a)}) "
                   f"(2 x {_num(sig)}^2 + 2 x {_num(L)} x {_num(d)} / 3) / {_num(d)}^2 = {x:.6g}")
    z = NormalDist().inv_cdf(_q(a, sides))
    x = (z * s / d) ** 2
    return x, f"n >= (t_{{q, n-1}} s / d)^2 with s = {_num(s)}, d = {_num(d)}, q = {_num(_q(a, sides))}"


def _t_iterate(n: int, q: float, s: float, d: float) -> int:
    """Cochran's iteration ``n <- ceil((t_{q, n-1} s / d)^2)`` from ``n`` until it repeats."""
    seen: set[int] = set()
    n = max(2, n)
    while n not in seen and len(seen) < 100:
        seen.add(n)
        n = max(2, _tol_ceil((_t_ppf(q, n - 1) * s / d) ** 2))
    return n


def _smallest_n(err, n: int, least: int, a: float) -> int:
    """Step ``n`` up until ``err(n) <= a``, then down while ``err(n - 1) <= a`` (err decreasing in n)."""
    n = max(least, n)
    while not _meets(err(n), a):
        n += 1
    while n > least and _meets(err(n - 1), a):
        n -= 1
    return n


def sample_size(tolerance: float, *, range: float | None = None, sd: float | None = None,
                confidence: float = 0.95, bound: str = "chebyshev", sides: str = "two",
                statistic: str = "mean", names: Mapping[str, str] | None = None) -> SampleSize:
    """The smallest number of samples for a mean within ``tolerance`` at ``confidence``.

    Parameters
    ----------
    tolerance : float
        ``d``, the half-width wanted (log10 units when ``statistic="geomean"``).
    range : float, optional
        ``L``, the largest possible difference between two measurements (log10
        units for ``geomean``). Needed by hoeffding, bernstein and betting; for
        chebyshev and cantelli it gives ``sigma = L/2`` (Popoviciu 1935) when no sd is given.
    sd : float, optional
        A bound on the sd of a measurement (pilot sd for ``t``; needed by t and bernstein).
    confidence : float
        ``1 - a``, strictly between 0 and 1.
    bound : str
        One of :data:`BOUNDS`; see :data:`ASSUMPTIONS` for what each assumes.
    sides : str
        ``"two"`` (``|mean - mu| < d``) or ``"one"`` (one direction). ``cantelli`` is one-sided
        only; ``chebyshev`` used one-sided is valid but conservative.
    statistic : str
        ``"mean"`` or ``"geomean"`` (the same on log10 values; the tolerance is then
        also reported as the factor ``10 ** tolerance``).
    names : mapping, optional
        Setting names for error messages (:data:`CLI_NAMES` from the command line).

    Returns
    -------
    SampleSize

    Raises
    ------
    SettingError
        A value that is not accepted (tolerance, range or sd <= 0, confidence outside (0, 1),
        an unknown bound, a bound without the range or sd it needs, cantelli two-sided).

    Examples
    --------
    >>> sample_size(15, range=80, confidence=0.90).n      # CHECKS.md: Chebyshev 71.1 -> 72
    72
    >>> sample_size(15, range=80, confidence=0.90, bound="cantelli", sides="one").n   # exactly 64
    64
    """
    nm = _names(names)
    _check_choice(statistic, "statistic", STATISTICS, nm)
    bound, sides, L, s, sig = _single(bound, sides, range, sd, nm)
    d = _check_positive(tolerance, "tolerance", nm, "the half-width D of the interval"
                        + (", in log10 units" if statistic == "geomean" else ""))
    a = 1.0 - _check_confidence(confidence, nm)
    x, formula = _closed_form(bound, sides, d, a, sig, L, s)
    least = 2 if bound == "t" else 1
    if x > 1e12:
        raise InfeasibleError(f"{nm['tolerance']} = {d!r} needs about {x:.3g} samples with the {bound} bound; "
                              f"choose a larger {nm['tolerance']} or a lower {nm['confidence']}.")
    n0 = _tol_ceil(x)
    if bound == "t":
        n0 = _t_iterate(n0, _q(a, sides), s, d)

    def err(m: int) -> float:
        return _err(bound, sides, [1.0], [m], d, [sig], [L], [s])

    n = _smallest_n(err, n0, least, a)
    formula += f" -> n = {n}"
    p = err(n)
    notes = _sigma_note(L, s) if bound in ("chebyshev", "cantelli", "bernstein") else ()
    if bound == "betting":
        notes += ("betting: sized with Hoeffding's bound; the betting interval is usually narrower",)
    return SampleSize(
        n=n, bound=bound, sides=sides, confidence=1.0 - a, tolerance=d, range=L, sd=s,
        sigma=sig if bound != "t" else s, assumption=ASSUMPTIONS[bound], error_bound=p,
        half_width=_hw(bound, sides, [1.0], [n], a, [sig], [L], [s]), formula=formula, statistic=statistic,
        tolerance_factor=(10.0 ** d) if statistic == "geomean" else None, notes=notes,
    )


def achieved(n: int, *, tolerance: float | None = None, confidence: float | None = None,
             range: float | None = None, sd: float | None = None, bound: str = "chebyshev", sides: str = "two",
             statistic: str = "mean", names: Mapping[str, str] | None = None) -> Achieved:
    """What ``n`` samples buy: the confidence reached for ``tolerance`` and the tolerance at ``confidence``.

    Parameters
    ----------
    n : int
        Number of samples.
    tolerance : float, optional
        A half-width to ask about; the result gives the error probability and
        confidence the bound guarantees for it.
    confidence : float, optional
        The confidence for the half-width (default 0.95).
    range, sd, bound, sides, statistic, names
        As for :func:`sample_size`.

    Returns
    -------
    Achieved

    Examples
    --------
    >>> r = achieved(32, tolerance=20, range=50)            # common practice: 0.0488
    >>> round(r.error_bound, 4), round(r.half_width, 2)
    (0.0488, 19.76)
    """
    nm = _names(names)
    _check_choice(statistic, "statistic", STATISTICS, nm)
    bound, sides, L, s, sig = _single(bound, sides, range, sd, nm)
    n = _check_n(n, nm, 2 if bound == "t" else 1, " (the t bound needs 2)" if bound == "t" else "")
    conf = _check_confidence(0.95 if confidence is None else confidence, nm)
    d = None
    p = None
    if tolerance is not None:
        d = _check_positive(tolerance, "tolerance", nm, "the half-width D of the interval")
        p = _err(bound, sides, [1.0], [n], d, [sig], [L], [s])
    hw = _hw(bound, sides, [1.0], [n], 1.0 - conf, [sig], [L], [s])
    geo = statistic == "geomean"
    return Achieved(
        n=n, bound=bound, sides=sides, range=L, sd=s, sigma=sig if bound != "t" else s,
        assumption=ASSUMPTIONS[bound], tolerance=d, error_bound=p,
        confidence_reached=None if p is None else 1.0 - p, confidence=conf, half_width=hw, statistic=statistic,
        tolerance_factor=(10.0 ** d) if geo and d is not None else None,
        half_width_factor=(10.0 ** hw) if geo and math.isfinite(hw) else None,
        notes=_sigma_note(L, s) if bound in ("chebyshev", "cantelli", "bernstein") else (),
    )


# --------------------------------------------------------------------------- strata
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


def _scales(bound: str, L: list, s: list, nm: dict[str, str], labels: Sequence[str]) -> list[float | None]:
    need_range, need_sd = _needs(bound)
    for h, lab in enumerate(labels):
        if need_range and L[h] is None:
            raise SettingError(nm["range"], None, f"a positive range for every stratum: the {bound} bound needs "
                                                  f"it (missing for {lab})")
        if need_sd and s[h] is None:
            raise SettingError(nm["sd"], None, f"a positive sd for every stratum: the {bound} bound needs it "
                                               f"(missing for {lab})")
        if bound in ("chebyshev", "cantelli") and L[h] is None and s[h] is None:
            raise SettingError(nm["range"], None, f"a range or an sd for every stratum: the {bound} bound needs "
                                                  f"one (missing for {lab})")
    return [_sigma(Lh, sh) for Lh, sh in zip(L, s)]


def shares(weights: Sequence[float], *, method: str = "proportional", sd: Any = None, range: Any = None,
           cost: Any = None, names: Mapping[str, str] | None = None) -> tuple[float, ...]:
    """Real-valued shares of the total for each stratum (they add up to 1).

    ``proportional``: ``W_h``; ``equal``: ``1/H``; ``neyman``: ``W_h S_h``;
    ``optimal``: ``W_h S_h / sqrt(c_h)`` (Cochran 1977, ch. 5), with
    ``S_h`` the stratum's sd, or range/2 without one (Popoviciu), and ``c_h`` the cost
    of a sample (1 when not given).

    Examples
    --------
    >>> [round(100 * x, 2) for x in shares([1, 5], method="neyman", sd=[20, 12])]   # Cochran ch. 5
    [25.0, 75.0]
    """
    nm = _names(names, PLAN_NAMES)
    _check_choice(method, "method", ALLOCATION_METHODS, nm)
    w = _weights(weights, nm)
    k = len(w)
    if method == "proportional":
        raw = w
    elif method == "equal":
        raw = [1.0] * k
    else:
        L = _per(range, k, "range", nm, "the largest possible difference between two measurements")
        s = _per(sd, k, "sd", nm, "a standard deviation")
        S = []
        for h in range_(k):
            if s[h] is None and L[h] is None:
                raise SettingError(nm["sd"], None, f"an sd or a range for every stratum: {method} allocation "
                                                   f"needs one (missing for stratum {h + 1})")
            S.append(_sigma(L[h], s[h]))
        c = _per(cost, k, "cost", nm, "the cost of one sample") if method == "optimal" else [None] * k
        raw = [wh * Sh / math.sqrt(ch if ch is not None else 1.0) for wh, Sh, ch in zip(w, S, c)]
    total = sum(raw)
    if total <= 0:
        return tuple(w)
    return tuple(x / total for x in raw)


def largest_remainder(p: Sequence[float], total: int, *, minimum: int = 0,
                      labels: Sequence[str] | None = None) -> tuple[tuple[int, ...], tuple[str, ...]]:
    """Whole numbers adding up to ``total``, close to ``total * p``, each at least ``minimum``.

    Strata whose quota is below ``minimum`` get ``minimum``; the rest of the total
    is shared again among the others in proportion to ``p`` (repeated until no quota
    is below the minimum); then each gets the floor of its quota and the samples left
    over go to the largest remainders (ties to the earlier stratum).

    Returns
    -------
    (n, notes)
        The integers, and a note for every stratum raised to the minimum.

    Raises
    ------
    InfeasibleError
        If ``total < minimum * len(p)``.

    Examples
    --------
    >>> largest_remainder([1 / 6, 5 / 6], 100)[0]        # Cochran ch. 5 proportional: 16.67, 83.33
    (17, 83)
    """
    k = len(p)
    labels = list(labels) if labels is not None else [f"stratum {h + 1}" for h in range_(k)]
    if total < minimum * k:
        raise InfeasibleError(
            f"a total of {total} samples cannot give each of the {k} strata at least {minimum} "
            f"(that needs {minimum * k}); raise the total to {minimum * k} or more, lower min_per_stratum, "
            "or merge strata.")
    fixed: dict[int, int] = {}
    was: dict[int, float] = {}
    while True:
        free = [h for h in range_(k) if h not in fixed]
        left = total - sum(fixed.values())
        mass = sum(p[h] for h in free)
        quota = {h: (left * p[h] / mass if mass > 0 else left / len(free)) for h in free}
        low = [h for h in free if quota[h] < minimum - _REL]
        if not low:
            break
        for h in low:
            fixed[h] = minimum
            was[h] = quota[h]
        if len(fixed) == k:
            break
    n = [0] * k
    for h, m in fixed.items():
        n[h] = m
    free = [h for h in range_(k) if h not in fixed]
    if free:
        left = total - sum(fixed.values())
        floors = {h: int(math.floor(quota[h] + _REL)) for h in free}
        for h in free:
            n[h] = floors[h]
        spare = left - sum(floors.values())
        order = sorted(free, key=lambda h: (-(quota[h] - floors[h]), h))
        for h in order[:spare]:
            n[h] += 1
    else:  # every stratum at the minimum: give what is left by largest remainder of total * p
        spare = total - minimum * k
        q = [spare * ph for ph in p]
        for h in range_(k):
            n[h] += int(math.floor(q[h] + _REL))
        order = sorted(range_(k), key=lambda h: (-(q[h] - math.floor(q[h] + _REL)), h))
        for h in order[: total - sum(n)]:
            n[h] += 1
    notes = tuple(f"minimum of {minimum} per stratum raised {labels[h]} from {was[h]:.3g} (its share of the "
                  f"total) to {n[h]}" for h in sorted(fixed))
    return tuple(n), notes


def _strat_inputs(weights, range_v, sd, bound, sides, nm, labels=None, require=True):
    bound, sides = _check_bound_sides(bound, sides, nm)
    w = _weights(weights, nm)
    k = len(w)
    labels = labels or [f"stratum {h + 1}" for h in range_(k)]
    L = _per(range_v, k, "range", nm, "the largest possible difference between two measurements")
    s = _per(sd, k, "sd", nm, "a standard deviation")
    sig = _scales(bound, L, s, nm, labels) if require else [_sigma(Lh, sh) for Lh, sh in zip(L, s)]
    return bound, sides, w, L, s, sig


def _check_nh(n_h: Any, k: int, nm: dict[str, str], least: int) -> list[int]:
    vals = list(n_h)
    if len(vals) != k or any(isinstance(v, bool) or not _finite(v) or not float(v).is_integer() or v < least
                             for v in vals):
        raise SettingError(nm["n"], tuple(vals), f"{k} whole numbers >= {least} (one per stratum)")
    return [int(v) for v in vals]


def stratified_error_bound(weights: Sequence[float], n_h: Sequence[int], tolerance: float, *, range: Any = None,
                           sd: Any = None, bound: str = "chebyshev", sides: str = "two",
                           names: Mapping[str, str] | None = None) -> float:
    """The error probability ``bound`` guarantees for the stratified mean ``sum W_h ybar_h``.

    With ``V = sum W_h^2 sigma_h^2 / n_h`` (``sigma_h`` = sd_h, or range_h / 2) and
    ``S = sum W_h^2 L_h^2 / n_h`` (Cochran 1977, ch. 5):

    - chebyshev: ``V / d^2``; cantelli: ``V / (V + d^2)``;
    - hoeffding, betting: ``k exp(-2 d^2 / S)`` (the stratified mean is a sum of
      independent terms of range ``W_h L_h / n_h``);
    - bernstein: ``k exp(-d^2 / (2 V + 2 M d / 3))``, ``M = max_h W_h L_h / n_h``
      (Bernstein's inequality for independent, not identically distributed terms);
    - t: ``k P(T_df >= d / sqrt(V))`` with the sds and Welch-Satterthwaite ``df``
      (approximate).

    ``weights`` are normalised to add up to 1; ``range`` and ``sd`` are one number or one per stratum.

    Examples
    --------
    >>> round(stratified_error_bound([1.0], [72], 15, range=80), 4)    # one stratum = error_probability
    0.0988
    """
    nm = _names(names, PLAN_NAMES)
    bound, sides, w, L, s, sig = _strat_inputs(weights, range, sd, bound, sides, nm)
    n = _check_nh(n_h, len(w), nm, 2 if bound == "t" else 1)
    d = _check_positive(tolerance, "tolerance", nm, "the half-width D of the interval")
    return _err(bound, sides, w, n, d, sig, L, s)


def stratified_half_width(weights: Sequence[float], n_h: Sequence[int], confidence: float = 0.95, *,
                          range: Any = None, sd: Any = None, bound: str = "chebyshev", sides: str = "two",
                          names: Mapping[str, str] | None = None) -> float:
    """The tolerance ``bound`` guarantees for the stratified mean at ``confidence``.

    Chebyshev ``sqrt(V / a)``, Cantelli ``sqrt(V (1 - a) / a)``, Hoeffding and betting
    ``sqrt(S ln(k/a) / 2)``, Bernstein ``b + sqrt(b^2 + 2 V u)`` with ``u = ln(k/a)``,
    ``b = M u / 3``, t ``t_{q, df} sqrt(V)`` (see :func:`stratified_error_bound`).

    Examples
    --------
    >>> round(stratified_half_width([1.0], [72], 0.90, range=80), 3)
    14.907
    """
    nm = _names(names, PLAN_NAMES)
    bound, sides, w, L, s, sig = _strat_inputs(weights, range, sd, bound, sides, nm)
    n = _check_nh(n_h, len(w), nm, 2 if bound == "t" else 1)
    a = 1.0 - _check_confidence(confidence, nm)
    return _hw(bound, sides, w, n, a, sig, L, s)


def _lower_total(bound, sides, w, p, d, a, sig, L, s, least_total: int, minimum: int) -> int:
    """A total below which no rounded allocation with shares ``p`` can meet the guarantee.

    Each rounded ``n_h`` is at most ``max(minimum, N p_h + 1)`` and every error bound
    decreases in every ``n_h`` (for t, the normal tail is used: it is below the t tail),
    so the smallest ``N`` whose optimistic allocation meets the guarantee is a lower bound.
    """
    def ok(N: int) -> bool:
        opt = [max(float(minimum), N * ph + 1.0) for ph in p]
        return _meets(_err(bound, sides, w, opt, d, sig, L, s, normal=True), a)

    lo, hi = least_total, max(least_total, 1)
    while not ok(hi):
        lo, hi = hi, hi * 2
        if hi > 10**12:
            raise InfeasibleError(f"the tolerance {d!r} needs more than 10^12 samples with the {bound} bound; "
                                  "choose a larger tolerance or a lower confidence.")
    while lo < hi:  # smallest N in [lo, hi] with ok(N)
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid + 1
    return max(least_total, lo)


def allocate(weights: Sequence[float], *, strata: Sequence[str] | None = None, n: int | None = None,
             tolerance: float | None = None, method: str = "proportional", sd: Any = None, range: Any = None,
             cost: Any = None, min_per_stratum: int = 2, bound: str = "chebyshev", confidence: float = 0.95,
             sides: str = "two", statistic: str = "mean", names: Mapping[str, str] | None = None) -> Allocation:
    """Split a total over strata, or find the smallest total whose allocation meets the tolerance.

    Parameters
    ----------
    weights : sequence of float
        Area shares of the strata (normalised to add up to 1).
    strata : sequence of str, optional
        Stratum names (default ``"stratum 1"``, ...).
    n : int, optional
        A fixed total. The result then states what it guarantees for ``tolerance``
        (if given) and the tolerance it reaches at ``confidence``.
    tolerance : float, optional
        The half-width wanted; without ``n`` the total is the smallest one whose
        rounded allocation meets :func:`stratified_error_bound` ``<= 1 - confidence``.
    method : str
        One of :data:`ALLOCATION_METHODS` (see :func:`shares`).
    sd, range, cost : float or sequence, optional
        One number for every stratum, or one per stratum.
    min_per_stratum : int
        Fewest samples in a stratum (raised to 2 for the t bound, which needs an sd per stratum).
    bound, confidence, sides, statistic
        As for :func:`sample_size`.
    names : mapping, optional
        Setting names for messages (default :data:`PLAN_NAMES`).

    Returns
    -------
    Allocation

    Raises
    ------
    SettingError
        A value that is not accepted.
    InfeasibleError
        ``n`` too small for ``min_per_stratum`` in every stratum.

    Examples
    --------
    >>> a = allocate([1.0], tolerance=15, range=80, confidence=0.90)   # one stratum = sample_size
    >>> a.total, a.n
    (72, (72,))
    >>> allocate([1, 5], n=100, method="neyman", sd=[20, 12]).n        # Cochran ch. 5: (25, 75)
    (25, 75)
    """
    nm = _names(names, PLAN_NAMES)
    _check_choice(method, "method", ALLOCATION_METHODS, nm)
    _check_choice(statistic, "statistic", STATISTICS, nm)
    w = _weights(weights, nm)
    k = len(w)
    labels = list(strata) if strata is not None else [f"stratum {h + 1}" for h in range_(k)]
    if len(labels) != k:
        raise SettingError(nm["strata"], tuple(labels), f"{k} names, one per weight")
    # a fixed total split in proportion to area (or equally) needs no scale; it then guarantees nothing
    bare = n is not None and tolerance is None and range is None and sd is None and method in ("proportional",
                                                                                                 "equal")
    bound, sides, w, L, s, sig = _strat_inputs(w, range, sd, bound, sides, nm, labels, require=not bare)
    a = 1.0 - _check_confidence(confidence, nm)
    if isinstance(min_per_stratum, bool) or not isinstance(min_per_stratum, int) or min_per_stratum < 1:
        raise SettingError(nm["min_per_stratum"], min_per_stratum, "a whole number >= 1")
    notes: list[str] = []
    minimum = min_per_stratum
    if bound == "t" and minimum < 2:
        minimum = 2
        notes.append("the t bound needs an sd in every stratum: minimum per stratum raised to 2")
    d = None
    if tolerance is not None:
        d = _check_positive(tolerance, "tolerance", nm, "the half-width D of the interval"
                            + (", in log10 units" if statistic == "geomean" else ""))
    if n is None and d is None:
        raise SettingError(nm["tolerance"], None, "a positive number (the half-width D), or a fixed total n",
                           fix=f"give {nm['tolerance']}, or {nm['n']} for a fixed total")
    c = _per(cost, k, "cost", nm, "the cost of one sample")
    if method == "optimal" and cost is None:
        notes.append("optimal allocation without costs: equal cost per sample (the same as Neyman)")
    p = shares(w, method=method, sd=s if any(v is not None for v in s) else None,
               range=L if any(v is not None for v in L) else None, cost=c if method == "optimal" and cost is not None
               else None, names=nm)

    def err(n_h: Sequence[int]) -> float:
        return _err(bound, sides, w, n_h, d, sig, L, s)

    if n is not None:
        total = _check_n(n, nm, 1)
        n_h, raised = largest_remainder(p, total, minimum=minimum, labels=labels)
        notes += raised
        if d is not None:
            eb = err(n_h)
            if not _meets(eb, a):
                notes.append(f"n = {total} does not reach ±{_num(d)} at {_pct(1 - a)}: the {bound} bound "
                             f"guarantees error probability at most {min(eb, 1.0):.3g} for it")
        else:
            eb = a
    else:
        least = minimum * k
        start = _lower_total(bound, sides, w, p, d, a, sig, L, s, least, minimum)
        total = start
        while True:
            n_h, raised = largest_remainder(p, total, minimum=minimum, labels=labels)
            eb = err(n_h)
            if _meets(eb, a):
                break
            total += 1
        notes += raised
    if bare:
        hw, eb = math.inf, 1.0
        notes.append(f"no {nm['range']} or {nm['sd']} given: the allocation carries no guarantee")
    else:
        hw = _hw(bound, sides, w, n_h, a, sig, L, s)
    if bound == "betting":
        notes.append("betting: sized with Hoeffding's bound; the betting interval is usually narrower")
    if bound == "bernstein":
        notes.append("bernstein: Bernstein's inequality for the stratified mean as a sum of independent terms "
                     "(variance sum W_h^2 sigma_h^2 / n_h, each term within W_h L_h / n_h of its mean)")
    for h in range_(k):
        if bound in ("chebyshev", "cantelli", "bernstein"):
            notes += _sigma_note(L[h], s[h], labels[h])
    if statistic == "geomean":
        if d is not None:
            notes.append(f"geomean: tolerance {_num(d)} log10 units = a factor of {_num(10 ** d)}")
        if math.isfinite(hw):
            notes.append(f"geomean: achieved tolerance {_num(hw)} log10 units = a factor of {_num(10 ** hw)}")
    return Allocation(
        strata=tuple(labels), n=tuple(int(v) for v in n_h), total=int(sum(n_h)), method=method, bound=bound,
        sides=sides, confidence=1.0 - a, tolerance=d, error_bound=float(min(eb, 1.0)),
        achieved_tolerance=float(hw) if math.isfinite(hw) else None, weights=tuple(w), notes=tuple(notes),
    )
