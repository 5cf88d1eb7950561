"""Registered draws (geosample/registration.py, `geosample register`, `plan --registration`, `verify --registration`).

The seed rule is recomputed here with hashlib (and, where present, the coreutils ``sha256sum`` tool) from the
canonical form documented in docs/registration.md and the module docstring, never by calling the code under test.
The commit-then-reveal idea (fix the rule, then combine with a public random value that did not exist yet) is
common practice for public lotteries and audits; the exact encoding is this project's own.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
import shutil
import subprocess
import unicodedata
from pathlib import Path

import pytest

import geosample.registration as registry
from geosample.cli import main
from geosample.workflow import copy_demo

PUBLIC_DATE = "2026-12-20"
VALUE = "Cafe\u0301 04 11 23 38 45 + 09"  # decomposed é: NFC must compose it
BEFORE = dt.datetime(2026, 12, 1, 12, 0, tzinfo=dt.timezone.utc)
AFTER = dt.datetime(2026, 12, 21, 9, 0, tzinfo=dt.timezone.utc)


def _clock(monkeypatch, when: dt.datetime) -> None:
    monkeypatch.setattr(registry, "utcnow", lambda: when)


def _unseeded_plan(folder: Path) -> Path:
    plan = copy_demo(folder)
    text = plan.read_text(encoding="utf-8")
    plan.write_text("\n".join(line for line in text.splitlines() if not line.strip().startswith("seed ")) + "\n",
                    encoding="utf-8")
    return plan


def _register(plan: Path, reg: Path, date: str = PUBLIC_DATE) -> int:
    return main(["register", str(plan), "-o", str(reg), "--public-source", "Invented lottery, main draw numbers",
                 "--public-date", date, "-q"])


@pytest.fixture(scope="module")
def registered(tmp_path_factory):
    """A plan registered on 1 Dec 2026 for a value of 20 Dec, drawn on 21 Dec."""
    mp = pytest.MonkeyPatch()
    try:
        root = tmp_path_factory.mktemp("registered")
        plan = _unseeded_plan(root / "in")
        reg = root / "REGISTRATION.json"
        _clock(mp, BEFORE)
        assert _register(plan, reg) == 0
        _clock(mp, AFTER)
        out = root / "design"
        assert main(["plan", str(plan), "-o", str(out), "-q", "--registration", str(reg),
                     "--public-value", VALUE, "--bundle-inputs"]) == 0
    finally:
        mp.undo()
    return {"root": root, "plan": plan, "reg": reg, "out": out}


def _expected_seed(reg: Path, value: str) -> int:
    d = hashlib.sha256(reg.read_bytes()).hexdigest()
    v = unicodedata.normalize("NFC", value).strip()
    message = b"geosample-seed/1\n" + d.encode("ascii") + b"\n" + v.encode("utf-8")
    return int.from_bytes(hashlib.sha256(message).digest(), "big")


def test_seed_is_the_documented_sha256_recomputed_with_hashlib(registered):
    manifest = json.loads((registered["out"] / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["seed"] == str(_expected_seed(registered["reg"], VALUE))
    assert manifest["seed_source"] == "registered"
    entry = manifest["registration"]
    assert entry["sha256"] == hashlib.sha256(registered["reg"].read_bytes()).hexdigest()
    assert entry["public_value"] == "Caf\u00e9 04 11 23 38 45 + 09"
    assert entry["public_date"] == PUBLIC_DATE and entry["public_source"].startswith("Invented lottery")
    # the package carries a byte copy of the registration, covered by the manifest
    assert (registered["out"] / "registration.json").read_bytes() == registered["reg"].read_bytes()
    assert "registration.json" in manifest["outputs"]


def test_seed_recomputed_with_the_sha256sum_tool(registered):
    if shutil.which("sha256sum") is None or shutil.which("printf") is None:
        pytest.skip("coreutils sha256sum not available")
    v = unicodedata.normalize("NFC", VALUE).strip()
    script = ('D=$(sha256sum "$1" | cut -c1-64); printf \'geosample-seed/1\\n%s\\n%s\' "$D" "$2" | sha256sum '
              "| cut -c1-64")
    hexseed = subprocess.run(["sh", "-c", script, "sh", str(registered["reg"]), v], capture_output=True, text=True,
                             check=True).stdout.strip()
    manifest = json.loads((registered["out"] / "manifest.json").read_text(encoding="utf-8"))
    assert int(hexseed, 16) == int(manifest["seed"])


def test_registered_draw_verifies_and_prints_the_public_value(registered, capsys):
    assert main(["verify", str(registered["out"]), "--registration", str(registered["reg"])]) == 0
    out = capsys.readouterr().out
    assert "verified" in out and "Caf\u00e9 04 11 23 38 45 + 09" in out and "Invented lottery" in out
    assert PUBLIC_DATE in out
    assert main(["verify", str(registered["out"]), "--registration", str(registered["reg"]),
                 "--public-value", " Caf\u00e9 04 11 23 38 45 + 09 ", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["verified"] is True and result["registered"] is True
    assert result["registration"]["public_value"] == "Caf\u00e9 04 11 23 38 45 + 09"


def test_report_says_the_draw_was_registered(registered):
    text = (registered["out"] / "report.html").read_text(encoding="utf-8")
    assert "This draw was registered" in text and "not registered" not in text
    assert hashlib.sha256(registered["reg"].read_bytes()).hexdigest() in text


def test_a_different_public_value_fails_verify(registered, capsys):
    assert main(["verify", str(registered["out"]), "--registration", str(registered["reg"]),
                 "--public-value", "04 11 23 38 45 + 10"]) == 1
    err = capsys.readouterr().err
    assert "NOT verified" in err and "04 11 23 38 45 + 10" in err


def test_a_draw_with_another_public_value_is_not_the_published_one(registered, tmp_path, monkeypatch, capsys):
    """The author types another value: the package is consistent, but not with the value the source published."""
    _clock(monkeypatch, AFTER)
    out = tmp_path / "other"
    assert main(["plan", str(registered["plan"]), "-o", str(out), "-q", "--registration", str(registered["reg"]),
                 "--public-value", "01 02 03 04 05 + 06"]) == 0
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["seed"] != str(_expected_seed(registered["reg"], VALUE))
    capsys.readouterr()
    assert main(["verify", str(out), "--registration", str(registered["reg"]), "--public-value", VALUE]) == 1
    assert "not the one the published value gives" in capsys.readouterr().err


def test_an_edited_manifest_seed_fails_verify(registered, tmp_path, capsys):
    forged = tmp_path / "forged"
    shutil.copytree(registered["out"], forged)
    m = json.loads((forged / "manifest.json").read_text(encoding="utf-8"))
    m["seed"] = str(int(m["seed"]) + 1)
    (forged / "manifest.json").write_text(json.dumps(m, indent=2, sort_keys=True), encoding="utf-8")
    assert main(["verify", str(forged), "--registration", str(registered["reg"])]) == 1
    err = capsys.readouterr().err
    assert "is not the one" in err


def test_an_edited_public_value_in_the_manifest_fails_verify(registered, tmp_path, capsys):
    forged = tmp_path / "forged"
    shutil.copytree(registered["out"], forged)
    m = json.loads((forged / "manifest.json").read_text(encoding="utf-8"))
    m["registration"]["public_value"] = "01 02 03 04 05 + 06"
    (forged / "manifest.json").write_text(json.dumps(m, indent=2, sort_keys=True), encoding="utf-8")
    assert main(["verify", str(forged)]) == 1
    assert "is not the one" in capsys.readouterr().err


def test_plan_changed_after_registration_is_refused_and_fails_verify(registered, tmp_path, monkeypatch, capsys):
    # The author edits the plan after registering (one setting) and tries to draw under the same registration.
    changed = tmp_path / "in"
    shutil.copytree(registered["plan"].parent, changed)
    plan = changed / "plan.toml"
    plan.write_text(plan.read_text(encoding="utf-8") + "\n# edited after registration\n", encoding="utf-8")
    _clock(monkeypatch, AFTER)
    out = tmp_path / "design"
    assert main(["plan", str(plan), "-o", str(out), "--registration", str(registered["reg"]),
                 "--public-value", VALUE]) == 2
    err = capsys.readouterr().err
    assert "not the registered one" in err and str(registered["reg"]) in err and "Traceback" not in err
    assert not out.exists()
    # ...registers the edited plan again and draws under that: the regulator's copy shows the change.
    _clock(monkeypatch, BEFORE)
    reg2 = tmp_path / "REGISTRATION-2.json"
    assert _register(plan, reg2) == 0
    _clock(monkeypatch, AFTER)
    assert main(["plan", str(plan), "-o", str(out), "-q", "--registration", str(reg2), "--public-value", VALUE]) == 0
    capsys.readouterr()
    assert main(["verify", str(out)]) == 0  # consistent with its own registration...
    assert main(["verify", str(out), "--registration", str(registered["reg"])]) == 1  # ...not with the regulator's
    err = capsys.readouterr().err
    assert "plan: the design's plan has SHA-256" in err and "not under REGISTRATION.json" in err


def test_an_input_layer_changed_after_registration_is_refused(registered, tmp_path, monkeypatch, capsys):
    changed = tmp_path / "in"
    shutil.copytree(registered["plan"].parent, changed)
    water = changed / "water.geojson"
    water.write_text(water.read_text(encoding="utf-8") + "\n", encoding="utf-8")
    _clock(monkeypatch, AFTER)
    assert main(["plan", str(changed / "plan.toml"), "-o", str(tmp_path / "o"), "--registration",
                 str(registered["reg"]), "--public-value", VALUE]) == 2
    err = capsys.readouterr().err
    assert "input water" in err and "not the registered one" in err


def test_drawing_before_the_public_date_is_refused(registered, tmp_path, monkeypatch, capsys):
    _clock(monkeypatch, dt.datetime(2026, 12, 19, 9, 59, tzinfo=dt.timezone.utc))  # 19 Dec 23:59 at UTC+14
    assert main(["plan", str(registered["plan"]), "-o", str(tmp_path / "o"), "--registration",
                 str(registered["reg"]), "--public-value", VALUE]) == 2
    err = capsys.readouterr().err
    assert "2026-12-20" in err and "has not begun anywhere" in err and str(registered["reg"]) in err
    assert not (tmp_path / "o").exists()


def test_register_json_gives_the_digest_of_the_file_written(tmp_path, monkeypatch, capsys):
    plan = _unseeded_plan(tmp_path / "in")
    _clock(monkeypatch, BEFORE)
    reg = tmp_path / "sub" / "r.json"
    assert main(["register", str(plan), "-o", str(reg), "--public-source", "Invented beacon, value at 12:00 UTC",
                 "--public-date", PUBLIC_DATE, "--json", "-q"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["sha256"] == hashlib.sha256(reg.read_bytes()).hexdigest()
    assert out["public_date"] == PUBLIC_DATE and out["plan_sha256"] == hashlib.sha256(plan.read_bytes()).hexdigest()


def test_registering_a_date_that_has_begun_is_refused(tmp_path, monkeypatch, capsys):
    plan = _unseeded_plan(tmp_path / "in")
    # 2026-12-01 12:00 UTC is 2026-12-02 02:00 at UTC+14: the 2nd has begun somewhere
    _clock(monkeypatch, BEFORE)
    for date in ("2026-11-30", "2026-12-01", "2026-12-02"):
        assert _register(plan, tmp_path / "r.json", date) == 2
        err = capsys.readouterr().err
        assert "--public-date" in err and date in err and "2026-12-03" in err
    assert not (tmp_path / "r.json").exists()
    assert _register(plan, tmp_path / "r.json", "2026-12-03") == 0


def test_a_plan_that_fixes_its_seed_is_refused(tmp_path, monkeypatch, capsys):
    plan = copy_demo(tmp_path / "in")  # the demo plan writes draw.seed
    _clock(monkeypatch, BEFORE)
    assert _register(plan, tmp_path / "r.json") == 2
    err = capsys.readouterr().err
    assert "draw.seed" in err and "Remove draw.seed" in err
    assert not (tmp_path / "r.json").exists()


def test_a_registration_is_never_replaced(registered, monkeypatch, capsys):
    before = registered["reg"].read_bytes()
    _clock(monkeypatch, BEFORE)
    assert _register(registered["plan"], registered["reg"]) == 2
    assert "exists already" in capsys.readouterr().err
    assert registered["reg"].read_bytes() == before


@pytest.mark.parametrize("content, expect", [
    (b"not json", "not JSON"),
    (b'{"format": "something-else"}', "not a registration"),
    (b'{"format": "geosample-registration/1"}', "missing or malformed"),
    (b"\xff\xfe garbage", "not JSON"),
    (b"[1, 2]", "not a registration"),
])
def test_bad_registration_files_exit_2_naming_the_file(registered, tmp_path, monkeypatch, capsys, content, expect):
    bad = tmp_path / "bad.json"
    bad.write_bytes(content)
    _clock(monkeypatch, AFTER)
    assert main(["plan", str(registered["plan"]), "-o", str(tmp_path / "o"), "--registration", str(bad),
                 "--public-value", VALUE]) == 2
    err = capsys.readouterr().err
    assert str(bad) in err and expect in err and "Fix:" in err and "Traceback" not in err
    assert main(["verify", str(registered["out"]), "--registration", str(bad)]) == 2
    err = capsys.readouterr().err
    assert str(bad) in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()


def test_a_registration_with_a_damaged_hash_names_the_entry(registered, tmp_path, capsys):
    data = json.loads(registered["reg"].read_text(encoding="utf-8"))
    data["plan"]["sha256"] = "abc"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(data), encoding="utf-8")
    assert main(["verify", str(registered["out"]), "--registration", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "plan.sha256" in err and "'abc'" in err


def test_missing_registration_and_half_pairs_exit_2(registered, tmp_path, monkeypatch, capsys):
    _clock(monkeypatch, AFTER)
    o = str(tmp_path / "o")
    assert main(["plan", str(registered["plan"]), "-o", o, "--registration", str(tmp_path / "nope.json"),
                 "--public-value", VALUE]) == 2
    assert "nope.json" in capsys.readouterr().err
    assert main(["plan", str(registered["plan"]), "-o", o, "--registration", str(registered["reg"])]) == 2
    assert "--public-value" in capsys.readouterr().err
    assert main(["plan", str(registered["plan"]), "-o", o, "--public-value", VALUE]) == 2
    assert "--registration" in capsys.readouterr().err
    assert main(["plan", str(registered["plan"]), "-o", o, "--registration", str(registered["reg"]),
                 "--public-value", "  "]) == 2
    assert "--public-value" in capsys.readouterr().err
    assert main(["plan", str(registered["plan"]), "-o", o, "--registration", str(registered["reg"]),
                 "--public-value", "1 2\n3"]) == 2
    assert "one line" in capsys.readouterr().err
    assert not Path(o).exists()


def test_verify_registration_on_an_unregistered_design_fails(registered, tmp_path, capsys):
    out = tmp_path / "plain"
    plan = copy_demo(tmp_path / "in")
    assert main(["plan", str(plan), "-o", str(out), "-q"]) == 0
    capsys.readouterr()
    assert main(["verify", str(out), "--registration", str(registered["reg"])]) == 1
    assert "this draw was not registered" in capsys.readouterr().err
    assert main(["verify", str(out)]) == 0
    assert "This draw was not registered" in capsys.readouterr().out


def test_unregistered_report_says_nothing_shows_when_the_seed_was_chosen_and_quotes_the_seed_text(tmp_path):
    plan = copy_demo(tmp_path / "in")
    text = plan.read_text(encoding="utf-8").replace("seed = 20270601", 'seed_text = "Quillmere 2027 <b>draw</b>"')
    plan.write_text(text, encoding="utf-8")
    assert main(["plan", str(plan), "-o", str(tmp_path / "o"), "-q"]) == 0
    import html

    report = html.unescape((tmp_path / "o" / "report.html").read_text(encoding="utf-8"))
    assert "This draw was not registered" in report
    assert "Nothing in this package shows that the seed was chosen before" in report
    assert "\u201cQuillmere 2027 <b>draw</b>\u201d" in report  # quoted, and escaped in the HTML


def test_the_registration_file_holds_what_the_docs_say(registered):
    data = json.loads(registered["reg"].read_text(encoding="utf-8"))
    assert data["format"] == "geosample-registration/1"
    assert data["plan"]["sha256"] == hashlib.sha256(registered["plan"].read_bytes()).hexdigest()
    for label, info in data["inputs"].items():
        path = registered["plan"].parent / info["file"]
        assert info["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest(), label
    assert data["public_value"] == {"source": "Invented lottery, main draw numbers", "date": PUBLIC_DATE}
    assert "geosample-seed/1" in data["seed_rule"]
    docs = Path(__file__).resolve().parents[1] / "docs" / "registration.md"
    assert "geosample-seed/1" in docs.read_text(encoding="utf-8")


def test_a_plan_that_cannot_be_drawn_is_refused_before_it_is_registered(tmp_path, monkeypatch, capsys):
    plan = _unseeded_plan(tmp_path / "in")
    plan.write_text(plan.read_text(encoding="utf-8") + "\n[size.strata.Nowhere]\nsd = 3\n", encoding="utf-8")
    _clock(monkeypatch, BEFORE)
    assert _register(plan, tmp_path / "r.json") == 2
    err = capsys.readouterr().err
    assert "Nowhere" in err and "Traceback" not in err
    assert not (tmp_path / "r.json").exists()


def _hand_made(tmp_path: Path, value: str = "7 8 9") -> tuple[Path, dict]:
    """A registration file and the manifest entries a registered draw would have, built by hand."""
    reg = tmp_path / "registration.json"
    data = {"format": "geosample-registration/1", "plan": {"file": "p.toml", "sha256": "1" * 64},
            "inputs": {"water": {"file": "w.geojson", "sha256": "2" * 64}}, "content_sha256": "3" * 64,
            "public_value": {"source": "Invented beacon", "date": "2027-01-02"}}
    reg.write_bytes(registry.registration_bytes(data))
    d = hashlib.sha256(reg.read_bytes()).hexdigest()
    seed = int.from_bytes(hashlib.sha256(f"geosample-seed/1\n{d}\n{value}".encode()).digest(), "big")
    manifest = {"seed": str(seed), "seed_source": "registered", "plan": {"sha256": "1" * 64},
                "inputs": {"water": {"sha256": "2" * 64}},
                "registration": {"sha256": d, "public_source": "Invented beacon", "public_date": "2027-01-02",
                                 "public_value": value, "file": "registration.json"}}
    return reg, manifest


def test_check_manifest_accepts_a_consistent_registered_manifest(tmp_path):
    reg, manifest = _hand_made(tmp_path)
    assert registry.check_manifest(tmp_path, manifest) == []
    assert registry.check_against(manifest, registry.read_registration(reg)) == []
    assert registry.check_manifest(tmp_path, {"registration": None, "seed": "5"}) == []


def test_check_manifest_names_each_forgery(tmp_path):
    reg, manifest = _hand_made(tmp_path)
    forged = json.loads(json.dumps(manifest))
    forged["inputs"]["water"]["sha256"] = "4" * 64
    assert any("input water" in d for d in registry.check_manifest(tmp_path, forged))
    forged = json.loads(json.dumps(manifest))
    forged["registration"]["public_value"] = "7 8 9\x1b[2J"
    diffs = registry.check_manifest(tmp_path, forged)
    assert diffs and not any("\x1b" in d for d in diffs)  # control characters never reach the terminal
    forged = json.loads(json.dumps(manifest))
    forged["registration"]["file"] = "../../etc/passwd"
    assert any("not a plain file name" in d for d in registry.check_manifest(tmp_path, forged))
    reg.unlink()
    assert any("registration copy" in d for d in registry.check_manifest(tmp_path, manifest))
