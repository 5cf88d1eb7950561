"""report.html for paper: the overview map, the site list and print layout (geosample/export/report.py).

The browser test lays the page out for print in Debian's chromium (playwright, print media) and checks
that no ISO date is broken across two lines, with the DOM's own Range.getClientRects (one box per line).
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from fixtures_design import SITES, build_design
from geosample.export.report import render_report, report_context

CHROMIUM = Path("/usr/bin/chromium")


def test_overview_map_draws_every_route_and_primary():
    d = build_design()
    svg = report_context(d)["overview_svg"]
    assert svg.startswith("<svg") and svg.endswith("</svg>")
    assert svg.count('stroke-linejoin="round"') == len(d.schedule.routes)  # one path per trip
    assert svg.count("<circle") == sum(1 for s in SITES if s[2] == "primary")
    assert "West launch" in svg and not re.search(r"https?://(?!www\.w3\.org/2000/svg)", svg)


def test_site_list_has_every_site_by_day_and_the_reserves_in_rank_order():
    ctx = report_context(build_design())["site_list"]
    assert [(d["day"], d["date"]) for d in ctx["days"]] == [(1, "2027-06-14"), (2, "2027-06-16")]
    assert [r["site_id"] for r in ctx["days"][0]["rows"]] == ["NB-001", "NB-002", "NB-003"]
    assert [r["label"] for r in ctx["reserves"]] == ["NB-R1", "NB-R2", "SB-R1"]
    html = render_report(build_design())
    for s in SITES:
        assert s[0] in html
    assert 'id="sites"' in html and "<svg" in html


def test_site_list_escapes_user_text():
    xss = "<script>alert(1)</script>"
    html = render_report(build_design((xss, "South basin")))
    assert xss not in html


@pytest.mark.browser
def test_no_date_breaks_across_lines_in_print(tmp_path):
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing (the CI script installs the Debian chromium package)")
    playwright = pytest.importorskip("playwright.sync_api")
    page_file = tmp_path / "report.html"
    page_file.write_text(render_report(build_design()), encoding="utf-8")
    script = r"""() => {
      const out = []; const re = /\d{4}-\d{2}-\d{2}/g;
      const walk = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
      let n; while ((n = walk.nextNode())) { let m; re.lastIndex = 0;
        while ((m = re.exec(n.data))) { const r = document.createRange();
          r.setStart(n, m.index); r.setEnd(n, m.index + m[0].length);
          const tops = new Set(Array.from(r.getClientRects()).map(b => Math.round(b.top)));
          out.push([m[0], tops.size]); } }
      return out; }"""
    with playwright.sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=["--no-sandbox", "--disable-gpu"])
        try:
            for width in (360, 700):  # a narrow phone and a printed page's width
                pg = b.new_page(viewport={"width": width, "height": 900})
                pg.emulate_media(media="print")
                pg.goto(page_file.as_uri())
                dates = pg.evaluate(script)
                assert len(dates) >= 8
                assert [d for d, lines in dates if lines != 1] == [], width
                pg.close()
        finally:
            b.close()
