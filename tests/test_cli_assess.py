"""`geosample assess OUT RESULTS.csv` end to end on a synthetic design folder (geosample/cli/assess.py,
geosample/export/assessment.py)."""
from __future__ import annotations

import hashlib
import json
import re
import sys
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))

from test_results import all_primaries, fill, write_csv, write_design_folder  # noqa: E402

from geosample.cli import main  # noqa: E402
from geosample.export.assessment import toml_dumps  # noqa: E402

# "never 'there is a 95% probability that the mean is below the criterion'" (the wording rule);
# these patterns catch that claim and its usual variants
FORBIDDEN = [
    re.compile(r"probability (that )?the (true )?(geometric )?mean", re.I),
    re.compile(r"\d+(\.\d+)?\s*% (probability|chance|likel)", re.I),
    re.compile(r"chance (that )?the (true )?(geometric )?mean", re.I),
    re.compile(r"the (true )?(geometric )?mean is (probably|likely)", re.I),
]


def test_forbidden_patterns_catch_the_forbidden_claim():
    bad = ["there is a 95% probability that the mean is below the criterion",
           "a 95% chance the mean is below 126", "the true mean is probably below the criterion"]
    for text in bad:
        assert any(p.search(text) for p in FORBIDDEN), text


def folder_digest(folder: Path, skip: tuple[str, ...] = ()) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())
            if p.is_file() and p.name not in skip}


@pytest.fixture
def design(tmp_path):
    folder = tmp_path / "design"
    manifest, rows = write_design_folder(folder, travel={"North basin": 10, "South basin": 20, "Reed bay": 35})
    return folder, manifest, rows


def run(args, capsys):
    code = main(args)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_assess_prints_statement_and_writes_the_html(design, tmp_path, capsys):
    folder, manifest, rows = design
    before = folder_digest(folder)
    res = write_csv(tmp_path / "results.csv", fill(rows, all_primaries(rows)))
    code, out, err = run(["assess", str(folder), str(res)], capsys)
    assert code == 0, err
    assert "at the 95% confidence level: the procedure used gives an interval that contains the true mean" in out
    for name in ("North basin", "South basin", "Reed bay"):
        assert name in out
    assert (folder / "assessment.html").is_file()
    assert folder_digest(folder, skip=("assessment.html",)) == before  # nothing else in the folder changed
    html = (folder / "assessment.html").read_text()
    assert "results.csv" in html and "Reed bay" in html


def test_json_has_the_contract_keys(design, tmp_path, capsys):
    folder, manifest, rows = design
    res = write_csv(tmp_path / "results.csv", fill(rows, all_primaries(rows)))
    code, out, err = run(["assess", str(folder), str(res), "--json"], capsys)
    assert code == 0, err
    data = json.loads(out)
    for key in ("estimate", "low", "high", "confidence", "bound", "n", "decision", "statement", "strata",
                "next_allocation", "flags"):
        assert key in data
    assert data["n"] == 13 and len(data["strata"]) == 3
    assert data["low"] <= data["estimate"] <= data["high"]


def test_html_escapes_user_text(tmp_path, capsys):
    folder = tmp_path / "design"
    manifest, rows = write_design_folder(folder)
    manifest["settings"]["survey"]["title"] = "<script>alert(1)</script> Lake"
    (folder / "manifest.json").write_text(json.dumps(manifest))
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    assert run(["assess", str(folder), str(res)], capsys)[0] == 0
    html = (folder / "assessment.html").read_text()
    assert "<script>alert(1)</script>" not in html and "&lt;script&gt;" in html


def test_rerun_replaces_the_html(design, tmp_path, capsys):
    folder, manifest, rows = design
    first = write_csv(tmp_path / "day1.csv", fill(rows, all_primaries(rows)))
    second = write_csv(tmp_path / "day2.csv", fill(rows, all_primaries(rows, {"NB-001": "41"})))
    assert run(["assess", str(folder), str(first)], capsys)[0] == 0
    assert run(["assess", str(folder), str(second)], capsys)[0] == 0
    assert "day2.csv" in (folder / "assessment.html").read_text()
    assert not [p for p in folder.iterdir() if p.name.endswith(".tmp")]


# --------------------------------------------------------------------------- bad files: exit 2, folder unchanged
def _bad_nonnumeric(rows, tmp):
    return write_csv(tmp / "r.csv", fill(rows, all_primaries(rows, {"NB-004": "lots"}))), ["row 5"]


def _bad_unknown(rows, tmp):
    filled = fill(rows, all_primaries(rows))
    filled[3]["site_id"] = "NB-404"
    return write_csv(tmp / "r.csv", filled), ["row 5", "NB-404"]


def _bad_duplicate(rows, tmp):
    filled = fill(rows, all_primaries(rows))
    filled[2]["site_id"] = "NB-001"
    return write_csv(tmp / "r.csv", filled), ["row 4", "first at row 2"]


def _bad_empty(rows, tmp):
    p = tmp / "r.csv"
    p.write_bytes(b"")
    return p, ["empty"]


def _bad_encoding(rows, tmp):
    p = tmp / "r.csv"
    p.write_bytes("site_id,result\nNB-001,12\n".encode("utf-16"))
    return p, ["NUL bytes", "CSV UTF-8"]


def _bad_semicolons(rows, tmp):
    # semicolons with decimal commas are read; a value that is still not a number is reported by row
    return write_csv(tmp / "r.csv", fill(rows, all_primaries(rows, {"NB-002": "12,5", "SB-002": "1,2,3"})),
                     delimiter=";"), ["row 12", "'1,2,3'"]


def _bad_no_numbers(rows, tmp):
    return write_csv(tmp / "r.csv", fill(rows, {"NB-001": "ND", "NB-002": ""})), ["no numeric result", "1 nd"]


@pytest.mark.parametrize("make", [_bad_nonnumeric, _bad_unknown, _bad_duplicate, _bad_empty, _bad_encoding,
                                  _bad_semicolons, _bad_no_numbers])
def test_bad_results_exit_2_with_rows_and_change_nothing(make, design, tmp_path, capsys):
    folder, manifest, rows = design
    before = folder_digest(folder)
    path, expected = make(rows, tmp_path)
    plan = tmp_path / "next.toml"
    code, out, err = run(["assess", str(folder), str(path), "--next-plan", str(plan)], capsys)
    assert code == 2
    for text in expected:
        assert text in err
    assert folder_digest(folder) == before
    assert not plan.exists()


def test_semicolon_file_is_read(design, tmp_path, capsys):
    folder, manifest, rows = design
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows, {"NB-001": "40,5"})), delimiter=";")
    code, out, err = run(["assess", str(folder), str(res), "--json"], capsys)
    assert code == 0, err
    assert json.loads(out)["strata"][0]["mean"] == pytest.approx((40.5 + 55 + 62 + 38 + 71 + 49) / 6)


def test_lenient_flags_instead_of_stopping(design, tmp_path, capsys):
    folder, manifest, rows = design
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows, {"NB-004": "lots"})))
    code, out, err = run(["assess", str(folder), str(res), "--lenient", "--json"], capsys)
    assert code == 0, err
    flags = {f["kind"]: f["rows"] for f in json.loads(out)["flags"]}
    assert flags["unreadable_result"] == [5]


def test_missing_design_folder_exits_2(tmp_path, capsys):
    res = tmp_path / "r.csv"
    res.write_text("site_id,result\nX,1\n")
    code, out, err = run(["assess", str(tmp_path / "nowhere"), str(res)], capsys)
    assert code == 2 and "does not exist" in err


# --------------------------------------------------------------------------- adjustment
def test_adjust_option_changes_the_adjustment_and_lists_every_stratum(design, tmp_path, capsys):
    from statsmodels.stats.multitest import multipletests  # reference library

    folder, manifest, rows = design
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    out = {}
    for method in ("holm", "bh", "none"):
        code, text, err = run(["assess", str(folder), str(res), "--json", "--adjust", method], capsys)
        assert code == 0, err
        out[method] = json.loads(text)
    raw = [s["p_value"] for s in out["none"]["strata"]]
    assert [s["p_adjusted"] for s in out["none"]["strata"]] == raw
    assert [s["p_adjusted"] for s in out["holm"]["strata"]] == pytest.approx(list(multipletests(raw,
                                                                                               method="holm")[1]))
    assert [s["p_adjusted"] for s in out["bh"]["strata"]] == pytest.approx(list(multipletests(raw,
                                                                                             method="fdr_bh")[1]))
    assert all(len(d["strata"]) == 3 for d in out.values())


def test_cli_choices_come_from_the_library():
    from geosample.cli.assess import ADJUST_CHOICES
    from geosample.stats.decisions import ADJUST_METHODS

    assert tuple(ADJUST_CHOICES) == tuple(ADJUST_METHODS)


# --------------------------------------------------------------------------- wording in every output
SCENARIOS = {
    "below, chebyshev": dict(range=200, criterion=500),
    "above, hoeffding": dict(range=200, criterion=10, bound="hoeffding"),
    "not established, t": dict(range=400, criterion=70, bound="t", extra_size="sd = 30"),
    "one-sided cantelli": dict(range=200, criterion=126, bound="cantelli", sides="one"),
    "betting": dict(range=200, criterion=126, bound="betting"),
    "geomean": dict(statistic="geomean", range=3, tolerance=0.3, criterion=126, bound="hoeffding"),
    "no criterion": dict(range=200, criterion='"x"'),
}


@pytest.mark.parametrize("name", list(SCENARIOS))
def test_forbidden_phrasing_never_appears(name, tmp_path, capsys):
    kw = dict(SCENARIOS[name])
    drop_criterion = kw.get("criterion") == '"x"'
    if drop_criterion:
        kw["criterion"] = 126
    folder = tmp_path / "design"
    manifest, rows = write_design_folder(folder, **kw)
    if drop_criterion:
        manifest["settings"]["survey"]["criterion"] = None
        (folder / "manifest.json").write_text(json.dumps(manifest))
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows, {"NB-001": "<10", "SB-001": "ND"})))
    texts = []
    for extra in ([], ["--json"]):
        code, out, err = run(["assess", str(folder), str(res), *extra], capsys)
        assert code == 0, err
        texts += [out, err]
    texts.append((folder / "assessment.html").read_text())
    joined = "\n".join(texts)
    assert "confidence level" in joined
    for pat in FORBIDDEN:
        assert not pat.search(joined), f"{name}: forbidden phrasing {pat.pattern!r}"


def test_decision_wording_below(tmp_path, capsys):
    folder = tmp_path / "design"
    # 65 primaries on 10 field days: Hoeffding counts the 10 days (half-width 100 sqrt(ln(40) / 20) = 43)
    manifest, rows = write_design_folder(folder, n=(30, 20, 15), range=100, criterion=126, bound="hoeffding")
    vals = {r["site_id"]: "10" if i % 2 else "20" for i, r in enumerate(rows) if r["role"] == "primary"}
    res = write_csv(tmp_path / "r.csv", fill(rows, vals))
    code, out, err = run(["assess", str(folder), str(res), "--json"], capsys)
    data = json.loads(out)
    assert data["decision"] == "below"
    assert data["decision_statement"] == ("The whole interval lies below the criterion 126, so the mean is below the "
                                          "criterion at the 95% confidence level.")


# --------------------------------------------------------------------------- next plan
def test_next_plan_round_trips_and_validates(design, tmp_path, capsys):
    pytest.importorskip("geosample.stats.sizing")
    from geosample.plan import load_plan

    folder, manifest, rows = design
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    plans = tmp_path / "plans"
    plans.mkdir()
    nxt = plans / "next season.toml"
    code, out, err = run(["assess", str(folder), str(res), "--next-plan", str(nxt)], capsys)
    assert code == 0, err
    data = tomllib.loads(nxt.read_text())
    assert "seed" not in data["draw"] and "seed_text" not in data["draw"]
    assert data["time"]["start"].isoformat() == "2028-06-01"
    per = data["size"]["strata"]
    assert set(per) == {"North basin", "South basin", "Reed bay"}
    assert per["North basin"]["sd"] == pytest.approx(12.79, abs=0.01)  # sd of 40, 55, 62, 38, 71, 49
    # travel minutes from the itinerary plus minutes_on_site (15) are the costs
    assert per["Reed bay"]["cost"] == pytest.approx(35 + 15)
    assert data["size"]["allocation"] == "optimal"
    # paths now relative to the new plan file: design/../layers seen from plans/
    assert data["area"]["water"] == "../layers/mirrow.geojson"
    plan = load_plan(nxt)  # the project's own validation accepts it
    assert plan.settings["draw"]["seed"] is None
    # no field day has two results of one stratum here, so the within-day sd is not shown: no components written
    assert "sd_within_day" not in data["size"] and "sd_between_days" not in data["size"]
    # refuses to overwrite; --overwrite replaces
    code, out, err = run(["assess", str(folder), str(res), "--next-plan", str(nxt)], capsys)
    assert code == 2 and "--overwrite" in err
    code, out, err = run(["assess", str(folder), str(res), "--next-plan", str(nxt), "--overwrite"], capsys)
    assert code == 0, err


def test_next_plan_refusal_happens_before_any_work(design, tmp_path, capsys):
    folder, manifest, rows = design
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    nxt = tmp_path / "next.toml"
    nxt.write_text("# mine\n")
    code, out, err = run(["assess", str(folder), str(res), "--next-plan", str(nxt)], capsys)
    assert code == 2 and nxt.read_text() == "# mine\n"
    assert not (folder / "assessment.html").exists()


# --------------------------------------------------------------------------- TOML emitter
_scalars = st.one_of(st.text(max_size=30), st.integers(-10**12, 10**12), st.booleans(),
                     st.floats(allow_nan=False, allow_infinity=False), st.dates())


@settings(max_examples=150, deadline=None)
@given(st.dictionaries(st.text(min_size=1, max_size=10), st.dictionaries(
    st.text(min_size=1, max_size=10), st.one_of(_scalars, st.lists(st.integers(0, 99), max_size=4),
                                                st.dictionaries(st.text(min_size=1, max_size=8), _scalars,
                                                                max_size=3)),
    max_size=4), max_size=3))
def test_toml_emitter_round_trips_with_tomllib(data):
    # tomllib (standard library, TOML 1.0) as the reference reader
    assert tomllib.loads(toml_dumps(data)) == _normalise(data)


def _normalise(d):
    """What TOML keeps of ``d``: empty sub-tables of a table with other content still appear."""
    return {k: (_normalise(v) if isinstance(v, dict) else v) for k, v in d.items()}


def test_toml_string_escaping():
    text = toml_dumps({"survey": {"title": 'Lake "Mirrow"\\ north\n\ttab \x01 é'}})
    assert tomllib.loads(text)["survey"]["title"] == 'Lake "Mirrow"\\ north\n\ttab \x01 é'


def test_tomli_w_is_not_a_dependency():
    pyproject = (Path(__file__).parents[1] / "pyproject.toml").read_text()
    assert "tomli_w" not in pyproject and "tomli-w" not in pyproject


def test_toml_key_with_a_trailing_newline_is_quoted():
    # found by hypothesis: a regex '$' also matches before a final newline
    assert tomllib.loads(toml_dumps({"0\n": {"k\n": 1}})) == {"0\n": {"k\n": 1}}


def test_next_plan_carries_the_observed_variance_components(tmp_path, capsys):
    from geosample.plan import load_plan

    folder = tmp_path / "design"
    manifest, rows = write_design_folder(folder, n=(30, 20, 15), range=200, criterion=126, bound="t",
                                         extra_size="sd = 30")
    res = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    nxt = tmp_path / "next.toml"
    code, out, err = run(["assess", str(folder), str(res), "--json", "--next-plan", str(nxt)], capsys)
    assert code == 0, err
    comp = json.loads(out)["variance_components"]
    data = tomllib.loads(nxt.read_text(encoding="utf-8"))
    assert data["size"]["sd_within_day"] == pytest.approx(comp["sd_within_day"], rel=1e-3)
    assert data["size"]["sd_between_days"] == pytest.approx(comp["sd_between_days"], rel=1e-3, abs=1e-9)
    assert load_plan(nxt).settings["size"]["sd_within_day"] > 0
