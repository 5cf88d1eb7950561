"""The Python API page's examples run as written (docs/api.md), and the tables agree with the package.

Reference for the table contents: the files `geosample plan` writes for the same plan
and seed (schedule.csv read with the csv module), not the code under test.
"""
from __future__ import annotations

import csv
import re
from pathlib import Path

from geosample.api import design_tables
from geosample.workflow import copy_demo, run_plan

DOC = Path(__file__).resolve().parents[1] / "docs" / "api.md"


def test_the_api_page_runs(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    blocks = re.findall(r"```python\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)
    assert len(blocks) >= 2
    scope: dict = {}
    for code in blocks:
        exec(compile(code, str(DOC), "exec"), scope)
    out = capsys.readouterr().out
    assert "North Basin" in out and "day routes over water" in out
    assert scope["a"].statement


def test_design_tables_match_the_written_schedule(tmp_path):
    plan = copy_demo(tmp_path / "demo")
    t = design_tables(plan)
    run_plan(plan, tmp_path / "out", record=False)
    with open(tmp_path / "out" / "schedule.csv", newline="", encoding="utf-8") as f:
        written = list(csv.DictReader(f))
    assert list(t.schedule["site_id"]) == [r["site_id"] for r in written]
    assert list(t.schedule["planned_time"]) == [r["planned_time"] for r in written]
    assert t.sites.crs == t.strata.crs == t.design.frame.crs
    assert abs(t.strata["weight"].sum() - 1.0) < 1e-9
    assert t.frame.area.iloc[0] == __import__("pytest").approx(t.design.frame.area_m2, rel=1e-6)
