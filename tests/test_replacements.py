"""Which reserve replaced which primary, and why (geosample/replacements.py, through results.read_results).

The rule checked is the design's own reserve rule (DESIGN.md; report.html "A result must not say"): a
primary that could not be sampled is replaced by the next reserve of the same stratum, in rank order, each
reserve once; a skipped reserve must have been attempted (a reason recorded). Synthetic design folders come
from tests/test_results.py.
"""
from __future__ import annotations

import pytest

from geosample.results import read_results
from test_results import SCHEDULE_COLUMNS, all_primaries, fill, write_csv, write_design_folder


@pytest.fixture
def design(tmp_path):
    manifest, rows = write_design_folder(tmp_path / "design")
    return manifest, rows


def _read(tmp_path, manifest, rows, vals, extra=None):
    path = write_csv(tmp_path / "r.csv", fill(rows, vals, extra=extra), columns=SCHEDULE_COLUMNS)
    return read_results(path, manifest, rows)


def test_recorded_substitutions_are_listed_with_their_reasons(design, tmp_path):
    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": "", "SB-002": "", "NB-007": "58", "SB-005": "91"})
    extra = {"NB-003": {"replaced_by": "NB-007", "replacement_reason": "too shallow (0.4 m)"},
             "SB-002": {"replaced_by": "SB-005", "replacement_reason": "closed: regatta"}}
    res = _read(tmp_path, manifest, rows, vals, extra)
    subs = {s.primary: s for s in res.substitutions}
    assert set(subs) == {"NB-003", "SB-002"}
    assert (subs["NB-003"].reserve, subs["NB-003"].reason, subs["NB-003"].recorded) == (
        "NB-007", "too shallow (0.4 m)", True)
    assert subs["SB-002"].reserve == "SB-005" and subs["SB-002"].in_order and subs["SB-002"].reserve_rank == 1
    # NB-003 is row 4, NB-007 row 8 (header = row 1)
    assert subs["NB-003"].rows == (4, 8)
    info = next(f for f in res.flags if f.kind == "replacements")
    assert info.severity == "info" and "NB-003 by NB-007 (too shallow (0.4 m))" in info.message
    assert not [f for f in res.flags if f.kind.startswith("replacement_") or f.kind == "reserve_out_of_order"]


def test_inferred_substitution_without_reason_is_flagged(design, tmp_path):
    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": "", "NB-007": "58"})
    res = _read(tmp_path, manifest, rows, vals)
    (s,) = res.substitutions
    assert (s.primary, s.reserve, s.recorded, s.reason) == ("NB-003", "NB-007", False, "")
    flag = next(f for f in res.flags if f.kind == "replacement_reason_missing")
    assert flag.rows == (4,) and "NB-003 by NB-007" in flag.message


def test_reason_from_the_primarys_qualifier(design, tmp_path):
    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": ("", "no access: ice"), "NB-007": "58"})
    res = _read(tmp_path, manifest, rows, vals)
    assert res.substitutions[0].reason == "no access: ice"
    assert not [f for f in res.flags if f.kind == "replacement_reason_missing"]


def test_out_of_order_use_is_marked(design, tmp_path):
    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": "", "NB-008": "58"})  # rank 2 used, rank 1 neither used nor attempted
    extra = {"NB-003": {"replaced_by": "NB-008", "replacement_reason": "storm"}}
    res = _read(tmp_path, manifest, rows, vals, extra)
    (s,) = res.substitutions
    assert s.reserve == "NB-008" and not s.in_order
    assert any(f.kind == "reserve_out_of_order" for f in res.flags)


@pytest.mark.parametrize("named, problem", [
    ("SB-005", "another stratum"),     # a reserve of South basin for a North basin primary
    ("NB-002", "a primary site"),      # not a reserve
    ("XX-001", "not a site"),
])
def test_invalid_replaced_by_is_flagged(design, tmp_path, named, problem):
    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": "", "NB-007": "58", "SB-005": "91"})
    res = _read(tmp_path, manifest, rows, vals, {"NB-003": {"replaced_by": named, "replacement_reason": "x"}})
    flag = next(f for f in res.flags if f.kind == "replacement_invalid")
    assert problem in flag.message and flag.rows == (4,)
    # the estimate still follows the rank rule: NB-007 is inferred as the replacement
    assert res.substitutions[0].reserve == "NB-007" and not res.substitutions[0].recorded


def test_primary_not_replaced_is_listed(design, tmp_path):
    manifest, rows = design
    vals = all_primaries(rows, {"SB-002": ("", "dry")})
    res = _read(tmp_path, manifest, rows, vals)
    (s,) = res.substitutions
    assert (s.primary, s.reserve, s.reason) == ("SB-002", "", "dry")


def test_assessment_page_and_summary_show_substitutions(design, tmp_path):
    from geosample.cli.assess import summary_text
    from geosample.export.assessment import render_assessment
    from geosample.stats.estimate import assess

    manifest, rows = design
    vals = all_primaries(rows, {"NB-003": "", "SB-002": "", "NB-007": "58", "SB-005": "91"})
    extra = {"NB-003": {"replaced_by": "NB-007", "replacement_reason": "too shallow"},
             "SB-002": {"replaced_by": "SB-005", "replacement_reason": "closed: regatta"}}
    a = assess(_read(tmp_path, manifest, rows, vals, extra), manifest)
    page = render_assessment(a, results_name="r.csv")
    assert "Substitutions" in page and "NB-007" in page and "closed: regatta" in page
    assert "No flags" not in page
    text = summary_text(a)
    assert "Substitutions (2):" in text and "SB-002 replaced by SB-005" in text and "closed: regatta" in text
    assert a.as_dict()["substitutions"][0]["primary"] == "NB-003"
