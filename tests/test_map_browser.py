"""map.html in headless chromium (Debian's /usr/bin/chromium, driven by Python playwright).

Checks what a crew sees: one marker per site, the day routes, a popup with the
site id on click, the reserves' layer off until turned on, no failed request and
no console error with the network unused, and no script run from user text.
A screenshot is saved to test-artifacts/map.png.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from fixtures_design import SITES, build_design
from geosample.export.map import write_map

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"
# Stratum names that would run code if they reached the page unescaped.
XSS_NAMES = ("<script>window.__xss = 1</script>", '<img src=x onerror="window.__xss = 2">')

N_PRIMARY = sum(1 for s in SITES if s[2] == "primary")
N_RESERVE = sum(1 for s in SITES if s[2] == "reserve")


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


def _open(browser, path: Path):
    page = browser.new_page(viewport={"width": 1280, "height": 820})
    page.set_default_timeout(10_000)
    problems: list[str] = []
    page.on("requestfailed", lambda r: problems.append(f"request failed: {r.url} ({r.failure})"))
    page.on("request", lambda r: None if r.url.startswith(("file://", "data:")) else
            problems.append(f"network request: {r.url}"))
    page.on("console", lambda m: problems.append(f"console {m.type}: {m.text}") if m.type in ("error", "warning")
            else None)
    page.on("pageerror", lambda e: problems.append(f"page error: {e}"))
    page.goto(path.as_uri())
    page.wait_for_selector(".gs-site")
    page.wait_for_function("document.querySelector('.leaflet-zoom-anim') === null")
    return page, problems


def test_map_draws_sites_routes_and_popups(browser, tmp_path):
    path = write_map(build_design(), tmp_path / "map.html")
    page, problems = _open(browser, path)
    assert page.locator(".leaflet-marker-icon.gs-site").count() == N_PRIMARY
    assert page.locator(".leaflet-marker-icon.gs-reserve").count() == 0  # reserves' layer off by default
    assert page.locator("path.gs-route").count() == 2
    assert page.locator(".leaflet-control-scale").count() == 1
    assert page.locator("#gs-legend").is_visible()
    page.locator(".gs-site").first.click()
    popup = page.locator(".leaflet-popup-content")
    popup.wait_for()
    assert "NB-001" in popup.inner_text()
    assert "2027-06-14 09:05" in popup.inner_text()
    page.wait_for_function("getComputedStyle(document.querySelector('.leaflet-popup')).opacity === '1'")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "map.png"))
    page.locator(".leaflet-popup-close-button").click()
    popup.wait_for(state="detached")
    page.locator(".leaflet-control-layers label", has_text="Reserves").locator("input").check()
    assert page.locator(".leaflet-marker-icon.gs-reserve").count() == N_RESERVE
    page.screenshot(path=str(ARTIFACTS / "map-reserves.png"))
    assert problems == []
    page.close()


def test_user_text_runs_nothing(browser, tmp_path):
    path = write_map(build_design(XSS_NAMES, title=XSS_NAMES[0]), tmp_path / "map.html")
    page, problems = _open(browser, path)
    # Open every popup that holds a stratum name (strata and sites), and show the tooltips.
    for el in page.locator("path.leaflet-interactive").all():
        el.dispatch_event("click")
    for el in page.locator(".gs-site").all():
        el.dispatch_event("click")
        el.dispatch_event("mouseover")
    assert page.locator(".leaflet-popup-content").count() >= 1
    assert page.evaluate("window.__xss") is None
    assert XSS_NAMES[0] in page.locator("#gs-legend").inner_text()  # shown as text
    assert page.locator("#gs-legend img").count() == 0
    assert problems == []
    page.close()

