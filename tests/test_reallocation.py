"""The next round's allocation (geosample/stats/reallocation.py), through ``assess``.

External checks: Cochran 1977 ch. 5 worked exercise (../shared/CHECKS.md) for Neyman and
cost-optimal allocation, and the Chebyshev guarantee by hand.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from geosample.stats.assessment import assess

sys.path.insert(0, str(Path(__file__).parent))

from fixtures_assess import fake_manifest, fake_results  # noqa: E402


# --------------------------------------------------------------------------- reallocation
def _with_sd(sd: float, n: int = 10, centre: float = 100.0) -> list[float]:
    z = np.linspace(-1, 1, n)
    z = (z - z.mean()) / z.std(ddof=1)
    return list(centre + sd * z)


def _cochran_manifest(bound: str, **kw) -> dict:
    m = fake_manifest(strata=(("Deep", 1 / 6), ("Shallow", 5 / 6)), range=200, bound=bound,
                      extra_size="sd = 10" if bound == "t" else "", **kw)
    m["settings"]["size"]["tolerance"] = None
    m["settings"]["size"]["n"] = 100
    return m


@pytest.mark.parametrize("bound", ["t", "chebyshev", "hoeffding"])
def test_neyman_reallocation_from_observed_sds(bound):
    # Cochran 1977 ch. 5 worked exercise (CHECKS.md): N = (100000, 500000), sd = (20, 12), n = 100 -> (25, 75)
    pytest.importorskip("geosample.stats.sizing")
    res = fake_results({"Deep": _with_sd(20), "Shallow": _with_sd(12)})
    a = assess(res, _cochran_manifest(bound))
    r = a.next_allocation
    assert r.method == "neyman" and r.sd == pytest.approx((20, 12))
    assert r.n == (25, 75) and r.total == 100


def test_cost_optimal_reallocation_from_travel_minutes():
    # CHECKS.md: costs (4, 1) -> (14.29, 85.71) -> integers (14, 86) by largest remainder
    pytest.importorskip("geosample.stats.sizing")
    m = _cochran_manifest("t")
    m["itinerary"] = {"travel_minutes_per_site": {"Deep": 4.0, "Shallow": 1.0}}
    m["settings"]["time"]["minutes_on_site"] = 0
    a = assess(fake_results({"Deep": _with_sd(20), "Shallow": _with_sd(12)}), m)
    r = a.next_allocation
    assert r.method == "optimal" and r.cost == (4.0, 1.0)
    assert r.n == (14, 86)


def test_range_bound_total_meets_the_tolerance_by_the_declared_range():
    pytest.importorskip("geosample.stats.sizing")
    vals = {"North basin": _with_sd(30, 8), "South basin": _with_sd(10, 6), "Reed bay": _with_sd(5, 4)}
    a = assess(fake_results(vals), fake_manifest(range=200, tolerance=25, bound="chebyshev"))
    r = a.next_allocation
    w = np.array([0.5, 0.3, 0.2])
    # Chebyshev guarantee by hand (Cochran ch. 5 with sigma_h = L/2): V <= a d^2 at the suggested n_h
    V = float(np.sum(w**2 * 100.0**2 / np.array(r.n)))
    assert V <= 0.05 * 25**2
    # the shares follow the observed sds (Neyman: W_h s_h), not the common range
    share = w * np.array([30, 10, 5]) / np.sum(w * np.array([30, 10, 5]))
    assert np.allclose(np.array(r.n) / r.total, share, atol=0.02 + 2 / r.total)
    assert any("declared range" in n for n in r.notes)
