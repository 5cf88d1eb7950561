"""The design pipeline's seeds and its pieces (geosample/design.py, geosample/rng.py)."""
from __future__ import annotations

import datetime as dt
import hashlib
import json

import numpy as np
import pytest

from geosample.cli import main
from geosample.design import resolve_seed
from geosample.rng import seed_from_text, stream
from geosample.workflow import copy_demo


def test_seed_text_is_the_sha256_of_the_announced_text():
    text = "Quillmere 2027 draw, announced at the May board meeting"
    expected = int(hashlib.sha256(text.encode("utf-8")).hexdigest(), 16)  # hashlib as the reference
    assert seed_from_text(text) == expected
    assert resolve_seed({"draw": {"seed": None, "seed_text": text}}) == (expected, "text")


def test_plan_seed_wins_and_no_seed_draws_a_fresh_one():
    assert resolve_seed({"draw": {"seed": 12, "seed_text": None}}) == (12, "plan")
    a, src = resolve_seed({"draw": {"seed": None, "seed_text": None}})
    b, _ = resolve_seed({"draw": {"seed": None, "seed_text": None}})
    assert src == "os" and a != b and 0 <= a < 2**63  # fits a TOML integer


def test_named_streams_are_independent_of_other_names():
    a = stream(5, "space/North").random(4)
    assert np.array_equal(a, stream(5, "space/North").random(4))
    assert not np.array_equal(a, stream(5, "space/South").random(4))
    assert not np.array_equal(a, stream(6, "space/North").random(4))


@pytest.fixture
def demo_plan(tmp_path):
    return copy_demo(tmp_path / "in")


def _edit(plan, old, new):
    text = plan.read_text()
    assert old in text
    plan.write_text(text.replace(old, new))


def test_without_a_seed_the_drawn_seed_is_recorded_and_verifies(demo_plan, tmp_path):
    _edit(demo_plan, "seed = 20270601", "")
    out = tmp_path / "design"
    assert main(["plan", str(demo_plan), "-o", str(out), "-q"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["seed_source"] == "os"
    assert int(manifest["seed"]) == manifest["settings"]["draw"]["seed"]
    assert main(["verify", str(out)]) == 0
    record = (demo_plan.parent / "plan.toml.draws.csv").read_text()
    assert manifest["seed"] in record


def test_seed_text_design_records_its_source_and_verifies(demo_plan, tmp_path):
    _edit(demo_plan, "seed = 20270601", 'seed_text = "announced before the draw"')
    out = tmp_path / "design"
    assert main(["plan", str(demo_plan), "-o", str(out), "-q"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["seed_source"] == "text"
    assert int(manifest["seed"]) == seed_from_text("announced before the draw")
    assert main(["verify", str(out)]) == 0


def test_changing_one_stratum_leaves_the_other_strata_sites(demo_plan, tmp_path):
    # Spacing across strata couples strata drawn later to earlier ones, so compare without spacing.
    _edit(demo_plan, "spacing_m = 100", "")
    a, b = tmp_path / "a", tmp_path / "b"
    assert main(["plan", str(demo_plan), "-o", str(a), "-q"]) == 0
    _edit(demo_plan, "[size]", "[size.strata.'Alder Bay']\nsd = 5\n\n[size]")
    assert main(["plan", str(demo_plan), "-o", str(b), "-q"]) == 0

    def sites(folder):
        rows = [line.split(",") for line in (folder / "schedule.csv").read_text().splitlines()[1:]]
        return {r[0]: (r[10], r[11]) for r in rows}

    sa, sb = sites(a), sites(b)
    for sid in sa:
        if not sid.startswith("AB-") and sid in sb:
            assert sa[sid] == sb[sid], sid


def test_field_days_budget_puts_the_visits_on_that_many_random_days(demo_plan, tmp_path):
    _edit(demo_plan, "field_days = 16", "field_days = 14")
    out = tmp_path / "design"
    assert main(["plan", str(demo_plan), "-o", str(out), "-q"]) == 0
    rows = [line.split(",") for line in (out / "schedule.csv").read_text().splitlines()[1:]]
    dates = [r[4] for r in rows if r[2] == "primary"]
    counts = {d: dates.count(d) for d in set(dates)}
    # exactly 14 days, one in each of the season's 14 ISO weeks (2027-W22 .. W35), visits as even as possible
    assert len(counts) == 14 and max(counts.values()) - min(counts.values()) <= 1
    assert len({dt.date.fromisoformat(d).isocalendar()[:2] for d in counts}) == 14
    manifest = json.loads((out / "manifest.json").read_text())
    drawn = [d for d in manifest["days"]["days"] if d["drawn"]]
    assert sorted(d["date"] for d in drawn) == sorted(counts)
    assert main(["verify", str(out)]) == 0


def test_field_days_fewer_than_the_temporal_strata_is_refused(demo_plan, tmp_path, capsys):
    # 12 days cannot cover 14 weekly strata: days of the two weeks left out would have inclusion probability 0.
    _edit(demo_plan, "field_days = 16", "field_days = 12")
    assert main(["plan", str(demo_plan), "-o", str(tmp_path / "d")]) == 2
    err = capsys.readouterr().err
    assert "time.field_days = 12" in err and "14 temporal strata" in err and 'time.temporal = "month"' in err
    _edit(demo_plan, "[time]", '[time]\ntemporal = "month"')
    assert main(["plan", str(demo_plan), "-o", str(tmp_path / "m"), "-q"]) == 0


def test_field_days_too_few_for_the_visits_is_refused_with_figures(demo_plan, tmp_path, capsys):
    _edit(demo_plan, "field_days = 16", "field_days = 3")
    assert main(["plan", str(demo_plan), "-o", str(tmp_path / "d")]) == 2
    err = capsys.readouterr().err
    assert "field_days = 3" in err and "24 visits" in err


# --------------------------------------------------------------------------- field days as the units
def _design(plan_path):
    from geosample.design import make_design
    from geosample.plan import load_plan

    return make_design(load_plan(plan_path))


def _primary_days(design):
    from collections import Counter

    return Counter(v.visit_date for v in design.schedule.visits if v.role == "primary")


def test_without_a_crew_day_budget_the_plan_draws_the_days_the_bound_needs(demo_plan):
    # CHECKS.md "Two-stage designs": a range-only bound counts days. Chebyshev, L = 80, d = 16, a = 0.10:
    # (80/2)^2 / (0.10 x 16^2) = 62.5 -> 63 field days (computed), one visit each
    _edit(demo_plan, "field_days = 16", "")
    # 1 / sum_s W_s^2 / k_s over the weekly temporal strata (W_s = K_s / K, as the assessment weights them)
    # must reach 63: a few more than 63 days are drawn because the weeks' shares are not met exactly
    from collections import Counter

    d = _design(demo_plan)
    days = _primary_days(d)
    assert 63 <= len(days) <= 66 and set(days.values()) == {1}
    allowed = Counter(day.temporal_stratum for day in d.schedule.days)
    drawn = Counter(day.temporal_stratum for day in d.schedule.days if day.date in days)
    K = sum(allowed.values())
    assert 1 / sum((allowed[s] / K) ** 2 / drawn[s] for s in allowed) >= 63 - 1e-9  # computed
    promise = d.sizing["days"]
    assert promise["days"] == len(days) and promise["error_bound"] <= 0.10 and promise["reached"]
    assert "range alone" in promise["sentence"]


def test_a_crew_day_budget_is_kept_and_the_report_states_what_its_days_give(demo_plan):
    # the demo: 63 visits on a budget of 16 crew days; Chebyshev on 16 days: 40^2 / (16 x 16^2) = 0.39
    # (CHECKS.md "Two-stage designs"), not the 0.099 of 63 independent visits
    d = _design(demo_plan)
    assert len(_primary_days(d)) == 16
    promise = d.sizing["days"]
    # the 16 days are a stratified sample over 14 weekly temporal strata of unequal size, weighted W_s = K_s/K
    # as in the assessment: Var = (L/2)^2 sum_s W_s^2 / k_s, i.e. k_eff = 1 / sum_s W_s^2 / k_s equal days
    # (Cochran 1977 ch. 5, computed here from the schedule's days); the promise uses floor(k_eff) <= 16 days
    from collections import Counter

    allowed = Counter(day.temporal_stratum for day in d.schedule.days)
    drawn = Counter(day.temporal_stratum for day in d.schedule.days if day.date in _primary_days(d))
    K = sum(allowed.values())
    k_eff = 1 / sum((allowed[s] / K) ** 2 / drawn[s] for s in allowed)
    assert k_eff <= 16
    assert abs(promise["error_bound"] - min(1.0, 40**2 / (int(k_eff + 1e-9) * 16**2))) < 1e-12
    assert promise["error_bound"] >= 40**2 / (16 * 16**2)  # never better than 16 equal days: 0.39 (CHECKS.md)
    assert not promise["reached"] and "That count does not hold" in promise["independent"]


def test_stated_components_and_costs_choose_days_and_visits_per_day(demo_plan):
    # Brus 2022 ch. 7 (CHECKS.md): m = (S_w / S_b) sqrt(c_day / c_visit) = (15 / 6) sqrt(200 / 20) = 7.9
    _edit(demo_plan, "field_days = 16", "")
    _edit(demo_plan, 'bound = "chebyshev"', 'bound = "t"\nsd_between_days = 6\nsd_within_day = 15\n'
                                            "cost_day = 200\ncost_visit = 20")
    _edit(demo_plan, "tolerance = 16", "tolerance = 5")
    _edit(demo_plan, "per_day = 8", 'per_day = 8\ntemporal = "season"')  # one temporal stratum: the Brus case
    d = _design(demo_plan)
    sized = d.sizing["days"]["sized"]
    assert sized["per_day"] in (7, 8) and abs(sized["per_day_optimum"] - 15 / 6 * 10**0.5) < 1e-12
    days = _primary_days(d)
    assert len(days) == sized["days"] and set(days.values()) == {sized["per_day"]}
    assert d.sizing["days"]["basis"] == "components" and "assumption" in d.sizing["days"]["sentence"]


def test_a_stated_sd_does_not_narrow_a_chebyshev_promise(demo_plan):
    # assess uses range/2 for Chebyshev (stats.intervals.chebyshev_half_width), so the plan promises the same
    from geosample.stats.intervals import chebyshev_half_width

    _edit(demo_plan, "range = 80", "range = 80\nsd = 20")
    d = _design(demo_plan)
    k = d.sizing["days"]["days"]
    hw = d.sizing["days"]["half_width"]
    # never narrower than range/2 on k equal days (the temporal weighting only widens it, see above) ...
    assert hw >= chebyshev_half_width([1.0], [k], [80], 0.90) - 1e-9
    # ... and nowhere near what the stated sd would have promised: 20 / sqrt(k x 0.10) (computed)
    assert hw > 1.9 * 20 / (k * 0.10) ** 0.5


def test_size_lower_is_a_plan_key(demo_plan):
    from geosample.plan import load_plan

    _edit(demo_plan, "range = 80", "range = 80\nlower = 0")
    assert load_plan(demo_plan).settings["size"]["lower"] == 0


def test_every_temporal_stratum_gets_a_field_day_and_fewer_visits_a_day_then_do(demo_plan):
    # weekly temporal strata (14 in the season) need 14 field days; with them, the t bound on the stated
    # components needs fewer visits a day than the cost optimum: the smallest m whose promise holds
    from scipy import stats

    _edit(demo_plan, "field_days = 16", "")
    _edit(demo_plan, 'bound = "chebyshev"', 'bound = "t"\nsd_between_days = 6\nsd_within_day = 15\n'
                                            "cost_day = 200\ncost_visit = 20")
    _edit(demo_plan, "tolerance = 16", "tolerance = 5")
    d = _design(demo_plan)
    m = d.sizing["days"]["sized"]["per_day"]
    # at least 14 days; one more when the weeks' unequal shares make 14 days count as fewer (see above)
    assert 14 <= len(_primary_days(d)) <= 16

    def hw(m):  # computed with scipy: t_{0.95, 13} sqrt(6^2 + 15^2 / m) / sqrt(14), confidence 0.90
        return stats.t.ppf(0.95, 13) * (36 + 225 / m) ** 0.5 / 14**0.5

    assert hw(m) <= 5 < hw(m - 1)
