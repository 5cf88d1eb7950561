"""Sample sizes for the mean of bounded measurements: the high-level API.

:func:`sample_size` (the smallest ``n`` for a tolerance) and :func:`achieved` (what ``n``
samples buy), with their results :class:`SampleSize` and :class:`Achieved` and the
plain sentence each prints. The bounds themselves (every bound's error probability,
half-width and smallest ``n``; :data:`BOUNDS`, :data:`ASSUMPTIONS`, :data:`FORMULAS`)
are in :mod:`geosample.stats.bounds`; allocation over strata in
:mod:`geosample.stats.allocation`. Both are re-exported here so older imports keep working.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

from ..errors import InfeasibleError
from ._checks import CLI_NAMES, PLAN_NAMES, _check_choice, _check_confidence, _check_n, _check_positive, _names
from ._checks import _num, _pct
from .allocation import ALLOCATION_METHODS, allocate, largest_remainder, shares
from .bounds import (ASSUMPTIONS, BOUND_NAMES, BOUNDS, FORMULAS, SIDES, STATISTICS, _err, _hw, _sigma_note,
                     _single, error_probability, half_width, smallest_n, stratified_error_bound,
                     stratified_half_width)

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
        if self.bound == "betting":
            return (f"{self.n} samples: the betting interval (independent samples, every value inside a known range "
                    f"of length {_num(self.range)}) contains the true {'geometric ' if self.statistic == 'geomean' else ''}"
                    f"mean in at least {_pct(self.confidence)} of surveys carried out this way; its half-width was at "
                    f"most {_pm(self.half_width, self.statistic, self.sides)} in 90% of simulated surveys with sd "
                    f"{_num(self.sigma)} (the tolerance {_num(self.tolerance)} rests on that spread).")
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
        if self.bound == "betting":
            return (f"{self.n} samples: the betting interval (independent samples, every value inside a known range "
                    f"of length {_num(self.range)}) contains the true mean in at least {_pct(self.confidence)} of "
                    f"surveys; its half-width was at most {_pm(self.half_width, self.statistic, self.sides)} in 90% of "
                    f"simulated surveys with sd {_num(self.sigma)}.")
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
        return s + (f"; half-width simulated with sd {_num(r.sigma)}" if b == "betting" else "")
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
    if bound == "betting":  # no closed form: simulate the betting interval (stats.twostage)
        from .twostage import BETTING_QUANTILE, days_half_width, days_needed

        n = days_needed("betting", sides, d, 1.0 - a, range=L, sd=sig)
        hw = days_half_width("betting", sides, n, 1.0 - a, range=L, sd=sig)
        return SampleSize(
            n=n, bound=bound, sides=sides, confidence=1.0 - a, tolerance=d, range=L, sd=s, sigma=sig,
            assumption=ASSUMPTIONS[bound], error_bound=a, half_width=hw,
            formula=FORMULAS[bound] + f" -> n = {n}", statistic=statistic,
            tolerance_factor=(10.0 ** d) if statistic == "geomean" else None,
            notes=_sigma_note(L, s) + (f"betting: the interval is built at error {_num(a)} (its coverage rests on "
                                       f"the range alone); its half-width was at most {_num(hw)} in "
                                       f"{BETTING_QUANTILE:.0%} of simulated surveys with sd {_num(sig)}",))
    n, x, formula = smallest_n(bound, sides, d, a, sigma=sig, range=L, sd=s)
    if n is None:
        raise InfeasibleError(f"{nm['tolerance']} = {d!r} needs about {x:.3g} samples with the {bound} bound; "
                              f"choose a larger {nm['tolerance']} or a lower {nm['confidence']}.")
    formula += f" -> n = {n}"
    p = _err(bound, sides, [1.0], [n], d, [sig], [L], [s])
    notes = _sigma_note(L, s) if bound in ("chebyshev", "cantelli", "bernstein") else ()
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
    if bound == "betting" and n >= 2:  # simulated (stats.twostage): at most hw in 90% of surveys
        from .twostage import days_half_width

        hw = days_half_width("betting", sides, n, conf, range=L, sd=sig)
        if d is not None:
            p = (1.0 - conf) if hw <= d * (1 + 1e-9) else 1.0
    else:
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
