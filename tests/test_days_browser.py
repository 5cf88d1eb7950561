"""Day sheets print to exactly one page: Debian's /usr/bin/chromium --headless --print-to-pdf.

The pages of the PDF are counted with pypdf when it is installed, otherwise by
counting the ``/Type /Page`` objects of the file (PDF 32000-1:2008, 7.7.3.3: one
page object per page). The three fullest sheets (most stops and reserves) of two designs from the demo plan: as shipped (16 field days,
about 4 stops a day) and with ``field_days = 8`` and monthly temporal strata (8 stops a day, the
plan's ``per_day``: the fullest sheet the plan allows).
"""
from __future__ import annotations

import re
import subprocess
from pathlib import Path

import pytest

pytestmark = [pytest.mark.browser, pytest.mark.slow]

CHROMIUM = Path("/usr/bin/chromium")


def _pages(pdf: Path) -> int:
    try:
        import pypdf
    except ImportError:
        return len(re.findall(rb"/Type\s*/Page(?![s\w])", pdf.read_bytes()))
    return len(pypdf.PdfReader(str(pdf)).pages)


def _print(html: Path, pdf: Path) -> None:
    subprocess.run([str(CHROMIUM), "--headless", "--no-sandbox", "--disable-gpu", "--no-pdf-header-footer",
                    f"--print-to-pdf={pdf}", html.resolve().as_uri()], check=True, capture_output=True, timeout=180)


@pytest.fixture(scope="module")
def designs(tmp_path_factory):
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing (the CI script installs the Debian chromium package)")
    from geosample.workflow import copy_demo, run_plan

    out = []
    for days in (16, 8):
        src = copy_demo(tmp_path_factory.mktemp(f"inputs{days}"))
        text = src.read_text(encoding="utf-8")
        text = re.sub(r"(?m)^field_days = \d+", f"field_days = {days}", text)
        if days < 14:  # fewer days than the season's 14 ISO weeks: one field day per month stratum at least
            text = text.replace("[time]", '[time]\ntemporal = "month"', 1)
        src.write_text(text, encoding="utf-8")
        folder = tmp_path_factory.mktemp(f"d{days}") / "design"
        run_plan(src, folder, record=False)
        out.append(folder)
    return out


def _fullest(folder: Path, k: int = 3) -> list[Path]:
    """The ``k`` sheets with the most stops and reserves (rows of the day's CSV), to keep the test short."""
    sheets = sorted((folder / "days").glob("*.html"))
    rows = {h: len(h.with_suffix(".csv").read_text(encoding="utf-8").splitlines()) for h in sheets}
    return sorted(sheets, key=lambda h: (-rows[h], h.name))[:k]


def test_the_fullest_day_sheets_print_to_one_page(designs, tmp_path):
    counts = {}
    for folder in designs:
        for html in _fullest(folder):
            pdf = tmp_path / f"{folder.parent.name}-{html.stem}.pdf"
            _print(html, pdf)
            counts[f"{folder.parent.name}/{html.name}"] = _pages(pdf)
    assert set(counts.values()) == {1}, counts
    assert len(counts) == 6


def test_page_counter_counts_two_pages(tmp_path):
    """The counter is not stuck at 1: a sheet with a forced break gives 2 pages."""
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing")
    html = tmp_path / "two.html"
    html.write_text('<p>one</p><p style="break-before: page">two</p>', encoding="utf-8")
    _print(html, tmp_path / "two.pdf")
    assert _pages(tmp_path / "two.pdf") == 2
