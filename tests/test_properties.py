"""Property-based tests (hypothesis) of the readers of user files: the plan loader, the results reader and the
manifest reader.

- Random valid plans, built key by key from the accepted values of ``geosample.plan.SCHEMA``
  and written as TOML, load; dumping the loaded settings and loading them again gives
  the same settings (round trip).
- Random invalid plans (a value of the wrong type, an unknown key, a number out of
  range, garbage text) raise a ``GeosampleError``, never another exception.
- Random CSV text given to ``geosample.results.read_results`` with a real design either
  gives a ``Results`` or raises a ``GeosampleError``, never another exception.
- Any bytes as a design folder's ``manifest.json`` (random bytes, JSON of any shape, nesting
  past the recursion limit, numbers past int's digit limit, a cut file) give a manifest
  (a dict) from ``geosample.audit.read_manifest`` or a ``GeosampleError``.

The TOML text is written with ``geosample.export.assessment.toml_dumps``; what is
checked is the loader, and the round trip also checks that writer against the
standard library's ``tomllib`` reader.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, assume, event, given, settings, strategies as st

from geosample.errors import GeosampleError
from geosample.export.assessment import toml_dumps
from geosample.plan import (ALLOCATIONS, BOUNDS, DRAW_METHODS, SCHEMA, STRATUM_KEYS, WEEKDAYS, load_plan_text)

SETTINGS = settings(max_examples=int(__import__("os").environ.get("GS_PROP_N", 60)), deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                          HealthCheck.function_scoped_fixture])
BASE = Path(tempfile.gettempdir())

# --------------------------------------------------------------------------- value strategies
names = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), min_size=1, max_size=12).filter(
    lambda s: s.strip() != "")
# stratum names as geosample.names normalises them (one line, NFC, single plain spaces, trimmed)
stratum_names = names.filter(lambda s: _is_normal_name(s))
texts = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=12)
positive = st.one_of(st.integers(1, 10**6), st.floats(1e-6, 1e6, allow_nan=False))
nonneg = st.one_of(st.integers(0, 10**6), st.floats(0, 1e6, allow_nan=False))
posint = st.integers(1, 500)  # within geosample.limits.LIMITS
dates = st.dates(dt.date(2000, 1, 1), dt.date(2099, 12, 31))
hours = st.one_of(st.integers(1, 720), st.floats(1e-3, 720, allow_nan=False))
minutes = st.one_of(st.integers(0, 1440), st.floats(0, 1440, allow_nan=False))
speeds = st.one_of(st.integers(1, 500), st.floats(0.1, 500, allow_nan=False))
ZONES = ("UTC", "America/Chicago", "Europe/Berlin", "Australia/Hobart", "Pacific/Auckland")
WINDOW_ENDS = ("sunrise", "sunrise+60", "sunset-120", "sunset", "07:00", "15:00", "noon")


def _is_normal_name(s: str) -> bool:
    from geosample.errors import SettingError
    from geosample.names import stratum_name

    try:
        return stratum_name(s) == s
    except SettingError:
        return False


def _opt(draw, strategy, p=st.booleans()):
    """A value from ``strategy``, or None (key left out) at random."""
    return draw(strategy) if draw(p) else None


@st.composite
def valid_plans(draw) -> dict:
    """A plan as a dict of sections; optional keys present or absent at random, cross-checks respected."""
    survey = {"timezone": draw(st.sampled_from(ZONES)), "title": _opt(draw, names), "parameter": _opt(draw, texts),
              "units": _opt(draw, texts), "statistic": _opt(draw, st.sampled_from(("mean", "geomean"))),
              "criterion": _opt(draw, st.floats(-1e6, 1e6, allow_nan=False)),
              "direction": _opt(draw, st.sampled_from(("below", "above")))}
    area = {"water": draw(names), "water_layer": _opt(draw, names), "name_field": _opt(draw, names),
            "crs": _opt(draw, st.sampled_from(("EPSG:4326", "EPSG:32616"))),
            "exclude": _opt(draw, st.one_of(names, st.lists(names, max_size=3))),
            "access_snap_m": _opt(draw, nonneg)}
    if draw(st.booleans()):
        area["access"] = draw(names)
        area["reach_m"] = _opt(draw, positive)
    if draw(st.booleans()):
        lo, hi = sorted(draw(st.lists(nonneg, min_size=2, max_size=2)))
        area["shore_m"] = [lo, hi]
    strata = draw(st.sampled_from(("none", "layer", "shore-bands", "zones")))
    if strata == "layer":
        area.update(strata=draw(names.filter(lambda s: s not in ("shore-bands", "zones"))),
                    strata_field=draw(names), strata_layer=_opt(draw, names))
    elif strata == "shore-bands":
        area.update(strata="shore-bands", bands_m=draw(st.lists(nonneg, min_size=1, max_size=4)))
    elif strata == "zones":
        area.update(strata="zones", zones=draw(posint))
    area["remainder"] = _opt(draw, stratum_names)
    bound = draw(st.sampled_from(BOUNDS))
    statistic = survey["statistic"] or "mean"
    scale = positive if statistic == "mean" else st.floats(1e-3, 10, allow_nan=False)
    # the tolerance is at most the range, and at least range / 1e9 and sd / 1e9 (geosample.limits)
    tol = draw(scale)
    rng_ = draw(scale.filter(lambda v: tol <= v <= 1e9 * tol))
    sd = draw(scale.filter(lambda v: v <= 1e9 * tol))
    if statistic == "geomean" and survey["criterion"] is not None:
        survey["criterion"] = abs(survey["criterion"]) + 1
    size = {"tolerance": tol, "range": rng_, "sd": sd,
            "confidence": _opt(draw, st.floats(0.01, 0.999)), "bound": bound,
            "sides": "one" if bound == "cantelli" else _opt(draw, st.sampled_from(("two", "one"))),
            "allocation": _opt(draw, st.sampled_from(ALLOCATIONS)), "min_per_stratum": _opt(draw, posint),
            "n": _opt(draw, posint),
            "strata": draw(st.dictionaries(stratum_names, st.fixed_dictionaries(
                {}, optional={k: (positive if k == "cost" else scale) for k in STRATUM_KEYS}), max_size=2).filter(
                lambda d: len({k.casefold() for k in d}) == len(d)))}
    drawn = {"method": _opt(draw, st.sampled_from(DRAW_METHODS)), "reserve": _opt(draw, st.floats(0, 10)),
             "spacing_m": _opt(draw, positive)}
    seed_kind = draw(st.sampled_from(("none", "seed", "text")))
    if seed_kind == "seed":
        drawn["seed"] = draw(st.integers(0, 2**63))
    elif seed_kind == "text":
        drawn["seed_text"] = draw(names)
    start = draw(dates)
    end = start + dt.timedelta(days=draw(st.integers(0, 1829)))
    time = {"start": start, "end": end,
            "days": _opt(draw, st.lists(st.sampled_from(WEEKDAYS), min_size=1, max_size=7)),
            "skip": _opt(draw, st.lists(dates, max_size=3)),
            "window": _opt(draw, st.lists(st.sampled_from(WINDOW_ENDS), min_size=2, max_size=2)),
            "temporal": _opt(draw, st.sampled_from(("week", "month", "season"))),
            "per_day": _opt(draw, posint), "field_days": _opt(draw, posint), "speed_kmh": _opt(draw, speeds),
            "minutes_on_site": _opt(draw, minutes), "holding_h": _opt(draw, hours),
            "lab_minutes": _opt(draw, minutes)}
    plan = {"survey": survey, "area": area, "size": size, "draw": drawn, "time": time}
    return {s: {k: v for k, v in d.items() if v is not None} for s, d in plan.items()}


def _load(raw: dict) -> dict:
    return load_plan_text(toml_dumps(raw), base_dir=BASE).settings


@SETTINGS
@given(valid_plans())
def test_valid_plans_load_and_round_trip(raw):
    first = _load(raw)
    for section, keys in raw.items():
        for key, value in keys.items():
            got = first[section][key]
            if key == "days":
                value = [d[:3] for d in value]
            elif key == "exclude" and isinstance(value, str):
                value = [value]
            assert got == value, (section, key)
    assert _load(first) == first


# --------------------------------------------------------------------------- invalid plans
KEYS = [(s, k) for s, keys in SCHEMA.items() for k in keys]
anything = st.one_of(
    st.none(), st.booleans(), st.integers(-10**20, 10**20), st.floats(), texts, dates,
    st.datetimes(dt.datetime(2000, 1, 1), dt.datetime(2099, 1, 1)),
    st.lists(st.one_of(st.integers(-5, 5), texts, dates, st.floats()), max_size=4),
    st.dictionaries(names, st.one_of(st.integers(-5, 5), texts), max_size=2),
)


@SETTINGS
@given(valid_plans(), st.sampled_from(KEYS), anything)
def test_a_value_the_schema_refuses_raises_a_geosample_error(raw, where, value):
    section, key = where
    assume(value is not None and not SCHEMA[section][key].check(value))
    raw.setdefault(section, {})[key] = value
    with pytest.raises(GeosampleError):
        _load(raw)


@SETTINGS
@given(valid_plans(), st.sampled_from(list(SCHEMA) + ["extra"]), names, anything)
def test_an_unknown_key_raises_a_geosample_error(raw, section, key, value):
    assume(value is not None and key not in SCHEMA.get(section, {}))
    raw.setdefault(section, {})[key] = value
    with pytest.raises(GeosampleError):
        _load(raw)


@SETTINGS
@given(valid_plans(), st.sampled_from([("size", "confidence"), ("size", "tolerance"), ("size", "range"),
                                       ("draw", "reserve"), ("time", "per_day"), ("draw", "seed"),
                                       ("area", "reach_m"), ("time", "holding_h")]),
       st.one_of(st.floats(-1e9, 0, exclude_max=False), st.integers(-10**9, 0), st.sampled_from((1.0, 1.5, 99))))
def test_out_of_range_numbers_raise_a_geosample_error(raw, where, value):
    section, key = where
    assume(not SCHEMA[section][key].check(value))
    raw.setdefault(section, {})[key] = value
    with pytest.raises(GeosampleError):
        _load(raw)


@SETTINGS
@given(valid_plans(), st.integers(0, 10**6), st.text(max_size=20))
def test_garbage_in_the_text_gives_a_plan_or_a_geosample_error(raw, where, junk):
    text = toml_dumps(raw)
    i = where % (len(text) + 1)
    try:
        load_plan_text(text[:i] + junk + text[i:], base_dir=BASE)
    except GeosampleError:
        pass


@SETTINGS
@given(st.text(max_size=200))
def test_random_text_gives_a_plan_or_a_geosample_error(text):
    try:
        load_plan_text(text, base_dir=BASE)
    except GeosampleError:
        pass


# --------------------------------------------------------------------------- results reader
@pytest.fixture(scope="module")
def design(tmp_path_factory):
    from geosample.cli import main
    from geosample.results import read_design_folder
    from geosample.workflow import copy_demo

    base = tmp_path_factory.mktemp("props")
    plan = copy_demo(base / "inputs")
    out = base / "design"
    assert main(["plan", str(plan), "-o", str(out), "-q"]) == 0
    return read_design_folder(out)


COLUMNS = ("site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "day", "day_inclusion_p", "route_order", "lat",
           "lon", "x", "y", "result", "qualifier", "sampled_at", "sampler", "notes")
result_cells = st.one_of(
    st.integers(-5, 10**5).map(str), st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(("<10", ">2419.6", "ND", "", "NA", "-", "<", ">", "<=1", "≥5", "12,5", "1e400", "0x1f", "nan",
                     "TNTC", " 7 ", "'=1+1")),
    st.text(max_size=8),
)
time_cells = st.one_of(st.just(""), st.sampled_from(("6/2/27 8:06", "46541.34", "09:40", "2027-06-03T09:40-05:00",
                                                     "2027-06-03 25:00", "9:5")), st.text(max_size=10))
other_cells = st.one_of(st.just(""), st.text(max_size=8), st.integers(-3, 30).map(str))


@st.composite
def results_files(draw, schedule_rows):
    tidy = draw(st.booleans())  # half the files are close to what a crew returns: every column, known ids
    if tidy:
        cols = draw(st.permutations(COLUMNS))
    else:
        cols = draw(st.lists(st.sampled_from(COLUMNS + ("extra", "Result ", "SITE ID")), unique=True, max_size=10))
        if draw(st.booleans()):
            cols = draw(st.permutations(sorted(set(cols) | {"site_id", "result"})))
    ids = [r["site_id"] for r in schedule_rows]
    rows = []
    for i in range(draw(st.integers(0, 12))):
        row = []
        for c in cols:
            if c == "site_id":
                row.append(ids[i] if tidy else draw(st.one_of(st.sampled_from(ids), st.text(max_size=6))))
            elif c in ("result", "Result "):
                numeric = st.floats(0, 1000, allow_nan=False).map(lambda v: f"{v:.1f}")
                row.append(draw(st.one_of(numeric, numeric, result_cells) if tidy else result_cells))
            elif c == "sampled_at":
                row.append(draw(time_cells))
            else:
                row.append(draw(other_cells))
        if draw(st.integers(0, 9)) == 0:
            row = row[: draw(st.integers(0, len(row)))]  # a short row
        rows.append(row)
    delim = draw(st.sampled_from((",", ";", "\t", "|")))
    out = io.StringIO()
    w = csv.writer(out, delimiter=delim, lineterminator=draw(st.sampled_from(("\n", "\r\n"))))
    w.writerow(cols)
    w.writerows(rows)
    text = out.getvalue()
    enc = draw(st.sampled_from(("utf-8", "utf-8-sig", "cp1252", "utf-16", "latin-1")))
    return text.encode(enc, errors="replace"), draw(st.booleans())


@settings(max_examples=int(__import__("os").environ.get("GS_PROP_N", 80)), deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_results_reader_gives_results_or_a_geosample_error(design, data):
    from geosample.results import Results, read_results

    manifest, rows = design
    content, strict = data.draw(results_files(rows))
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "results.csv"
        path.write_bytes(content)
        try:
            res = read_results(path, manifest, rows, strict=strict)
        except GeosampleError as exc:
            event(f"refused: {type(exc).__name__}")
            return
    event("read")
    assert isinstance(res, Results)
    assert any(r.used for r in res.records)


# --------------------------------------------------------------------------- manifest reader
def _manifest_bytes():
    """Any bytes, JSON of any shape, deeply nested JSON, huge numbers, and a real manifest cut anywhere."""
    json_values = st.recursive(st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), texts),
                               lambda inner: st.one_of(st.lists(inner, max_size=3),
                                                       st.dictionaries(texts, inner, max_size=3)), max_leaves=10)
    return st.one_of(
        st.binary(max_size=300),
        json_values.map(lambda v: __import__("json").dumps(v).encode()),
        st.integers(1, 100_000).map(lambda k: b"[" * k + b"]" * k),  # nesting past the recursion limit
        st.integers(4400, 6000).map(lambda k: b'{"seed": ' + b"9" * k + b"}"),  # past int's digit limit
        st.sampled_from((b"\xef\xbb\xbf{}", b"\xff\xfe{\x00}\x00", b"NaN", b'{"a": Infinity}', b"")),
    )


@settings(max_examples=int(__import__("os").environ.get("GS_PROP_N", 80)), deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(_manifest_bytes(), st.booleans())
def test_manifest_reader_gives_a_manifest_or_a_geosample_error(content, cut):
    from geosample.audit import MANIFEST, read_manifest

    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / MANIFEST).write_bytes(content[: len(content) // 2] if cut else content)
        try:
            manifest = read_manifest(tmp)
        except GeosampleError as exc:
            event(f"refused: {type(exc).__name__}")
            return
    event("read")
    assert isinstance(manifest, dict)


def test_a_manifest_that_is_a_folder_is_a_geosample_error(tmp_path):
    from geosample.audit import MANIFEST, read_manifest

    (tmp_path / MANIFEST).mkdir()
    with pytest.raises(GeosampleError):
        read_manifest(tmp_path)
