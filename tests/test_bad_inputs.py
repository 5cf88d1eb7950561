"""The bad-input corpus (tests/data/bad/) and user text that must not run as code.

Each corpus case is a folder with ``expect.txt`` (fragments the message must
contain, one per line) and, for a case that is repaired rather than refused,
``exit.txt`` (the expected exit code, 0). Plan cases are run with
``geosample plan``; results cases (``results-*``) with ``geosample assess`` on
the packaged demo design, the broken results file made from its schedule.csv by
``make_bad.RESULTS_CASES``. A refused case must exit 2 with the fragments in the
message, print no traceback and leave no output folder (nor a hidden
``.OUT.*.partial`` beside it); ``assess`` must leave the design's files as they were.

Escaping: HTML special characters in user text are escaped (HTML5 spec,
"escapable raw text"/character references: common practice); a CSV text cell
starting with ``=`` gets a leading apostrophe (OWASP, "CSV Injection": common
practice).
"""
from __future__ import annotations

import csv
import hashlib
import importlib.util
import io
import shutil
from pathlib import Path

import pytest

from geosample.cli import main
from geosample.workflow import copy_demo

BAD = Path(__file__).resolve().parent / "data" / "bad"
_spec = importlib.util.spec_from_file_location("make_bad", BAD / "make_bad.py")
make_bad = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(make_bad)

PLAN_CASES = sorted(p.name for p in BAD.iterdir() if (p / "plan.toml").exists())
RESULT_CASES = sorted(make_bad.RESULTS_CASES)


def _expect(case: str) -> tuple[list[str], int]:
    folder = BAD / case
    lines = [ln for ln in (folder / "expect.txt").read_text(encoding="utf-8").splitlines() if ln.strip()]
    code = int((folder / "exit.txt").read_text().strip()) if (folder / "exit.txt").exists() else 2
    return lines, code


def _run(argv: list[str], capsys) -> tuple[int, str]:
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out + captured.err


def _leftovers(parent: Path, name: str) -> list[str]:
    return sorted(p.name for p in parent.iterdir() if p.name == name or p.name.startswith(f".{name}."))


def _tree_hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_corpus_is_complete():
    # every case folder has its expectation, and the generator knows every results case
    cases = [p.name for p in BAD.iterdir() if p.is_dir() and not p.name.startswith("__")]
    assert set(cases) == set(PLAN_CASES) | set(RESULT_CASES)
    assert len(PLAN_CASES) >= 10
    assert len(cases) >= 40  # issue 11: at least 40 cases
    for case in cases:
        assert _expect(case)[0], case


def test_corpus_is_regenerated_byte_for_byte(tmp_path, monkeypatch):
    monkeypatch.setattr(make_bad, "HERE", tmp_path)
    make_bad.plan_cases()
    make_bad.results_cases()
    made = _tree_hashes(tmp_path)
    stored = {k: v for k, v in _tree_hashes(BAD).items() if k != "make_bad.py" and "__pycache__" not in k}
    assert made == stored


@pytest.mark.parametrize("case", PLAN_CASES)
def test_plan_case(case, tmp_path, capsys):
    work = tmp_path / "in"
    shutil.copytree(BAD / case, work)  # the draw record is written beside the plan: keep the corpus clean
    out_parent = tmp_path / "outs"
    out_parent.mkdir()
    out = out_parent / "OUT"
    fragments, want = _expect(case)
    code, text = _run(["plan", str(work / "plan.toml"), "-o", str(out)], capsys)
    assert code == want, text
    assert "Traceback" not in text
    for frag in fragments:
        assert frag in text, f"{case}: {frag!r} not in:\n{text}"
    if want == 2:
        assert text.count("geosample: error:") == 1
        assert _leftovers(out_parent, "OUT") == []
    else:
        assert _leftovers(out_parent, "OUT") == ["OUT"]
        assert (out / "manifest.json").exists()


def test_bowtie_repair_keeps_both_lobes(tmp_path):
    # the bow-tie's two triangles each have half the rectangle's area (geometry: common practice)
    from geosample.layers import read_layer
    import shapely

    gdf = read_layer(BAD / "bowtie" / "water.geojson")
    geom = gdf.geometry.iloc[0]
    assert geom.geom_type == "MultiPolygon" and len(geom.geoms) == 2
    box = shapely.box(*geom.bounds)
    assert geom.area == pytest.approx(box.area / 2, rel=1e-9)


# --------------------------------------------------------------------------- results cases
@pytest.fixture(scope="module")
def demo_design(tmp_path_factory):
    base = tmp_path_factory.mktemp("demo")
    plan = copy_demo(base / "inputs")
    out = base / "design"
    assert main(["plan", str(plan), "-o", str(out), "-q"]) == 0
    return out


@pytest.mark.parametrize("case", RESULT_CASES)
def test_results_case(case, demo_design, tmp_path, capsys):
    fragments, want = _expect(case)
    schedule = (demo_design / "schedule.csv").read_text(encoding="utf-8")
    results = tmp_path / "results.csv"
    results.write_bytes(make_bad.RESULTS_CASES[case](schedule))
    html = demo_design / "assessment.html"
    if html.exists():
        html.unlink()  # assess writes (replaces) only this file
    before = _tree_hashes(demo_design)
    code, text = _run(["assess", str(demo_design), str(results)], capsys)
    assert code == want, text
    assert "Traceback" not in text
    for frag in fragments:
        assert frag in text, f"{case}: {frag!r} not in:\n{text}"
    after = _tree_hashes(demo_design)
    if want == 2:
        assert after == before
    else:
        assert after.pop("assessment.html")
        assert after == before


@pytest.mark.parametrize("where, overwrite, words", [
    ("missing/next.toml", False, "does not exist: create it first"),
    ("missing/next.toml", True, "does not exist: create it first"),
    ("a-folder", False, "is a folder"),
    ("a-folder", True, "is a folder"),  # was an IsADirectoryError after all the work
    ("results.csv", True, "not the results file being read"),
    ("DESIGN/next.toml", False, "outside the design folder"),
])
def test_next_plan_paths_are_checked_before_any_work(demo_design, tmp_path, capsys, where, overwrite, words):
    schedule = (demo_design / "schedule.csv").read_text(encoding="utf-8")
    results = tmp_path / "results.csv"
    results.write_bytes(make_bad.results_cp1252(schedule))
    (tmp_path / "a-folder").mkdir()
    (tmp_path / "a-folder" / "notes.txt").write_text("field notes", encoding="utf-8")
    html = demo_design / "assessment.html"
    if html.exists():
        html.unlink()
    before_design, before_here = _tree_hashes(demo_design), _tree_hashes(tmp_path)
    target = str(demo_design / "next.toml") if where.startswith("DESIGN/") else str(tmp_path / where)
    code, text = _run(["assess", str(demo_design), str(results), "--next-plan", target]
                      + (["--overwrite"] if overwrite else []), capsys)
    assert code == 2, text
    assert "Traceback" not in text and "--next-plan" in text and words in text
    assert _tree_hashes(demo_design) == before_design and _tree_hashes(tmp_path) == before_here


def test_a_results_path_that_is_a_folder_says_so(demo_design, tmp_path, capsys):
    code, text = _run(["assess", str(demo_design), str(tmp_path)], capsys)
    assert code == 2 and "is a folder, not a file" in text and "does not exist" not in text


def test_a_multi_line_note_is_not_taken_for_an_open_quote(demo_design, tmp_path):
    # a note with a line break (Alt+Enter in a spreadsheet cell) is a quoted cell over two lines: RFC 4180, 2.6
    from geosample.results import read_results

    header, rows = make_bad._filled((demo_design / "schedule.csv").read_text(encoding="utf-8"))
    rows[0]["notes"] = "Crew A, shore launch\nwind 3 Bft, waves 0.2 m"
    path = tmp_path / "r.csv"
    path.write_bytes(make_bad._csv(header, rows).encode("utf-8"))
    res = read_results(path, demo_design)
    assert dict(res.records[0].extra)["notes"] == "Crew A, shore launch\nwind 3 Bft, waves 0.2 m"


def _primary_results(schedule: str) -> list[float]:
    rows = list(csv.DictReader(io.StringIO(schedule)))
    return [r for r in rows if r["role"] == "primary"]


def test_semicolon_decimal_comma_values(demo_design, tmp_path):
    # documented in geosample.results: with semicolons "10,5" is read as 10.5
    from geosample.results import read_results

    schedule = (demo_design / "schedule.csv").read_text(encoding="utf-8")
    path = tmp_path / "r.csv"
    path.write_bytes(make_bad.results_semicolon(schedule))
    res = read_results(path, demo_design)
    assert res.delimiter == ";"
    k = len(_primary_results(schedule))
    want = sorted(10 * (i % 9 + 1) + 0.5 for i in range(k))  # what make_bad wrote, independent of the reader
    got = sorted(r.value for r in res.records if r.used)
    assert got == pytest.approx(want)


def test_cp1252_names_survive(demo_design, tmp_path):
    from geosample.results import read_results

    schedule = (demo_design / "schedule.csv").read_text(encoding="utf-8")
    path = tmp_path / "r.csv"
    path.write_bytes(make_bad.results_cp1252(schedule))
    res = read_results(path, demo_design)
    assert res.encoding == "cp1252"
    notes = {v for r in res.records for k, v in r.extra if k == "notes" and v}
    assert notes == {"Crew: Zoë Ñandú, café shore"}


def test_spreadsheet_dates_flag_every_row(demo_design, tmp_path):
    from geosample.results import read_results

    schedule = (demo_design / "schedule.csv").read_text(encoding="utf-8")
    path = tmp_path / "r.csv"
    path.write_bytes(make_bad.results_spreadsheet_dates(schedule))
    res = read_results(path, demo_design)
    flag = [f for f in res.flags if f.kind == "sampled_at_unreadable"]
    assert len(flag) == 1
    k = len(_primary_results(schedule))
    assert len(flag[0].rows) == k  # every mangled row is named
    assert all(r.sampled_at is None for r in res.records)


def test_one_zero_area_feature_is_left_out_with_a_warning(tmp_path):
    from geosample.layers import read_layer

    flat = [(0.0, 0.02), (0.01, 0.02), (0.03, 0.02), (0.0, 0.02)]
    path = tmp_path / "water.geojson"
    path.write_text(make_bad.geojson([({"name": "Pellow Tarn"}, make_bad.ring(make_bad.TARN)),
                                      ({"name": "Flat Slough"}, make_bad.ring(flat))]), encoding="utf-8")
    gdf = read_layer(path)
    assert list(gdf["name"]) == ["Pellow Tarn"]
    assert any("Flat Slough" in w and "no area" in w for w in gdf.attrs["geosample_warnings"])


# --------------------------------------------------------------------------- untrusted text
SCRIPT = "<script>window.__pwn=1</script>"
FORMULA = '=HYPERLINK("http://x")'
IMG = '<img src=x onerror="window.__pwn=2">'  # runs even when inserted with innerHTML (popups), unlike <script>


@pytest.fixture(scope="module")
def untrusted_design(tmp_path_factory):
    """A plan whose title and stratum names are markup and a spreadsheet formula, run through ``plan``."""
    base = tmp_path_factory.mktemp("untrusted")
    west = [(-0.01, -0.01), (0.015, -0.01), (0.015, 0.02), (-0.01, 0.02), (-0.01, -0.01)]  # reach onto land
    east = [(0.015, -0.01), (0.04, -0.01), (0.04, 0.02), (0.015, 0.02), (0.015, -0.01)]
    (base / "water.geojson").write_text(make_bad.tarn_layer(), encoding="utf-8")
    (base / "zones.geojson").write_text(make_bad.geojson([({"zone": SCRIPT}, make_bad.ring(west)),
                                                          ({"zone": FORMULA}, make_bad.ring(east))]),
                                        encoding="utf-8")
    title = f"'Pellow Tarn {SCRIPT} {IMG} {FORMULA}'"  # a TOML literal string
    plan = make_bad.plan_text("untrusted", title=title,
                              area_extra='strata = "zones.geojson"\nstrata_field = "zone"\n')
    (base / "plan.toml").write_text(plan, encoding="utf-8")
    out = base / "OUT"
    assert main(["plan", str(base / "plan.toml"), "-o", str(out), "-q"]) == 0
    return out


@pytest.mark.parametrize("name", ["report.html", "map.html"])
def test_user_text_is_escaped_in_html(untrusted_design, name):
    text = (untrusted_design / name).read_text(encoding="utf-8")
    assert "<script>window.__pwn" not in text
    assert "<img src=x" not in text
    assert "window.__pwn" in text  # the name is shown, escaped, not dropped
    if name == "report.html":
        assert "&lt;script&gt;window.__pwn=1&lt;/script&gt;" in text


def test_formula_stratum_is_neutralised_in_csv(untrusted_design):
    rows = list(csv.reader(io.StringIO((untrusted_design / "schedule.csv").read_text(encoding="utf-8"))))
    strata = {r[1] for r in rows[1:]}
    assert strata == {SCRIPT, "'" + FORMULA}


@pytest.mark.browser
@pytest.mark.parametrize("name", ["report.html", "map.html"])
def test_browser_runs_no_user_script(untrusted_design, name):
    from test_map_browser import ARGS, CHROMIUM

    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing (the CI script installs the Debian chromium package)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError as exc:  # pragma: no cover - depends on the machine
        pytest.skip(f"playwright cannot be imported: {exc}")
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        try:
            page = browser.new_page()
            page.goto((untrusted_design / name).as_uri())
            page.wait_for_load_state("load")
            if name == "map.html":
                page.wait_for_function("window.geosampleMap !== undefined")
                # Tap the first site (canvas markers: by its pixel) to open a popup holding the stratum name.
                site = page.evaluate("window.geosampleMap.design.sites[0]")
                xy = page.evaluate("([a, b]) => window.geosampleMap.point(a, b)", [site["lat"], site["lon"]])
                page.mouse.click(*xy)
                page.locator(".leaflet-popup-content").wait_for()
                assert site["stratum"] in page.locator(".leaflet-popup-content").inner_text()
                assert site["stratum"] in (SCRIPT, FORMULA)
            assert page.evaluate("typeof window.__pwn") == "undefined"
            assert "window.__pwn" in page.inner_text("body")
        finally:
            browser.close()
