"""Property tests of the registration reader, the public value and the verify-time checks (hypothesis).

Whatever bytes a registration file holds, reading it gives a Registration or a GeosampleError (exit 2), never
another exception; whatever a (forged) manifest holds, the checks return a list of differences and print no
control character. The seed rule's value is checked against hashlib in tests/test_registration.py.
"""
from __future__ import annotations

import hashlib
import json
import os
import tempfile
import unicodedata
from pathlib import Path

from hypothesis import HealthCheck, given, settings, strategies as st

from geosample import history, registration as registry
from geosample.errors import GeosampleError

SETTINGS = settings(max_examples=int(os.environ.get("GS_PROP_N", 60)), deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])

json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | st.text(max_size=70),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=12), inner, max_size=5),
    max_leaves=20)
HEX = st.text(alphabet="0123456789abcdef", min_size=64, max_size=64)
registrations = st.fixed_dictionaries({
    "format": st.sampled_from([registry.FORMAT, "x", 1]),
    "plan": st.one_of(json_values, st.fixed_dictionaries({"sha256": st.one_of(HEX, st.text(max_size=70))})),
    "inputs": st.one_of(json_values, st.dictionaries(st.text(max_size=8), st.fixed_dictionaries({"sha256": HEX}),
                                                     max_size=3)),
    "content_sha256": st.one_of(HEX, json_values),
    "public_value": st.one_of(json_values, st.fixed_dictionaries({"source": st.text(max_size=30),
                                                                  "date": st.one_of(st.dates().map(str),
                                                                                    st.text(max_size=12))})),
})


def _read(data: bytes):
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "r.json"
        path.write_bytes(data)
        try:
            return registry.read_registration(path)
        except GeosampleError as exc:
            assert "r.json" in str(exc)
            return None


@SETTINGS
@given(st.binary(max_size=400))
def test_any_bytes_give_a_registration_or_a_geosample_error(data):
    _read(data)


@SETTINGS
@given(registrations)
def test_any_json_registration_gives_a_registration_or_a_geosample_error(data):
    reg = _read(json.dumps(data).encode("utf-8"))
    if reg is not None:
        assert reg.sha256 == hashlib.sha256(json.dumps(data).encode("utf-8")).hexdigest()


@SETTINGS
@given(st.text(max_size=60))
def test_public_value_is_nfc_one_line_or_refused(text):
    try:
        v = registry.public_value(text)
    except GeosampleError:
        return
    assert v == unicodedata.normalize("NFC", v) and v == v.strip() and v
    assert not any(unicodedata.category(c) in ("Cc", "Cf", "Zl", "Zp") for c in v)


@SETTINGS
@given(st.dictionaries(st.sampled_from(["seed", "seed_source", "registration", "history", "plan", "inputs",
                                        "settings", "draw_count"]), json_values, max_size=8),
       st.one_of(st.none(), st.text(max_size=300),
                 st.lists(st.lists(st.text(max_size=20), min_size=11, max_size=11), max_size=3).map(
                     lambda rows: "\n".join([",".join(history.FIELDS)] + [",".join(r) for r in rows]))))
def test_checks_of_a_forged_manifest_return_differences_and_never_raise(manifest, draws_csv):
    if isinstance(manifest.get("history"), dict):
        manifest["history"]["file"] = "draws.csv"
    with tempfile.TemporaryDirectory() as tmp:
        if draws_csv is not None:
            (Path(tmp) / "draws.csv").write_text(draws_csv, encoding="utf-8")
        reg = Path(tmp) / "regulator.json"
        reg.write_bytes(registry.registration_bytes({
            "format": registry.FORMAT, "plan": {"sha256": "1" * 64}, "inputs": {"water": {"sha256": "2" * 64}},
            "content_sha256": "3" * 64, "public_value": {"source": "Invented beacon", "date": "2027-01-02"}}))
        for diffs in (registry.check_manifest(tmp, manifest), history.check_package(tmp, manifest),
                      registry.check_against(manifest, registry.read_registration(reg))):
            assert isinstance(diffs, list)
            for d in diffs:
                assert not any(unicodedata.category(c) == "Cc" for c in d), d
