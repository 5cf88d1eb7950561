"""The draw history (geosample/history.py): keyed by the plan's content, carried in the package, written first.

The expectations are this project's own definitions (docs/registration.md, "The draw history"); the point
checked is the one of the issue: copying or renaming the plan, or deleting the record beside it, must not reset
"draws made for this plan" to 1.
"""
from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import pytest

import geosample.workflow as workflow
from geosample import history
from geosample.cli import main
from geosample.plan import load_plan_text
from geosample.workflow import copy_demo, draw_record_path

PLAN = """
[survey]
title = "{title}"
timezone = "America/Chicago"
[area]
water = "{water}"
[size]
tolerance = {tol}
range = 80
[draw]
{seed}
[time]
start = 2027-06-01
end = 2027-08-31
"""


def _key(tmp_path, *, title="A", water="water.geojson", tol=20, seed="seed = 7", comment="", inputs=None):
    text = comment + PLAN.format(title=title, water=water, tol=tol, seed=seed)
    plan = load_plan_text(text, base_dir=tmp_path)
    return history.content_key(plan.settings, inputs or {"water": "a" * 64})


def test_content_key_ignores_what_does_not_change_the_draw(tmp_path):
    base = _key(tmp_path)
    assert _key(tmp_path, comment="# a comment\n") == base
    assert _key(tmp_path, title="Another title") == base
    assert _key(tmp_path, comment='[export]\ngpx_symbols = "none"\n') == base
    assert _key(tmp_path, seed="seed = 8") == base  # a re-draw with another seed is what is counted
    assert _key(tmp_path, seed='seed_text = "x"') == base
    assert _key(tmp_path, water="renamed/lake.geojson") == base  # the layer counts by its bytes
    assert _key(tmp_path, tol=21) != base
    assert _key(tmp_path, inputs={"water": "b" * 64}) != base


def _count(out: Path) -> int:
    return json.loads((out / "manifest.json").read_text(encoding="utf-8"))["draw_count"]


@pytest.fixture
def store(tmp_path, monkeypatch) -> Path:
    where = tmp_path / "store"
    monkeypatch.setenv("GEOSAMPLE_HISTORY_DIR", str(where))
    return where


def test_renamed_copied_plan_and_deleted_record_still_count(tmp_path, store):
    plan = copy_demo(tmp_path / "in")
    assert main(["plan", str(plan), "-o", str(tmp_path / "d1"), "-q"]) == 0
    assert _count(tmp_path / "d1") == 1
    # copied to another folder under another name, its layers alongside, and the beside-the-plan record deleted
    other = tmp_path / "elsewhere"
    shutil.copytree(plan.parent, other)
    (other / "plan.toml").rename(other / "final-plan.toml")
    draw_record_path(other / "plan.toml").unlink()
    draw_record_path(plan).unlink()
    assert main(["plan", str(other / "final-plan.toml"), "-o", str(tmp_path / "d2"), "-q"]) == 0
    assert _count(tmp_path / "d2") == 2
    text = (tmp_path / "d2" / "report.html").read_text(encoding="utf-8")
    assert "Earlier draws exist" in text
    with open(tmp_path / "d2" / "draws.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["output"] for r in rows] == ["d1", "d2"]  # folder names only, no absolute paths
    assert len({r["content_sha256"] for r in rows}) == 1


def test_the_history_travels_with_the_package(tmp_path, store, monkeypatch):
    plan = copy_demo(tmp_path / "in")
    out = tmp_path / "design"
    assert main(["plan", str(plan), "-o", str(out), "-q", "--bundle-inputs"]) == 0
    # On another computer (empty per-user store), re-drawing from the package's bundled plan counts the first draw.
    monkeypatch.setenv("GEOSAMPLE_HISTORY_DIR", str(tmp_path / "other-computer"))
    assert main(["plan", str(out / "inputs" / "plan.toml"), "-o", str(tmp_path / "again"), "-q"]) == 0
    assert _count(tmp_path / "again") == 2


def test_a_redraw_into_the_same_folder_reads_its_draws_csv(tmp_path, store, monkeypatch):
    plan = copy_demo(tmp_path / "in")
    out = tmp_path / "design"
    assert main(["plan", str(plan), "-o", str(out), "-q"]) == 0
    shutil.rmtree(store)
    draw_record_path(plan).unlink()
    assert main(["plan", str(plan), "-o", str(out), "-q", "--overwrite"]) == 0
    assert _count(out) == 2


def test_draws_csv_is_covered_by_the_manifest(tmp_path, store, capsys):
    plan = copy_demo(tmp_path / "in")
    for name in ("d1", "d2"):
        assert main(["plan", str(plan), "-o", str(tmp_path / name), "-q"]) == 0
    manifest = json.loads((tmp_path / "d2" / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["history"]["draws"] == 2 and manifest["history"]["file"] == "draws.csv"
    assert "draws.csv" in manifest["outputs"]
    assert main(["verify", str(tmp_path / "d2")]) == 0
    # hiding the first draw: drop its row (and, the forger's next step, fix the hash in the manifest)
    path = tmp_path / "d2" / "draws.csv"
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    path.write_text(lines[0] + lines[2], encoding="utf-8")
    capsys.readouterr()
    assert main(["verify", str(tmp_path / "d2")]) == 1
    assert "draws.csv" in capsys.readouterr().err
    import hashlib

    manifest["outputs"]["draws.csv"] = hashlib.sha256(path.read_bytes()).hexdigest()
    (tmp_path / "d2" / "manifest.json").write_text(json.dumps(manifest, indent=2, sort_keys=True), encoding="utf-8")
    assert main(["verify", str(tmp_path / "d2")]) == 1
    assert "holds 1 draws" in capsys.readouterr().err


def test_the_history_is_written_before_the_folder_is_swapped_in(tmp_path, store, monkeypatch, capsys):
    plan = copy_demo(tmp_path / "in")

    def killed(tmp, out):
        raise OSError("killed at the swap")

    monkeypatch.setattr(workflow, "_swap_in", killed)
    with pytest.raises(OSError):
        workflow.run_plan(plan, tmp_path / "d1")
    assert not (tmp_path / "d1").exists()
    stored = list(store.glob("*.csv"))
    assert len(stored) == 1 and len(history.read_rows(stored[0])) == 1
    assert len(history.read_rows(draw_record_path(plan))) == 1


def test_an_old_draw_record_without_content_keys_still_counts(tmp_path, store):
    plan = copy_demo(tmp_path / "in")
    import hashlib

    sha = hashlib.sha256(plan.read_bytes()).hexdigest()
    record = draw_record_path(plan)
    record.write_text("time_utc,plan_sha256,seed,seed_source,n_primary,n_sites,output\n"
                      f"2026-11-01T10:00:00+00:00,{sha},20270601,plan,63,95,/somewhere/old\n"
                      f"2026-11-01T11:00:00+00:00,{'0' * 64},1,plan,63,95,/somewhere/other-plan\n",
                      encoding="utf-8")
    assert main(["plan", str(plan), "-o", str(tmp_path / "d"), "-q"]) == 0
    assert _count(tmp_path / "d") == 2
    lines = record.read_text(encoding="utf-8").splitlines()
    assert lines[0] == "time_utc,plan_sha256,seed,seed_source,n_primary,n_sites,output" and len(lines) == 4
    rows = history.read_rows(tmp_path / "d" / "draws.csv")
    assert [r["output"] for r in rows] == ["old", "d"]  # no absolute path in the package
    assert main(["verify", str(tmp_path / "d")]) == 0


def test_draws_over_the_same_layers_with_other_settings_are_counted_apart(tmp_path, store, capsys):
    plan = copy_demo(tmp_path / "in")
    assert main(["plan", str(plan), "-o", str(tmp_path / "d1"), "-q"]) == 0
    text = plan.read_text(encoding="utf-8")
    assert "reserve = 0.5" in text
    changed = tmp_path / "in" / "plan-b.toml"
    changed.write_text(text.replace("reserve = 0.5", "reserve = 1", 1), encoding="utf-8")
    assert main(["plan", str(changed), "-o", str(tmp_path / "d2"), "-q"]) == 0
    manifest = json.loads((tmp_path / "d2" / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["draw_count"] == 1 and manifest["history"]["other_settings_draws"] == 1
    report = (tmp_path / "d2" / "report.html").read_text(encoding="utf-8")
    assert "Draws with other settings exist" in report and "Earlier draws exist" not in report
    capsys.readouterr()
    assert main(["verify", str(tmp_path / "d2")]) == 0
