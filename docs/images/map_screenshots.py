"""Rewrite the map screenshots in docs/images from the demo design (needs chromium and playwright).

    python docs/images/map_screenshots.py

demo-map.png        desktop (1400x1000), all days, as the page opens
demo-map-phone.png  phone (390x844), all days, as the page opens
demo-day-phone.png  phone, map.html#day=3: one field day with its reserves
demo-popup.png      phone, day 3, a site tapped (its popup clear of the controls)
"""
from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from playwright.sync_api import sync_playwright

from geosample.cli import main

HERE = Path(__file__).resolve().parent
PHONE, DESKTOP = {"width": 390, "height": 844}, {"width": 1400, "height": 1000}


def shoot(page, url: str, out: str) -> None:
    page.goto(url)
    page.wait_for_function("window.geosampleMap !== undefined")
    page.wait_for_timeout(300)
    page.screenshot(path=str(HERE / out))


def run() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        if main(["demo", "-o", str(Path(tmp) / "demo"), "-q"]) != 0:
            sys.exit("the demo failed")
        url = (Path(tmp) / "demo" / "map.html").as_uri()
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path="/usr/bin/chromium", args=["--no-sandbox", "--disable-gpu"])
            shoot(b.new_page(viewport=DESKTOP), url, "demo-map.png")
            shoot(b.new_page(viewport=PHONE), url, "demo-map-phone.png")
            page = b.new_page(viewport=PHONE)
            shoot(page, url + "#day=3", "demo-day-phone.png")
            site = page.evaluate("window.geosampleMap.design.sites.filter(s => s.day === 3 && s.order === 2)[0]")
            page.mouse.click(*page.evaluate("([a, b]) => window.geosampleMap.point(a, b)", [site["lat"], site["lon"]]))
            page.locator(".leaflet-popup-content").wait_for()
            page.wait_for_timeout(500)
            page.screenshot(path=str(HERE / "demo-popup.png"))
            b.close()


if __name__ == "__main__":
    run()
