"""End to end: `plan`, `verify`, `demo` on the packaged demo lake (geosample/workflow.py, audit.py, cli)."""
from __future__ import annotations

import csv
import json
import re
import shutil
from pathlib import Path

import pytest

from geosample.cli import main
from geosample.workflow import copy_demo, draw_record_path

PACKAGE = ("schedule.csv", "sites.gpx", "sites.geojson", "sites.gpkg", "map.html", "report.html", "manifest.json")


@pytest.fixture(scope="module")
def demo_inputs(tmp_path_factory) -> Path:
    """A copy of the packaged demo plan and layers in a folder of their own."""
    return copy_demo(tmp_path_factory.mktemp("demo-inputs"))


@pytest.fixture(scope="module")
def design(demo_inputs, tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("designs") / "design"
    assert main(["plan", str(demo_inputs), "-o", str(out), "-q"]) == 0
    return out


def _read_schedule(folder: Path) -> list[dict]:
    with open(folder / "schedule.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_plan_writes_the_whole_field_package(design):
    for name in PACKAGE:
        assert (design / name).is_file(), name
    manifest = json.loads((design / "manifest.json").read_text())
    assert set(PACKAGE) - {"manifest.json"} <= set(manifest["outputs"])
    for key in ("inputs", "settings", "seed", "libraries", "crs", "outputs", "draw_count", "frame", "allocation"):
        assert key in manifest


def test_schedule_has_the_contract_columns(design):
    rows = _read_schedule(design)
    need = ["site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "lat", "lon", "x", "y",
            "result", "qualifier", "sampled_at", "sampler", "notes",
          "replaced_by", "replacement_reason"]
    assert set(need) <= set(rows[0])
    roles = {r["role"] for r in rows}
    assert roles == {"primary", "reserve"}
    for r in rows:
        if r["role"] == "primary":
            assert r["visit_date"] and r["planned_time"][-6] in "+-"  # ISO 8601 with UTC offset
        assert r["result"] == ""


def test_verify_passes_on_a_fresh_design(design, capsys):
    assert main(["verify", str(design)]) == 0
    assert "verified" in capsys.readouterr().out


def test_verify_fails_on_an_edited_output(design, capsys):
    # the manifest's input paths are relative: keep the copy at the same depth next to the original
    copy2 = design.parent / "edited-output"
    shutil.copytree(design, copy2)
    with open(copy2 / "report.html", "a", encoding="utf-8") as fh:
        fh.write("<!-- edited -->")
    assert main(["verify", str(copy2)]) == 1
    err = capsys.readouterr().err
    assert "report.html" in err and "altered" in err


def test_verify_fails_on_a_moved_site(design, capsys):
    copy = design.parent / "moved-site"
    shutil.copytree(design, copy)
    rows = _read_schedule(copy)
    rows[0]["x"] = str(float(rows[0]["x"]) + 25.0)
    with open(copy / "schedule.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]), lineterminator="\n")
        w.writeheader()
        w.writerows(rows)
    assert main(["verify", str(copy)]) == 1
    err = capsys.readouterr().err
    assert rows[0]["site_id"] in err and "moved" in err


def test_verify_fails_on_an_edited_bundled_input(design, capsys):
    copy = design.parent / "edited-input"
    shutil.copytree(design, copy)
    water = json.loads((copy / "inputs" / "water.geojson").read_text())
    ring = water["features"][0]["geometry"]["coordinates"][0]
    ring[1] = [ring[1][0] + 0.0005, ring[1][1]]  # nudge one shoreline vertex (about 40 m)
    (copy / "inputs" / "water.geojson").write_text(json.dumps(water))
    assert main(["verify", str(copy)]) == 1
    assert "input water" in capsys.readouterr().err


def test_inputs_are_bundled_by_default_and_edits_after_planning_do_not_matter(demo_inputs, tmp_path, capsys):
    inputs = tmp_path / "inputs"
    shutil.copytree(demo_inputs.parent, inputs)
    out = tmp_path / "design"
    assert main(["plan", str(inputs / "plan.toml"), "-o", str(out), "-q"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["plan"]["path"] == "inputs/plan.toml"
    assert manifest["inputs"]["water"]["path"] == "inputs/water.geojson"
    assert str(tmp_path) not in (out / "manifest.json").read_text()  # no author's absolute path
    (inputs / "water.geojson").write_text("changed after the design was written")
    moved = tmp_path / "far" / "away" / "design"
    shutil.copytree(out, moved)
    assert main(["verify", str(moved)]) == 0


def test_same_plan_inputs_and_seed_give_identical_files(demo_inputs, tmp_path, monkeypatch):
    """Two first draws (two computers, each with its own draw history) give the same files.

    Only the draw history differs: draws.csv holds the clock time and id of each draw, and the manifest
    records its hash and the draw's id.
    """
    a_in, b_in = tmp_path / "a" / "in", tmp_path / "b" / "in"
    shutil.copytree(demo_inputs.parent, a_in)
    shutil.copytree(demo_inputs.parent, b_in)
    for side in ("a", "b"):
        (tmp_path / side / "in" / "plan.toml.draws.csv").unlink(missing_ok=True)
        monkeypatch.setenv("GEOSAMPLE_HISTORY_DIR", str(tmp_path / side / "history"))
        assert main(["plan", str(tmp_path / side / "in" / "plan.toml"), "-o", str(tmp_path / side / "out"),
                     "-q"]) == 0
    for name in PACKAGE:
        if name != "manifest.json":
            assert (tmp_path / "a" / "out" / name).read_bytes() == (tmp_path / "b" / "out" / name).read_bytes(), name
    a, b = (json.loads((tmp_path / side / "out" / "manifest.json").read_text()) for side in ("a", "b"))
    for m in (a, b):
        assert m["draw_count"] == 1 and m["history"]["draws"] == 1
        del m["outputs"]["draws.csv"], m["history"]["this_draw"]
    assert a == b


def test_existing_output_is_refused_without_overwrite(design, demo_inputs, capsys):
    before = (design / "schedule.csv").read_bytes()
    assert main(["plan", str(demo_inputs), "-o", str(design)]) == 2
    err = capsys.readouterr().err
    assert "--overwrite" in err and "Traceback" not in err
    assert (design / "schedule.csv").read_bytes() == before


def test_overwrite_replaces_and_the_draw_record_counts_draws(demo_inputs, tmp_path, monkeypatch):
    monkeypatch.setenv("GEOSAMPLE_HISTORY_DIR", str(tmp_path / "history"))  # the record beside the plan alone
    out = tmp_path / "out"
    record = draw_record_path(demo_inputs)
    n0 = len(record.read_text().splitlines()) - 1 if record.exists() else 0
    assert main(["plan", str(demo_inputs), "-o", str(out), "-q"]) == 0
    assert main(["plan", str(demo_inputs), "-o", str(out), "--overwrite", "-q"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["draw_count"] == n0 + 2
    assert len(record.read_text().splitlines()) - 1 == n0 + 2
    assert not list(tmp_path.glob("*.partial")) and not list(tmp_path.glob("*.geosample-old"))


def test_failed_plan_leaves_no_output(demo_inputs, tmp_path, capsys):
    bad = tmp_path / "bad"
    shutil.copytree(demo_inputs.parent, bad)
    text = (bad / "plan.toml").read_text()
    # valid one by one, infeasible together: found only after the frame and the sites are drawn
    text = text.replace("per_day = 8", "per_day = 1").replace("end = 2027-08-31", "end = 2027-06-10")
    text = re.sub(r"(?m)^field_days.*$", "", text)
    (bad / "plan.toml").write_text(text)
    out = tmp_path / "never"
    assert main(["plan", str(bad / "plan.toml"), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "per_day" in err and "Traceback" not in err
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".never")]


def test_plan_file_errors_exit_2_without_traceback(tmp_path, capsys):
    p = tmp_path / "plan.toml"
    p.write_text("[survey]\ntitle = 'x'\ntimezone = 'UTC'\n[area]\nwater = 'w.geojson'\n[sise]\n")
    assert main(["plan", str(p), "-o", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "Did you mean 'size'" in err and "Traceback" not in err


def test_missing_layer_names_the_file(tmp_path, capsys):
    p = tmp_path / "plan.toml"
    p.write_text("[survey]\ntimezone = 'UTC'\n[area]\nwater = 'nowhere.geojson'\n[size]\ntolerance = 1\n"
                 "range = 4\n[time]\nstart = 2027-06-01\nend = 2027-06-30\n")
    assert main(["plan", str(p), "-o", str(tmp_path / "o")]) == 2
    assert "nowhere.geojson" in capsys.readouterr().err


def test_demo_is_self_contained_and_verifies(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "-q"]) == 0
    assert (out / "inputs" / "plan.toml").exists()
    for name in PACKAGE:
        assert (out / name).exists()
    moved = tmp_path / "elsewhere" / "demo"
    moved.parent.mkdir()
    shutil.move(out, moved)  # the folder alone carries what verify needs
    assert main(["verify", str(moved)]) == 0
