"""Every bound's three faces: the error probability at ``n``, the half-width at ``n``, the smallest ``n``.

Notation: ``d`` the tolerance (half-width of the interval), ``a = 1 - confidence``
the error probability, ``L`` the range (largest possible difference between two
measurements), ``sigma`` a bound on the standard deviation, ``k = 2`` for a
two-sided statement and ``1`` for a one-sided one.

- :func:`error_probability` -- the error probability a bound guarantees at ``n`` for ``d``;
- :func:`half_width` -- the tolerance it guarantees at ``n`` for a confidence;
- :func:`smallest_n` -- the smallest ``n`` whose error probability is at most ``a``
  (from the closed form where there is one, then checked against the error
  probability, so rounding can never break the guarantee);
- :func:`stratified_error_bound`, :func:`stratified_half_width` -- the same for the
  stratified mean, with ``V = sum_h W_h^2 sigma_h^2 / n_h`` (Cochran, Sampling
  Techniques, 3rd ed. 1977, ch. 5).

:data:`BOUNDS`, :data:`SIDES`, :data:`ASSUMPTIONS` (one sentence per bound) and
:data:`FORMULAS` (the sizing rule as text) live here. ``docs/methods.md`` ("Sample
size") gives every formula with its source.

Comparisons of a bound with ``a`` and ceilings of whole numbers allow a relative
slack of 1e-9, so floating-point noise (``1 - 0.9 = 0.09999999999999998``) never
adds a sample: Cantelli's ``n`` for ``L = 80, d = 15, a = 0.10`` is exactly 64.

Only the ``t`` bound needs scipy (``scipy.special``'s t distribution); it is imported
inside the functions that use it, so ``geosample size`` starts fast.
"""
from __future__ import annotations

import builtins
import math
from statistics import NormalDist
from typing import Any, Mapping, Sequence

from ..errors import SettingError
from ._checks import (PLAN_NAMES, _check_choice, _check_confidence, _check_n, _check_nh, _check_positive,
                      _meets, _names, _num, _per, _tol_ceil, _weights)

__all__ = [
    "BOUNDS",
    "SIDES",
    "STATISTICS",
    "ASSUMPTIONS",
    "FORMULAS",
    "BOUND_NAMES",
    "error_probability",
    "half_width",
    "smallest_n",
    "stratified_error_bound",
    "stratified_half_width",
]

BOUNDS = ("chebyshev", "cantelli", "hoeffding", "bernstein", "t", "betting")
SIDES = ("two", "one")
STATISTICS = ("mean", "geomean")


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
        "The betting confidence interval (Waudby-Smith & Ramdas 2024): independent samples, every measurement "
        "inside a known interval whose length is the range; its coverage rests on the range alone. The sample "
        "size comes from simulating the interval with the given sd (without one, range/2, the widest case): "
        "its half-width is at most the tolerance in 90% of simulated surveys. The error-probability and "
        "stratified figures use Hoeffding's form, which the betting interval is not always narrower than."
    ),
}

#: The sizing rule of each bound, as text (single stratum).
FORMULAS = {
    "chebyshev": "n >= sigma^2 / (a d^2), sigma = sd or range/2",
    "cantelli": "n >= sigma^2 (1 - a) / (a d^2), sigma = sd or range/2",
    "hoeffding": "n >= L^2 ln(k/a) / (2 d^2), k = 2 two-sided, 1 one-sided",
    "bernstein": "n >= ln(k/a) (2 sigma^2 + 2 L d / 3) / d^2, k = 2 two-sided, 1 one-sided",
    "t": "smallest n with n >= (t_{q, n-1} s / d)^2, q = 1 - a/2 two-sided, 1 - a one-sided (iterated)",
    "betting": "smallest n whose simulated betting half-width (90% of surveys, sd = sd or range/2) is <= d",
}

#: How a bound is named in a sentence.
BOUND_NAMES = {
    "chebyshev": "Chebyshev's inequality",
    "cantelli": "Cantelli's inequality",
    "hoeffding": "Hoeffding's inequality",
    "bernstein": "Bernstein's inequality",
    "t": "the Student t approximation",
    "betting": "the betting interval (sized by simulation)",
}

range_ = builtins.range  # several functions take a keyword argument called ``range``


# --------------------------------------------------------------------------- checks
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


def smallest_n(bound: str, sides: str, d: float, a: float, *, sigma: float | None, range: float | None,
               sd: float | None) -> tuple[int | None, float, str]:
    """The smallest ``n`` whose error probability for ``d`` is at most ``a``: ``(n, closed form, rule)``.

    ``n`` is None when the closed form asks for more than 10^12 samples.

    Checked inputs (see :func:`~geosample.stats.sizing.sample_size` for the checks); the
    closed form gives the start, then :func:`error_probability`'s formula decides.
    """
    x, formula = _closed_form(bound, sides, d, a, sigma, range, sd)
    if x > 1e12:
        return None, x, formula
    n0 = _tol_ceil(x)
    if bound == "t":
        n0 = _t_iterate(n0, _q(a, sides), sd, d)

    def err(m: int) -> float:
        return _err(bound, sides, [1.0], [m], d, [sigma], [range], [sd])

    return _smallest_n(err, n0, 2 if bound == "t" else 1, a), x, formula


# --------------------------------------------------------------------------- strata
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


def _strat_inputs(weights, range_v, sd, bound, sides, nm, labels=None, require=True):
    bound, sides = _check_bound_sides(bound, sides, nm)
    w = _weights(weights, nm)
    k = len(w)
    labels = labels or [f"stratum {h + 1}" for h in range_(k)]
    L = _per(range_v, k, "range", nm, "the largest possible difference between two measurements")
    s = _per(sd, k, "sd", nm, "a standard deviation")
    sig = _scales(bound, L, s, nm, labels) if require else [_sigma(Lh, sh) for Lh, sh in zip(L, s)]
    return bound, sides, w, L, s, sig


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
