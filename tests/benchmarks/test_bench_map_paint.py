"""Benchmark: first paint of a 5,000-site map.html in chromium, and its size (issue 13).

The design is the hand-built test lake (tests/fixtures_design.py) with 3,334 primaries on
56 field days of 60 stops (a straight route through each day's stops) and 1,666 reserves:
5,000 sites, placed on a seeded grid inside the strata. Only the page is measured.

"First paint" is the time from navigation start until the browser has drawn the map
with every site: the page's script has run, then two animation frames have passed
(Leaflet's canvas draws on the next frame). CPU: the renderer's main-thread task time
(Chrome DevTools Protocol ``Performance.getMetrics``, ``TaskDuration``) for the load.

Reference, in the same run: the same sites drawn the way the map drew them before
(one Leaflet ``divIcon`` marker per site, each with its popup HTML built in advance),
in a page written here with the same vendored Leaflet.

Targets: first paint at most 1.5 s and below the reference; the page at most 10 MB and
smaller than the reference. (Profiled before choosing: with the routes of 56 days drawn dashed
on canvas, the dashes were most of the first paint, 2.5 s against 1.1 s solid; "all days" now
draws routes solid when there are more than 20 days.)
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import html
import json
from pathlib import Path

import numpy as np
import pytest
import shapely

from fixtures_design import TZ, build_design, lonlat
from geosample.export.map import _leaflet_assets, write_map
from geosample.model import Route, Visit

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--no-first-run"]
N_PRIMARY, N_RESERVE, PER_DAY = 3334, 1666, 60
TARGET_S = 1.5
TARGET_BYTES = 10 * 2**20
VIEWPORT = {"width": 1400, "height": 1000}


def design_5000():
    d = build_design()
    frame_strata = d.frame.strata
    rng = np.random.default_rng(13)
    pts = []
    x0, y0, x1, y1 = shapely.bounds(d.frame.water)
    while len(pts) < N_PRIMARY + N_RESERVE:
        xy = rng.uniform((x0, y0), (x1, y1), size=(4000, 2))
        inside = [shapely.contains_xy(s.geometry, xy[:, 0], xy[:, 1]) for s in frame_strata]
        for k, (x, y) in enumerate(xy):
            for j, s in enumerate(frame_strata):
                if inside[j][k]:
                    pts.append((j, x, y))
    pts = pts[:N_PRIMARY + N_RESERVE]
    visits, routes, counts, ranks = [], [], {0: 0, 1: 0}, {0: 0, 1: 0}
    start = dt.date(2027, 5, 1)
    day_sites: dict[int, list[str]] = {}
    for i, (j, x, y) in enumerate(pts):
        s = frame_strata[j]
        counts[j] += 1
        sid = f"{s.code}-{counts[j]:04d}"
        lon, lat = lonlat(x, y)
        if i < N_PRIMARY:
            day = i // PER_DAY
            date = start + dt.timedelta(days=day)
            order = i % PER_DAY + 1
            t = dt.datetime(date.year, date.month, date.day, 7, 0, tzinfo=TZ) + dt.timedelta(minutes=8 * order)
            visits.append(Visit(sid, s.name, "primary", 0, x, y, lat, lon, visit_date=date, planned_time=t,
                                day_index=day, route_order=order))
            day_sites.setdefault(day, []).append(sid)
        else:
            ranks[j] += 1
            visits.append(Visit(sid, s.name, "reserve", ranks[j], x, y, lat, lon))
    by_id = {v.site_id: v for v in visits}
    for day, ids in day_sites.items():
        date = start + dt.timedelta(days=day)
        path = [(by_id[i].x, by_id[i].y) for i in ids]
        routes.append(Route(day, date, "West launch", tuple(ids), tuple(path), tuple(lonlat(*p) for p in path),
                            1000.0, dt.datetime(date.year, date.month, date.day, 7, 0, tzinfo=TZ),
                            dt.datetime(date.year, date.month, date.day, 16, 0, tzinfo=TZ)))
    schedule = dataclasses.replace(d.schedule, visits=tuple(visits), routes=tuple(routes))
    return dataclasses.replace(d, schedule=schedule)


def reference_page(design, path: Path) -> Path:
    """The sites as one DOM marker each with prebuilt popup HTML (how map.html drew them before)."""
    js, css = _leaflet_assets()
    rows = []
    for v in design.schedule.visits:
        pop = (f"<div class=\"gs-popup\"><b>{html.escape(v.site_id)}</b><table><tr><th>Stratum</th><td>"
               f"{html.escape(v.stratum)}</td></tr><tr><th>Role</th><td>{v.role}</td></tr><tr><th>Date</th><td>"
               f"{v.visit_date or ''}</td></tr><tr><th>Planned time</th><td>{v.planned_time or ''}</td></tr>"
               f"<tr><th>Lat, lon</th><td>{v.lat:.6f}, {v.lon:.6f}</td></tr><tr><th>x, y</th><td>{v.x:.1f}, "
               f"{v.y:.1f}</td></tr></table></div>")
        rows.append([round(v.lat, 6), round(v.lon, 6), str(v.route_order or ""), pop, v.site_id])
    data = json.dumps(rows).replace("<", "\\u003c")
    page = f"""<!DOCTYPE html><html><head><meta charset="utf-8"><style>{css}</style>
<style>html,body,#m{{height:100%;margin:0}} .pin{{width:26px;height:26px;border-radius:50%;border:3px solid #0072B2;
background:#fff;box-sizing:border-box;text-align:center;font:bold 12px/20px sans-serif}}</style>
<script>{js}</script></head><body><div id="m"></div><script>
var map = L.map("m"), g = L.featureGroup().addTo(map), s = {data};
for (var i = 0; i < s.length; i++) {{
  L.marker([s[i][0], s[i][1]], {{icon: L.divIcon({{html: '<div class="pin">' + s[i][2] + '</div>',
    className: "", iconSize: [26, 26], iconAnchor: [13, 13]}})}}).bindPopup(s[i][3]).bindTooltip(s[i][4]).addTo(g);
}}
map.fitBounds(g.getBounds());
window.geosampleMap = true;
</script></body></html>"""
    path.write_text(page, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def browser():
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield b
        b.close()


@pytest.fixture(scope="module")
def pages(tmp_path_factory):
    d = design_5000()
    assert len(d.schedule.visits) == 5000
    folder = tmp_path_factory.mktemp("paint")
    return write_map(d, folder / "map.html"), reference_page(d, folder / "reference.html")


def first_paint(browser, path: Path) -> dict:
    """Seconds from navigation start to the map drawn (script run, two frames), and main-thread task time."""
    page = browser.new_page(viewport=VIEWPORT)
    cdp = page.context.new_cdp_session(page)
    cdp.send("Performance.enable")
    before = {m["name"]: m["value"] for m in cdp.send("Performance.getMetrics")["metrics"]}
    page.goto(path.as_uri(), wait_until="load")
    page.wait_for_function("window.geosampleMap !== undefined")
    ms = page.evaluate("new Promise(r => requestAnimationFrame(() => requestAnimationFrame(() => r(performance.now()))))")
    after = {m["name"]: m["value"] for m in cdp.send("Performance.getMetrics")["metrics"]}
    page.close()
    return {"paint_s": ms / 1000, "task_s": after["TaskDuration"] - before.get("TaskDuration", 0.0),
            "script_s": after["ScriptDuration"] - before.get("ScriptDuration", 0.0)}


@pytest.mark.browser
def test_bench_map_first_paint_5000_sites(benchmark, browser, pages):
    ours_path, ref_path = pages
    runs: list[dict] = []
    benchmark.pedantic(lambda: runs.append(first_paint(browser, ours_path)), rounds=5, iterations=1,
                       warmup_rounds=1)
    ours = sorted(r["paint_s"] for r in runs[1:])[len(runs[1:]) // 2]
    ours_cpu = sorted(r["task_s"] for r in runs[1:])[len(runs[1:]) // 2]
    ref_runs = [first_paint(browser, ref_path) for _ in range(4)][1:]
    ref = sorted(r["paint_s"] for r in ref_runs)[1]
    ref_cpu = sorted(r["task_s"] for r in ref_runs)[1]
    size, ref_size = ours_path.stat().st_size, ref_path.stat().st_size
    print(f"\n5,000-site map.html: first paint median {ours:.2f} s (main-thread tasks {ours_cpu:.2f} s), "
          f"{size / 2**20:.2f} MiB; reference (DOM markers, prebuilt popups) {ref:.2f} s "
          f"(tasks {ref_cpu:.2f} s), {ref_size / 2**20:.2f} MiB")
    benchmark.extra_info.update({"first_paint_s": ours, "task_s": ours_cpu, "bytes": size,
                                 "reference_first_paint_s": ref, "reference_task_s": ref_cpu,
                                 "reference_bytes": ref_size})
    assert ours <= TARGET_S and ours < ref
    assert size <= TARGET_BYTES and size < ref_size
