"""Allocation of samples over strata: shares, whole numbers, and the smallest total that keeps a guarantee.

``proportional``, ``equal``, ``neyman`` and ``optimal`` (cost) allocation (Cochran,
Sampling Techniques, 3rd ed. 1977, ch. 5); whole numbers by largest remainder with a
minimum per stratum; :func:`allocate` finds the smallest total whose rounded
allocation meets the bound's guarantee for the stratified mean
(:func:`geosample.stats.bounds.stratified_error_bound`).
"""
from __future__ import annotations

import builtins
import math
from typing import Any, Mapping, Sequence

from ..errors import InfeasibleError, SettingError
from ..model import Allocation
from ._checks import (PLAN_NAMES, _REL, _check_choice, _check_confidence, _check_n, _check_positive, _meets,
                      _names, _num, _pct, _per, _weights)
from .bounds import STATISTICS, _err, _hw, _sigma, _sigma_note, _strat_inputs

__all__ = ["ALLOCATION_METHODS", "allocate", "shares", "largest_remainder"]

ALLOCATION_METHODS = ("proportional", "equal", "neyman", "optimal")

range_ = builtins.range  # several functions take a keyword argument called ``range``


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
        notes.append("betting: the total over strata uses Hoeffding's form; the field days are sized by simulating "
                     "the betting interval (the promise on the days says what it rests on)")
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
