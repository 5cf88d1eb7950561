"""Forged and damaged design folders (geosample/verifier.py): verify exits 1 naming what differs, or 2
with a message when the folder cannot be checked; never a traceback, never a read outside the folder.

The cases are those of issue 11 ("verify passes forged packages", "verify follows absolute and ../
paths ... hangs forever on /dev/zero", "settings.size.n = 2e6 runs for minutes", "terminal escape
sequences in a forged site id", "ten malformed manifests give tracebacks") and more of our own. The
expectation in each is the product contract (DESIGN.md: "every file is listed in the manifest";
verify "exit 0 only if every site and time is identical and no output was altered").
"""
from __future__ import annotations

import csv
import hashlib
import json
import os
import re
import shutil
from pathlib import Path

import pytest

from geosample.cli import main


@pytest.fixture(scope="module")
def original(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("forgery") / "design"
    assert main(["demo", "-o", str(out), "-q"]) == 0
    return out


@pytest.fixture()
def pkg(original, tmp_path) -> Path:
    """A fresh copy of the untouched design to forge."""
    copy = tmp_path / "pkg"
    shutil.copytree(original, copy, symlinks=True)
    return copy


def _manifest(folder: Path) -> dict:
    return json.loads((folder / "manifest.json").read_text(encoding="utf-8"))


def _write_manifest(folder: Path, m: dict) -> None:
    (folder / "manifest.json").write_text(json.dumps(m, indent=2, sort_keys=True), encoding="utf-8")


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _verify(folder: Path, capsys, code: int, *needles: str) -> str:
    rc = main(["verify", str(folder)])
    cap = capsys.readouterr()
    text = cap.out + cap.err
    assert rc == code, text
    assert "Traceback" not in text
    for n in needles:
        assert n in text, (n, text)
    return text


def _rows(folder: Path) -> list[dict]:
    with open(folder / "schedule.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _write_rows(path: Path, rows: list[dict]) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]), lineterminator="\n")
        w.writeheader()
        w.writerows(rows)


# --------------------------------------------------------------------------- untouched
def test_an_untouched_package_verifies_wherever_it_is_copied(original, tmp_path, capsys):
    for where in (tmp_path / "a", tmp_path / "deep" / "er" / "b", tmp_path / "with space é"):
        shutil.copytree(original, where)
        _verify(where, capsys, 0, "verified", "nothing else")


# --------------------------------------------------------------------------- extra files
def test_an_extra_schedule_with_a_moved_site_fails_naming_it(pkg, capsys):
    rows = _rows(pkg)
    rows[0]["lat"] = str(float(rows[0]["lat"]) + 0.01)
    _write_rows(pkg / "schedule_FINAL.csv", rows)
    (pkg / "README.txt").write_text("Crew: use schedule_FINAL.csv, not schedule.csv.\n")
    _verify(pkg, capsys, 1, "schedule_FINAL.csv", "README.txt", "not in the manifest")


def test_an_extra_file_listed_in_the_manifest_with_its_hash_fails(pkg, capsys):
    rows = _rows(pkg)
    rows[0]["lat"] = str(float(rows[0]["lat"]) + 0.01)
    _write_rows(pkg / "schedule_FINAL.csv", rows)
    m = _manifest(pkg)
    m["outputs"]["schedule_FINAL.csv"] = _sha(pkg / "schedule_FINAL.csv")
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "outputs.schedule_FINAL.csv", "not part of the re-derived design")


def test_an_empty_folder_or_a_link_in_the_package_fails(pkg, tmp_path, capsys):
    (pkg / "photos").mkdir()
    (pkg / "elsewhere").symlink_to(tmp_path)
    _verify(pkg, capsys, 1, "photos/", "elsewhere")


def test_an_assessment_written_later_is_allowed_and_said_to_be_unchecked(pkg, capsys):
    (pkg / "assessment.html").write_text("<p>assessment</p>")
    _verify(pkg, capsys, 0, "assessment.html", "not checked")


# --------------------------------------------------------------------------- plan and inputs
def test_an_edited_bundled_plan_fails(pkg, capsys):
    plan = pkg / "inputs" / "plan.toml"
    plan.write_text(plan.read_text().replace("tolerance = 16", "tolerance = 25"))
    _verify(pkg, capsys, 1, "inputs/plan.toml", "altered after the design was written")


def test_an_edited_plan_with_its_new_hash_in_the_manifest_fails(pkg, capsys):
    plan = pkg / "inputs" / "plan.toml"
    text = plan.read_text()
    assert "tolerance = 16" in text
    plan.write_text(text.replace("tolerance = 16", "tolerance = 25"))
    m = _manifest(pkg)
    m["plan"]["sha256"] = _sha(plan)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "settings.size.tolerance")


def test_an_edited_side_layer_fails(pkg, capsys):
    p = pkg / "inputs" / "closed.geojson"
    p.write_text(p.read_text() + "\n")  # one byte more: the same shapes, another file
    _verify(pkg, capsys, 1, "inputs/closed.geojson")


# --------------------------------------------------------------------------- manifest figures
@pytest.mark.parametrize("key, edit", [
    ("allocation.achieved_tolerance", lambda m: m["allocation"].__setitem__("achieved_tolerance", 9.5)),
    ("frame.area_m2", lambda m: m["frame"].__setitem__("area_m2", m["frame"]["area_m2"] * 1.2)),
    ("frame.removed", lambda m: m["frame"]["removed"].pop()),
    ("crs.reason", lambda m: m["crs"].__setitem__("reason", "chosen by the regulator")),
    ("allocation.n", lambda m: m["allocation"]["n"].__setitem__(0, 40)),
    ("settings.size.confidence", lambda m: m["settings"]["size"].__setitem__("confidence", 0.99)),
    ("sites_sha256", lambda m: m.__setitem__("sites_sha256", "0" * 64)),
    ("frame.strata[0].weight", lambda m: m["frame"]["strata"][0].__setitem__("weight", 0.5)),
    ("frame.warnings", lambda m: m["frame"]["warnings"].append("all clear")),
    ("a_new_key", lambda m: m.__setitem__("a_new_key", {"claim": "approved"})),
    ("draw.method", lambda m: m["draw"].pop("method")),
])
def test_a_figure_edited_in_the_manifest_fails_naming_it(pkg, capsys, key, edit):
    m = _manifest(pkg)
    edit(m)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, f"manifest {key}")


def test_a_removed_output_entry_and_that_output_edited_fails(pkg, capsys):
    m = _manifest(pkg)
    del m["outputs"]["report.html"]
    _write_manifest(pkg, m)
    with open(pkg / "report.html", "a", encoding="utf-8") as fh:
        fh.write("<p>Approved by the regulator.</p>")
    _verify(pkg, capsys, 1, "report.html")


def test_an_edited_output_with_its_new_hash_in_the_manifest_fails(pkg, capsys):
    with open(pkg / "sites.gpx", "a", encoding="utf-8") as fh:
        fh.write("<!-- moved -->")
    m = _manifest(pkg)
    m["outputs"]["sites.gpx"] = _sha(pkg / "sites.gpx")
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "output sites.gpx as re-derived differs")


def test_a_lowered_draw_count_fails(pkg, capsys):
    """draw_count is given, not re-derived, but the report quotes it: its re-rendering differs."""
    m = _manifest(pkg)
    m["draw_count"] = m["draw_count"] + 4
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "report.html")


def test_another_seed_fails(pkg, capsys):
    m = _manifest(pkg)
    m["seed"] = str(int(m["seed"]) + 1)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "sites_sha256")


def test_edited_library_versions_are_reported_not_silently_accepted(pkg, capsys):
    m = _manifest(pkg)
    m["libraries"]["numpy"] = "0.0.1"
    m["geosample_version"] = "99.0"
    _write_manifest(pkg, m)
    text = _verify(pkg, capsys, 0, "made with other library versions", "numpy 0.0.1 in the manifest",
                   "geosample 99.0 in the manifest")
    rc = main(["verify", str(pkg), "--json"])
    data = json.loads(capsys.readouterr().out)
    assert rc == 0 and any("numpy" in v for v in data["other_library_versions"]), text


def test_a_moved_site_in_the_schedule_fails(pkg, capsys):
    rows = _rows(pkg)
    rows[3]["lon"] = str(float(rows[3]["lon"]) + 0.001)
    _write_rows(pkg / "schedule.csv", rows)
    _verify(pkg, capsys, 1, f"site {rows[3]['site_id']}: lon moved", "schedule.csv was altered")


# --------------------------------------------------------------------------- outside the folder
@pytest.mark.parametrize("path", ["/etc/hostname", "../outside.geojson", "inputs/../../outside.geojson",
                                  "C:/Windows/win.ini", "inputs\\..\\..\\x"])
def test_paths_outside_the_folder_are_never_read(pkg, capsys, monkeypatch, path):
    (pkg.parent / "outside.geojson").write_text("{}")
    opened = []
    real_open = open

    def spy(file, *a, **k):
        opened.append(str(file))
        return real_open(file, *a, **k)

    m = _manifest(pkg)
    m["inputs"]["water"]["path"] = path
    _write_manifest(pkg, m)
    monkeypatch.setattr("builtins.open", spy)
    _verify(pkg, capsys, 1, "outside the design folder")
    assert not any("outside.geojson" in f or "hostname" in f for f in opened), opened


def test_a_link_out_of_the_folder_is_not_followed(pkg, tmp_path, capsys):
    target = tmp_path / "elsewhere.geojson"
    shutil.copy(pkg / "inputs" / "water.geojson", target)
    (pkg / "inputs" / "water.geojson").unlink()
    (pkg / "inputs" / "water.geojson").symlink_to(target)
    _verify(pkg, capsys, 1, "inputs/water.geojson", "not a regular file")


@pytest.mark.parametrize("name", ["schedule.csv", "inputs/water.geojson", "report.html"])
def test_a_device_in_place_of_a_file_is_refused_without_reading_it(pkg, capsys, name):
    (pkg / name).unlink()
    (pkg / name).symlink_to("/dev/zero")
    _verify(pkg, capsys, 1, name, "not a regular file")


def test_a_fifo_in_the_folder_is_named_and_never_opened(pkg, capsys):
    if not hasattr(os, "mkfifo"):
        pytest.skip("no FIFOs on this system")
    os.mkfifo(pkg / "pipe")  # opening it for reading would block forever
    (pkg / "schedule.csv").unlink()
    os.mkfifo(pkg / "schedule.csv")
    _verify(pkg, capsys, 1, "pipe", "schedule.csv", "not a regular file")


def test_a_manifest_that_is_a_device_is_refused(pkg, capsys):
    (pkg / "manifest.json").unlink()
    (pkg / "manifest.json").symlink_to("/dev/zero")
    _verify(pkg, capsys, 2, "not a regular file")


# --------------------------------------------------------------------------- bounded work
def test_a_crafted_huge_sample_is_refused_before_the_rerun(pkg, capsys, monkeypatch):
    def no_rerun(*a, **k):
        raise AssertionError("the design was re-run")

    monkeypatch.setattr("geosample.design.make_design", no_rerun)
    plan = pkg / "inputs" / "plan.toml"
    text = plan.read_text()
    text = re.sub(r"(?m)^tolerance = .*$", "tolerance = 16\nn = 50000", text, count=1)
    plan.write_text(text)
    m = _manifest(pkg)
    m["plan"]["sha256"] = _sha(plan)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 2, "size.n", "beyond what verify re-runs")


def test_a_crafted_huge_sample_in_the_manifest_settings_is_refused(pkg, capsys, monkeypatch):
    """With the bundled plan gone, the settings come from the manifest: still bounded first (the plan file
    itself accepts up to 100 000, geosample/limits.py; verify re-runs at most LIMITS["primary sites"])."""
    def no_rerun(*a, **k):
        raise AssertionError("the design was re-run")

    monkeypatch.setattr("geosample.design.make_design", no_rerun)
    m = _manifest(pkg)
    m["settings"]["size"]["n"] = 50000
    m["plan"]["path"] = None
    (pkg / "inputs" / "plan.toml").unlink()
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 2, "size.n", "beyond what verify re-runs")


# --------------------------------------------------------------------------- untrusted text
def test_terminal_escapes_in_a_forged_site_id_are_printed_escaped(pkg, capsys):
    rows = _rows(pkg)
    rows[0]["site_id"] = "NB-01\x1b[2J\x1b]0;owned\x07\u202e"
    _write_rows(pkg / "schedule.csv", rows)
    (pkg / "bad\x1b[31mname.txt").write_text("x")
    text = _verify(pkg, capsys, 1, "NB-01\\x1b[2J", "\\u202e", "bad\\x1b[31mname.txt")
    assert "\x1b" not in text and "\x07" not in text and "\u202e" not in text


# --------------------------------------------------------------------------- malformed manifests
MALFORMED = {
    "not json": "{this is not json",
    "a list": "[1, 2, 3]",
    "a number": "42",
    "empty object": "{}",
    "NaN constant": '{"format": NaN}',
    "deeply nested": "[" * 100000 + "]" * 100000,
    "latin-1 bytes": b'{"format": "geosample-manifest/1", "x": "\xe9"}',
}


def _malformed_edits():
    yield "no format", lambda m: m.pop("format")
    yield "other format", lambda m: m.__setitem__("format", "something-else/2")
    yield "settings a list", lambda m: m.__setitem__("settings", [])
    yield "seed letters", lambda m: m.__setitem__("seed", "abc")
    yield "seed negative", lambda m: m.__setitem__("seed", -5)
    yield "seed huge", lambda m: m.__setitem__("seed", "9" * 500)
    yield "draw_count text", lambda m: m.__setitem__("draw_count", "one")
    yield "draw_count zero", lambda m: m.__setitem__("draw_count", 0)
    yield "inputs a list", lambda m: m.__setitem__("inputs", ["water.geojson"])
    yield "input without sha", lambda m: m["inputs"]["water"].pop("sha256")
    yield "input sha not hex", lambda m: m["inputs"]["water"].__setitem__("sha256", "zz")
    yield "input path a number", lambda m: m["inputs"]["water"].__setitem__("path", 5)
    yield "outputs empty", lambda m: m.__setitem__("outputs", {})
    yield "outputs a list", lambda m: m.__setitem__("outputs", ["map.html"])
    yield "output hash null", lambda m: m["outputs"].__setitem__("map.html", None)
    yield "plan a text", lambda m: m.__setitem__("plan", "plan.toml")
    yield "libraries a list", lambda m: m.__setitem__("libraries", ["numpy"])
    yield "library version a number", lambda m: m["libraries"].__setitem__("numpy", 2)
    yield "no sites digest", lambda m: m.pop("sites_sha256")


@pytest.mark.parametrize("case", sorted(MALFORMED))
def test_a_malformed_manifest_file_exits_2_with_a_message(pkg, capsys, case):
    data = MALFORMED[case]
    (pkg / "manifest.json").write_bytes(data if isinstance(data, bytes) else data.encode())
    _verify(pkg, capsys, 2, "manifest.json")


@pytest.mark.parametrize("case, edit", list(_malformed_edits()), ids=[c for c, _ in _malformed_edits()])
def test_a_manifest_with_a_wrong_key_exits_2_naming_it(pkg, capsys, case, edit):
    m = _manifest(pkg)
    edit(m)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 2, "manifest.json")


@pytest.mark.parametrize("edit", [
    lambda m: m["settings"].__setitem__("size", "big"),
    lambda m: m["settings"]["time"].__setitem__("start", "the first of June"),
    lambda m: m["settings"].__setitem__("unknown_section", {"a": 1}),
    lambda m: m["settings"]["size"].__setitem__("confidence", 7),
])
def test_malformed_settings_without_the_plan_exit_2(pkg, capsys, edit):
    m = _manifest(pkg)
    m["plan"]["path"] = None
    (pkg / "inputs" / "plan.toml").unlink()
    edit(m)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 2)


def test_a_folder_that_is_not_a_design_exits_2(tmp_path, capsys):
    _verify(tmp_path, capsys, 2, "manifest.json")
    _verify(tmp_path / "missing", capsys, 2, "does not exist")
    (tmp_path / "file").write_text("x")
    _verify(tmp_path / "file", capsys, 2)


# --------------------------------------------------------------------------- not bundled
def test_a_design_without_bundled_inputs_needs_their_folder(original, tmp_path, capsys):
    src = tmp_path / "src"
    shutil.copytree(original / "inputs", src)
    out = tmp_path / "out"
    assert main(["plan", str(src / "plan.toml"), "-o", str(out), "--no-bundle-inputs", "-q"]) == 0
    capsys.readouterr()
    _verify(out, capsys, 2, "--no-bundle-inputs", "--inputs")
    assert main(["verify", str(out), "--inputs", str(src)]) == 0
    capsys.readouterr()
    (src / "closed.geojson").write_text((src / "closed.geojson").read_text() + " ")
    assert main(["verify", str(out), "--inputs", str(src)]) == 1
    assert "exclude[0]" in capsys.readouterr().err


# --------------------------------------------------------------------------- rendered with another version
class _Renderer:
    """Stands in for a map renderer whose bytes depend on its version (as folium's did): the page carries
    the design block (`geosample-design`, the form export/map.py uses) and a line naming the version."""

    version = "0.0.1"

    def __init__(self, real):
        self.real = real

    def __call__(self, design, path, **kw):
        path = self.real(design, path, **kw)
        block = {"sites": [[s.site_id, s.role, round(s.x, 3), round(s.y, 3)] for s in design.draw.sites]}
        text = path.read_text(encoding="utf-8")
        text = re.sub(r'<script type="application/json" id="geosample-design">.*?</script>', "", text, flags=re.S)
        text += (f'<script type="application/json" id="geosample-design">{json.dumps(block, sort_keys=True)}'
                 f"</script>\n<!-- drawn by renderer {self.version} -->\n")
        path.write_text(text, encoding="utf-8")
        return path


@pytest.fixture()
def other_version(original, tmp_path, monkeypatch):
    """A design whose map was rendered with folium '0.0.1' (versions and bytes), verified here."""
    import geosample.audit as audit
    import geosample.export.map as map_module

    renderer = _Renderer(map_module.write_map)
    monkeypatch.setattr(map_module, "write_map", renderer)
    real_versions = audit.library_versions
    src = tmp_path / "src"
    shutil.copytree(original / "inputs", src)
    out = tmp_path / "made-elsewhere"
    with monkeypatch.context() as m:
        m.setattr(audit, "library_versions", lambda: {**real_versions(), "folium": "0.0.1"})
        assert main(["plan", str(src / "plan.toml"), "-o", str(out), "-q"]) == 0
    renderer.version = "here"  # this environment draws the same design into other bytes
    return out


def test_the_same_design_rendered_with_another_library_version_is_said_so(other_version, capsys):
    text = _verify(other_version, capsys, 0, "map.html: same design, rendered with another library version",
                   "folium 0.0.1 in the manifest")
    assert "NOT verified" not in text


def test_a_map_with_another_site_is_not_excused_by_another_library_version(other_version, capsys):
    page = other_version / "map.html"
    text = page.read_text(encoding="utf-8")
    block = json.loads(re.search(r'id="geosample-design">(.*?)</script>', text, re.S).group(1))
    block["sites"][0][2] += 250.0
    text = re.sub(r'(id="geosample-design">).*?(</script>)', lambda m: m.group(1) + json.dumps(block, sort_keys=True)
                  + m.group(2), text, flags=re.S)
    page.write_text(text, encoding="utf-8")
    m = _manifest(other_version)
    m["outputs"]["map.html"] = _sha(page)
    _write_manifest(other_version, m)
    _verify(other_version, capsys, 1, "output map.html as re-derived differs")


def test_a_map_edited_under_the_same_library_versions_fails(pkg, capsys):
    page = pkg / "map.html"
    page.write_text(page.read_text(encoding="utf-8") + "<!-- edited -->\n", encoding="utf-8")
    m = _manifest(pkg)
    m["outputs"]["map.html"] = _sha(page)
    _write_manifest(pkg, m)
    _verify(pkg, capsys, 1, "output map.html as re-derived differs")
