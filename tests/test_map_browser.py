"""map.html in headless chromium (Debian's /usr/bin/chromium, driven by Python playwright).

Checks what a crew sees, at a phone's size (390x844) and a desktop's (1400x1000):
on open the water fills the map; the controls start folded; a tapped site's popup
is clear of every control (bounding boxes); ``#day=N`` and the day picker show
only that day's route and sites (and the reserves of its strata), checked both
through the page's layers and through the pixels drawn; "Show my location" shows
the browser's position with no network; no failed request, no network request and
no console error; no script run from user text.

The expected values come from the hand-built fixture (tests/fixtures_design.py)
and pyproj, not from the page. Screenshots are saved to test-artifacts/.
"""
from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pyproj
import pytest
from PIL import Image

from fixtures_design import LAKE, SITES, VISITS, build_design
from geosample.export.map import write_map

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"
# Stratum names that would run code if they reached the page unescaped.
XSS_NAMES = ("<script>window.__xss = 1</script>", '<img src=x onerror="window.__xss = 2">')
PHONE, DESKTOP = (390, 844), (1400, 1000)
SIZES = pytest.mark.parametrize("size", [PHONE, DESKTOP], ids=["phone", "desktop"])

PRIMARY = [s[0] for s in SITES if s[2] == "primary"]
RESERVE = [s[0] for s in SITES if s[2] == "reserve"]
STRATUM_OF = {s[0]: s[1] for s in SITES}
# The fixture's field days: 2027-06-15 has no visit, so 2027-06-16 is day 2.
DAY_OF = {sid: 1 if v[0].day == 14 else 2 for sid, v in VISITS.items()}
TO_LONLAT = pyproj.Transformer.from_crs("EPSG:32616", "EPSG:4326", always_xy=True)


@pytest.fixture(scope="module")
def browser():
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing (the CI script installs the Debian chromium package)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError as exc:  # pragma: no cover - depends on the machine
        pytest.skip(f"playwright cannot be imported: {exc}")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield b
        b.close()


@pytest.fixture(scope="module")
def map_file(tmp_path_factory):
    return write_map(build_design(), tmp_path_factory.mktemp("map") / "map.html")


def _open(browser, path: Path, size=(1280, 820), hash_: str = "", **context):
    ctx = browser.new_context(viewport={"width": size[0], "height": size[1]}, **context)
    page = ctx.new_page()
    page.set_default_timeout(10_000)
    problems: list[str] = []
    page.on("requestfailed", lambda r: problems.append(f"request failed: {r.url} ({r.failure})"))
    page.on("request", lambda r: None if r.url.startswith(("file://", "data:")) else
            problems.append(f"network request: {r.url}"))
    page.on("console", lambda m: problems.append(f"console {m.type}: {m.text}") if m.type in ("error", "warning")
            else None)
    page.on("pageerror", lambda e: problems.append(f"page error: {e}"))
    page.goto(path.as_uri() + hash_)
    page.wait_for_function("window.geosampleMap !== undefined")
    return page, problems


def _site_xy(sid: str) -> tuple[float, float]:
    x, y = next((s[4], s[5]) for s in SITES if s[0] == sid)
    lon, lat = TO_LONLAT.transform(x, y)
    return lat, lon


def _point(page, lat: float, lon: float) -> tuple[float, float]:
    """Page pixel of a lat/lon (the map fills the page, so container pixels are page pixels)."""
    return tuple(page.evaluate("([a, b]) => window.geosampleMap.point(a, b)", [lat, lon]))


def _shown(page) -> dict:
    return page.evaluate("window.geosampleMap.shown()")


def _white(page, sid: str) -> bool:
    """True when a numbered site disc is drawn at the site: its fill, beside the number, is white."""
    x, y = _point(page, *_site_xy(sid))
    png = page.screenshot(clip={"x": x + 5, "y": y - 6, "width": 2, "height": 2})
    return bool((np.asarray(Image.open(io.BytesIO(png)).convert("RGB")) == 255).all())


def _open_layer_list(page) -> None:
    """Tap the folded layer list's icon (a phone has no hover)."""
    b = page.evaluate("JSON.stringify(document.querySelector('.leaflet-control-layers-toggle')"
                      ".getBoundingClientRect())")
    b = json.loads(b)
    page.mouse.click(b["x"] + b["width"] / 2, b["y"] + b["height"] / 2)
    page.locator(".leaflet-control-layers-expanded").wait_for()


def _overlap(a: dict, b: dict) -> bool:
    return (a["x"] < b["x"] + b["width"] and b["x"] < a["x"] + a["width"]
            and a["y"] < b["y"] + b["height"] and b["y"] < a["y"] + a["height"])


def _popup_box(page) -> dict:
    page.locator(".leaflet-popup-content").wait_for()
    page.wait_for_function("getComputedStyle(document.querySelector('.leaflet-popup')).opacity === '1'")
    page.wait_for_timeout(350)  # autoPan's pan animation (0.25 s)
    wrap = page.locator(".leaflet-popup-content-wrapper").bounding_box()
    tip = page.locator(".leaflet-popup-tip-container").bounding_box()
    top = min(wrap["y"], tip["y"])
    bottom = max(wrap["y"] + wrap["height"], tip["y"] + tip["height"])
    return {"x": wrap["x"], "y": top, "width": wrap["width"], "height": bottom - top}


# --------------------------------------------------------------------------- tests
def test_map_draws_sites_routes_and_popups(browser, map_file):
    page, problems = _open(browser, map_file)
    shown = _shown(page)
    assert sorted(shown["sites"]) == sorted(PRIMARY)
    assert shown["reserves"] == []  # reserves' layer off with all days shown
    assert shown["routes"] == ["Day 1 2027-06-14", "Day 2 2027-06-16"]
    assert all(_white(page, sid) for sid in PRIMARY)
    assert page.locator(".leaflet-control-scale").count() == 1
    # Controls start folded: the layer list is an icon, the legend one line.
    assert page.locator(".leaflet-control-layers-expanded").count() == 0
    assert page.evaluate("document.querySelector('#gs-legend details').open") is False
    page.mouse.click(*_point(page, *_site_xy("NB-001")))
    popup = page.locator(".leaflet-popup-content")
    popup.wait_for()
    assert "NB-001" in popup.inner_text()
    assert "2027-06-14" in popup.inner_text() and "09:05 (UTC-05:00)" in popup.inner_text()
    assert "day 1, stop 1" in popup.inner_text()
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "map.png"))
    page.locator(".leaflet-popup-close-button").click()
    popup.wait_for(state="detached")
    _open_layer_list(page)
    page.locator(".leaflet-control-layers label", has_text="Reserves").locator("input").check()
    assert sorted(_shown(page)["reserves"]) == sorted(RESERVE)
    page.screenshot(path=str(ARTIFACTS / "map-reserves.png"))
    assert problems == []
    page.close()


@SIZES
def test_water_fills_the_map_on_open(browser, map_file, size):
    page, problems = _open(browser, map_file, size)
    lon, lat = TO_LONLAT.transform(*[list(c) for c in zip(*LAKE.exterior.coords)])
    corners = [_point(page, la, lo) for la in (min(lat), max(lat)) for lo in (min(lon), max(lon))]
    xs, ys = [c[0] for c in corners], [c[1] for c in corners]
    # The whole lake is in view, and spans at least 60% of the map's width or height.
    assert min(xs) >= -1 and max(xs) <= size[0] + 1 and min(ys) >= -1 and max(ys) <= size[1] + 1
    assert (max(xs) - min(xs)) / size[0] >= 0.6 or (max(ys) - min(ys)) / size[1] >= 0.6
    page.screenshot(path=str(ARTIFACTS / f"map-open-{size[0]}x{size[1]}.png"))
    assert problems == []
    page.close()


@SIZES
@pytest.mark.parametrize("where", ["top-right", "top-left", "bottom-right"])
def test_tapped_popup_is_clear_of_the_controls(browser, map_file, size, where):
    """A site moved just past a corner's controls, then tapped: its popup overlaps no control."""
    page, problems = _open(browser, map_file, size)
    corner = {"top-right": ".leaflet-top.leaflet-right", "top-left": ".leaflet-top.leaflet-left",
              "bottom-right": ".leaflet-bottom.leaflet-right"}[where]
    box = page.locator(corner).bounding_box()
    w, h = size
    target = {"top-right": (w - 60, box["y"] + box["height"] + 24), "top-left": (60, box["y"] + box["height"] + 24),
              "bottom-right": (w - 60, box["y"] - 24)}[where]
    sid = "NB-003"
    x, y = _point(page, *_site_xy(sid))
    page.evaluate("([dx, dy]) => window.geosampleMap.map.panBy([dx, dy], {animate: false})",
                  [x - target[0], y - target[1]])
    x, y = _point(page, *_site_xy(sid))
    assert abs(x - target[0]) < 1 and abs(y - target[1]) < 1
    page.mouse.click(x, y)
    pop = _popup_box(page)
    assert sid in page.locator(".leaflet-popup-content").inner_text()
    controls = page.locator(".leaflet-control").all()
    assert len(controls) >= 5
    for c in controls:
        b = c.bounding_box()
        if b and b["width"] > 0:
            assert not _overlap(pop, b), (where, c.get_attribute("class"), b, pop)
    assert pop["x"] >= 0 and pop["y"] >= 0 and pop["x"] + pop["width"] <= w and pop["y"] + pop["height"] <= h
    if where == "top-right":
        page.screenshot(path=str(ARTIFACTS / f"map-popup-{w}x{h}.png"))
    assert problems == []
    page.close()


@SIZES
def test_day_link_shows_only_that_day(browser, map_file, size):
    page, problems = _open(browser, map_file, size, "#day=2")
    day2 = [s for s in PRIMARY if DAY_OF[s] == 2]
    shown = _shown(page)
    assert sorted(shown["sites"]) == sorted(day2)
    assert shown["routes"] == ["Day 2 2027-06-16"]
    # The reserves of the day's strata (day 2 is all in the south basin, stratum 1), none of the others.
    assert sorted(shown["reserves"]) == sorted(r for r in RESERVE if STRATUM_OF[r] == 1)
    assert page.locator(".gs-day-select").input_value() == "2"
    # What is drawn, read from the pixels: day 2's discs, none of day 1's.
    assert all(_white(page, s) for s in day2)
    page.screenshot(path=str(ARTIFACTS / f"map-day2-{size[0]}x{size[1]}.png"))
    # A link changed in the open page (hashchange).
    page.evaluate("window.location.hash = '#day=1'")
    page.wait_for_function("window.geosampleMap.day() === 1")
    assert sorted(_shown(page)["sites"]) == sorted(s for s in PRIMARY if DAY_OF[s] == 1)
    assert _shown(page)["routes"] == ["Day 1 2027-06-14"]
    assert not any(_white(page, s) for s in day2 if _inside(page, s, size))
    # The picker: all days, then day 2 again (the link follows the picker).
    page.locator(".gs-day-select").select_option("all")
    assert sorted(_shown(page)["sites"]) == sorted(PRIMARY) and _shown(page)["reserves"] == []
    page.locator(".gs-day-select").select_option("2")
    assert sorted(_shown(page)["sites"]) == sorted(day2)
    assert page.evaluate("window.location.hash") == "#day=2"
    page.locator(".gs-step").first.click()  # previous day
    assert page.evaluate("window.geosampleMap.day()") == 1
    assert problems == []
    page.close()


def _inside(page, sid: str, size) -> bool:
    x, y = _point(page, *_site_xy(sid))
    return 20 < x < size[0] - 20 and 120 < y < size[1] - 60


def test_crowded_reserves_are_labelled_only_when_zoomed_in(browser, tmp_path):
    """300 extra reserves in the north basin: unlabelled squares at open, labels once few are in view."""
    import dataclasses

    import shapely

    from geosample.model import Visit

    d = build_design()
    north = d.frame.strata[0]
    rng = np.random.default_rng(5)
    extra = []
    b = shapely.bounds(north.geometry)
    while len(extra) < 300:
        x, y = rng.uniform(b[:2], b[2:])
        if shapely.contains_xy(north.geometry, x, y):
            lon, lat = TO_LONLAT.transform(x, y)
            extra.append(Visit(f"NB-{len(extra) + 100:03d}", north.name, "reserve", len(extra) + 3, x, y, lat, lon))
    d = dataclasses.replace(d, schedule=dataclasses.replace(d.schedule, visits=d.schedule.visits + tuple(extra)))
    path = write_map(d, tmp_path / "map.html")
    page, problems = _open(browser, path, DESKTOP, "#day=1")
    shown = _shown(page)
    assert len(shown["reserves"]) == 302 and shown["labelled"] == 0
    lat, lon = _site_xy("NB-004")
    page.evaluate("([a, b]) => { window.geosampleMap.map.setView([a, b], 19, {animate: false}); }", [lat, lon])
    shown = _shown(page)
    assert shown["labelled"] == 302  # few in view: every reserve label is drawn again
    assert problems == []
    page.close()


def test_unknown_day_shows_all_days(browser, map_file):
    page, problems = _open(browser, map_file, PHONE, "#day=9")
    assert page.evaluate("window.geosampleMap.day()") is None
    assert sorted(_shown(page)["sites"]) == sorted(PRIMARY)
    assert problems == []
    page.close()


def test_location_is_shown_when_allowed_with_no_network(browser, map_file):
    lat, lon = _site_xy("SB-002")
    page, problems = _open(browser, map_file, PHONE, geolocation={"latitude": lat, "longitude": lon, "accuracy": 15},
                           permissions=["geolocation"])
    assert page.evaluate("window.gsLocation") is None  # nothing asked before the user taps
    page.locator(".gs-locate-btn").click()
    page.wait_for_function("window.gsLocation !== undefined && window.gsLocation !== null")
    got = page.evaluate("window.gsLocation")
    assert got["lat"] == pytest.approx(lat, abs=1e-9) and got["lon"] == pytest.approx(lon, abs=1e-9)
    assert "±15 m" in page.locator(".gs-locate-msg").inner_text()
    page.screenshot(path=str(ARTIFACTS / "map-location.png"))
    assert problems == []
    page.close()


def test_location_refused_says_so(browser, map_file):
    page, problems = _open(browser, map_file, PHONE)  # no geolocation permission granted
    page.locator(".gs-locate-btn").click()
    page.wait_for_function("document.querySelector('.gs-locate-msg').textContent.indexOf('not available') >= 0")
    assert page.evaluate("window.gsLocation") is None
    assert problems == []
    page.close()


def test_basemap_makes_no_request_until_turned_on(browser, tmp_path):
    path = write_map(build_design(), tmp_path / "map.html", tiles="https://tiles.invalid/{z}/{x}/{y}.png",
                     attribution="Test tiles")
    page, problems = _open(browser, path)
    page.wait_for_timeout(300)
    assert problems == []
    _open_layer_list(page)
    assert page.locator(".leaflet-control-layers label", has_text="Basemap (needs a network)").count() == 1
    page.close()


def test_user_text_runs_nothing(browser, tmp_path):
    path = write_map(build_design(XSS_NAMES, title=XSS_NAMES[0]), tmp_path / "map.html")
    page, problems = _open(browser, path)
    # Open every popup that holds a stratum name (strata and sites), and show the tooltips.
    for el in page.locator("path.leaflet-interactive").all():
        el.dispatch_event("click")
    for sid in PRIMARY:  # one popup at a time, the map still (autoPan moves it)
        page.evaluate("window.geosampleMap.map.closePopup()")
        page.wait_for_timeout(300)
        page.evaluate("{ const g = window.geosampleMap; g.map.fitBounds(g.waterBounds, {animate: false}); }")
        x, y = _point(page, *_site_xy(sid))
        page.mouse.move(x, y)
        page.mouse.click(x, y)
        page.locator(".leaflet-popup-content").wait_for()
        assert XSS_NAMES[DAY_OF[sid] - 1] in page.locator(".leaflet-popup-content").inner_text()
    page.evaluate("window.geosampleMap.map.closePopup()")
    page.wait_for_timeout(400)  # any pan still running
    page.locator("#gs-legend summary").click()
    page.wait_for_function("document.querySelector('#gs-legend details').open")
    assert page.evaluate("window.__xss") is None
    assert XSS_NAMES[0] in page.locator("#gs-legend").inner_text()  # shown as text
    assert XSS_NAMES[1] in page.locator("#gs-legend").inner_text()
    assert page.locator("#gs-legend img").count() == 0 and page.locator(".leaflet-popup img").count() == 0
    assert problems == []
    page.close()
