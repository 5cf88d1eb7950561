"""Reading the crew's results (geosample/results.py) against a synthetic design folder.

The design folder is written here from the pinned formats (DEVELOPERS.md, "schedule.csv and
manifest.json"), so these tests do not depend on the plan pipeline. The lake and its strata
are invented.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import json
from pathlib import Path

import numpy as np
import pytest

from geosample.errors import ResultsError
from geosample.results import TIME_TOLERANCE_H, decode_text, detect_delimiter, parse_result, read_results

SCHEDULE_COLUMNS = ["site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "day",
                    "day_inclusion_p", "route_order", "lat", "lon", "x", "y", "result", "qualifier", "sampled_at", "sampler", "notes",
                    "replaced_by", "replacement_reason"]

PLAN_TOML = """
[survey]
title = "Lake Mirrow summer survey"
parameter = "E. coli"
units = "MPN/100 mL"
statistic = "{statistic}"
criterion = {criterion}
timezone = "America/Chicago"

[area]
water = "layers/mirrow.geojson"
access = "layers/launches.geojson"
strata = "layers/zones.geojson"
strata_field = "zone"

[size]
tolerance = {tolerance}
range = {range}
confidence = 0.95
bound = "{bound}"
sides = "{sides}"
{extra_size}

[draw]
seed = 20270601

[time]
start = 2027-06-01
end = 2027-08-31
minutes_on_site = 15
"""

# invented strata of the invented Lake Mirrow: name, code, weight
STRATA = (("North basin", "NB", 0.5), ("South basin", "SB", 0.3), ("Reed bay", "RB", 0.2))


def resolved_settings(**kw) -> dict:
    """Resolved plan settings as a manifest stores them (via the plan loader, dates as ISO text)."""
    from geosample.plan import load_plan_text

    opts = dict(statistic="mean", criterion=126, tolerance=30, range=400, bound="chebyshev", sides="two",
                extra_size="")
    opts.update(kw)
    plan = load_plan_text(PLAN_TOML.format(**opts), base_dir=".")
    return json.loads(json.dumps(plan.settings, default=lambda o: o.isoformat()))


def write_design_folder(folder: Path, *, n=(6, 4, 3), reserves=3, travel=None, strata=STRATA, **settings_kw
                        ) -> tuple[dict, list[dict]]:
    """Write manifest.json and schedule.csv of a small design into ``folder``; returns (manifest, rows)."""
    folder.mkdir(parents=True, exist_ok=True)
    settings = resolved_settings(**settings_kw)
    rows = []
    day0 = dt.date(2027, 6, 7)
    tz = dt.timezone(dt.timedelta(hours=-5))  # CDT in June
    k = 0
    for (name, code, _), nh in zip(strata, n):
        for i in range(nh + reserves):
            primary = i < nh
            date = day0 + dt.timedelta(days=7 * (k % 10)) if primary else None
            planned = dt.datetime.combine(date, dt.time(9 + k % 6, 10), tz) if primary else None
            rows.append({
                "site_id": f"{code}-{i + 1:03d}", "stratum": name, "role": "primary" if primary else "reserve",
                "reserve_rank": 0 if primary else i - nh + 1,
                "visit_date": date.isoformat() if date else "", "planned_time": planned.isoformat() if planned else "",
                "day": k % 10 if primary else "", "day_inclusion_p": 0.25 if primary else "", "route_order": 1 if primary else "",
                "lat": 46.1 + 0.001 * k, "lon": -93.2 - 0.001 * k, "x": 500000 + 10 * k, "y": 5100000 + 10 * k,
                "result": "", "qualifier": "", "sampled_at": "", "sampler": "", "notes": "",
            })
            if primary:
                k += 1
    total_area = 2.4e6
    manifest = {
        "format": "geosample-manifest/1",
        "geosample_version": "0.1.0",
        "settings": settings,
        "seed": "20270601",
        "seed_source": "plan",
        "draw_count": 1,
        "inputs": {"water": {"path": "../layers/mirrow.geojson", "sha256": "0" * 64},
                   "access": {"path": "../layers/launches.geojson", "sha256": "1" * 64},
                   "strata": {"path": "../layers/zones.geojson", "sha256": "2" * 64}},
        "crs": {"name": "WGS 84 / UTM zone 15N", "epsg": 32615, "wkt": "", "reason": "UTM zone of the centroid"},
        "frame": {"water_area_m2": total_area, "area_m2": total_area,
                  "strata": [{"name": s[0], "code": s[1], "area_m2": s[2] * total_area, "weight": s[2]}
                             for s in strata],
                  "removed": []},
        "allocation": {"strata": [s[0] for s in strata], "n": list(n), "total": int(sum(n)),
                       "method": "proportional", "bound": settings["size"]["bound"],
                       "sides": settings["size"]["sides"], "confidence": 0.95,
                       "tolerance": settings["size"]["tolerance"], "error_bound": 0.05, "achieved_tolerance": None,
                       "weights": [s[2] for s in strata], "notes": []},
        "itinerary": {"travel_minutes_per_site": travel or {}, "routes": 10},
        "outputs": {"schedule.csv": ""},
    }
    with open(folder / "schedule.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=SCHEDULE_COLUMNS, lineterminator="\n")
        w.writeheader()
        w.writerows(rows)
    (folder / "manifest.json").write_text(json.dumps(manifest, indent=2), encoding="utf-8")
    for name in ("report.html", "map.html"):
        (folder / name).write_text(f"<html>{name}</html>", encoding="utf-8")
    return manifest, [{k: str(v) for k, v in r.items()} for r in rows]


def fill(rows: list[dict], results: dict[str, str], *, on_time: bool = True, extra: dict | None = None) -> list[dict]:
    """Copy of the schedule rows with results filled in (sampled_at = planned time for primaries)."""
    out = []
    for r in rows:
        r = dict(r)
        if r["site_id"] in results:
            val = results[r["site_id"]]
            qual = ""
            if isinstance(val, tuple):
                val, qual = val
            r["result"], r["qualifier"] = val, qual
            if on_time and r["planned_time"] and val not in ("",):
                r["sampled_at"] = r["planned_time"]
            elif val not in ("",) and not r["planned_time"]:
                r["sampled_at"] = "2027-07-20T10:00:00-05:00"
        for k, v in (extra or {}).get(r["site_id"], {}).items():
            r[k] = v
        out.append(r)
    return out


def write_csv(path: Path, rows: list[dict], *, delimiter=",", encoding="utf-8", columns=None) -> Path:
    columns = columns or list(rows[0])
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=columns, delimiter=delimiter, lineterminator="\n", extrasaction="ignore")
    w.writeheader()
    w.writerows(rows)
    path.write_bytes(buf.getvalue().encode(encoding))
    return path


def all_primaries(rows: list[dict], values: dict[str, float] | None = None) -> dict[str, str]:
    """A result for every primary site (values by stratum cycle, invented)."""
    base = {"North basin": (40, 55, 62, 38, 71, 49), "South basin": (88, 95, 102, 79), "Reed bay": (120, 131, 115)}
    out, count = {}, {}
    for r in rows:
        if r["role"] == "primary":
            i = count.get(r["stratum"], 0)
            count[r["stratum"]] = i + 1
            out[r["site_id"]] = str(base[r["stratum"]][i % len(base[r["stratum"]])])
    out.update(values or {})
    return out


@pytest.fixture
def design(tmp_path):
    manifest, rows = write_design_folder(tmp_path / "design")
    return tmp_path / "design", manifest, rows


# --------------------------------------------------------------------------- reading values
def test_clean_file_gives_every_primary_value(design, tmp_path):
    folder, manifest, rows = design
    path = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    res = read_results(path, manifest, rows)
    assert [s.n for s in res.strata] == [6, 4, 3]
    assert res.values("North basin").tolist() == [40, 55, 62, 38, 71, 49]
    assert res.encoding == "utf-8" and res.delimiter == ","
    assert not [f for f in res.flags if f.severity != "info"]
    assert len(res.order) == 13


def test_design_folder_can_be_given_instead_of_manifest(design, tmp_path):
    folder, manifest, rows = design
    path = write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows)))
    assert read_results(path, folder).n == 13


def test_any_column_order_and_extra_columns_are_kept(design, tmp_path):
    folder, manifest, rows = design
    filled = fill(rows, all_primaries(rows))
    for r in filled:
        r["lab_id"] = "L-" + r["site_id"]
    cols = ["result", "lab_id", "sampled_at", "site_id", "qualifier"]
    res = read_results(write_csv(tmp_path / "r.csv", filled, columns=cols), manifest, rows)
    assert res.n == 13
    assert dict(res.records[0].extra)["lab_id"] == "L-NB-001"


@pytest.mark.parametrize("raw, expected", [
    ("12.5", ("value", 12.5, "")),
    ("<10", ("value", 10.0, "left")),
    ("< 1", ("value", 1.0, "left")),
    (">2419.6", ("value", 2419.6, "right")),
    ("\u22652419.6", ("value", 2419.6, "right")),
    ("ND", ("nd", None, "")),
    ("", ("missing", None, "")),
    ("n/a", ("missing", None, "")),
    ("abc", ("bad", None, "")),
    ("12.5.3", ("bad", None, "")),
    ("1,234", ("bad", None, "")),  # with commas between columns a decimal comma is ambiguous
])
def test_parse_result(raw, expected):
    assert parse_result(raw) == expected


def test_decimal_comma_only_with_semicolons():
    assert parse_result("12,5", decimal_comma=True) == ("value", 12.5, "")
    assert parse_result("<0,5", decimal_comma=True) == ("value", 0.5, "left")
    assert parse_result("12,5")[0] == "bad"


def test_qualifier_column_marks_censoring():
    assert parse_result("10", "<") == ("value", 10.0, "left")
    assert parse_result("2419.6", ">") == ("value", 2419.6, "right")


def test_semicolon_file_with_decimal_commas(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows, {"NB-001": "40,5", "NB-002": "<10"})
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals), delimiter=";"), manifest, rows)
    assert res.delimiter == ";"
    assert res.values("North basin")[:2].tolist() == [40.5, 10.0]
    assert any("semicolons" in n for n in res.notes)


def test_tab_delimited(design, tmp_path):
    folder, manifest, rows = design
    res = read_results(write_csv(tmp_path / "r.tsv", fill(rows, all_primaries(rows)), delimiter="\t"), manifest,
                       rows)
    assert res.delimiter == "\t" and res.n == 13


def test_detect_delimiter():
    assert detect_delimiter("site_id,result,qualifier") == ","
    assert detect_delimiter("site_id;result;qualifier") == ";"
    assert detect_delimiter("site_id\tresult") == "\t"


def test_utf8_bom_and_cp1252_fallback(design, tmp_path):
    folder, manifest, rows = design
    filled = fill(rows, all_primaries(rows))
    filled[0]["notes"] = "crew: Zoë, pluie légère"
    res = read_results(write_csv(tmp_path / "bom.csv", filled, encoding="utf-8-sig"), manifest, rows)
    assert res.encoding == "utf-8-sig" and res.n == 13
    res = read_results(write_csv(tmp_path / "ansi.csv", filled, encoding="cp1252"), manifest, rows)
    assert res.encoding == "cp1252"
    assert any("not UTF-8" in n for n in res.notes)
    assert dict(res.records[0].extra)["notes"] == "crew: Zoë, pluie légère"


def test_utf16_and_binary_are_refused():
    with pytest.raises(ResultsError, match="NUL bytes"):
        decode_text("site_id,result\n".encode("utf-16"))
    with pytest.raises(ResultsError, match="xlsx"):
        decode_text(b"PK\x03\x04\x00\x00binary")


# --------------------------------------------------------------------------- errors
def test_empty_file(design, tmp_path):
    folder, manifest, rows = design
    p = tmp_path / "empty.csv"
    p.write_bytes(b"")
    with pytest.raises(ResultsError, match="empty"):
        read_results(p, manifest, rows)


def test_header_only(design, tmp_path):
    folder, manifest, rows = design
    p = tmp_path / "h.csv"
    p.write_text(",".join(SCHEDULE_COLUMNS) + "\n")
    with pytest.raises(ResultsError, match="no data rows"):
        read_results(p, manifest, rows)


def test_missing_result_column_names_what_was_found(design, tmp_path):
    folder, manifest, rows = design
    p = tmp_path / "r.csv"
    p.write_text("site_id,value\nNB-001,12\n")
    with pytest.raises(ResultsError, match=r"no 'result' column.*'site_id', 'value'"):
        read_results(p, manifest, rows)


def test_no_numeric_result_gives_the_figures(design, tmp_path):
    folder, manifest, rows = design
    vals = {r["site_id"]: "ND" for r in rows[:3]}
    with pytest.raises(ResultsError, match=r"no numeric result.*3 nd"):
        read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)


def test_non_numeric_results_are_reported_by_row(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows, {"NB-002": "about 50", "SB-001": "12.5.3"})
    path = write_csv(tmp_path / "r.csv", fill(rows, vals))
    with pytest.raises(ResultsError) as exc:
        read_results(path, manifest, rows)
    # NB-002 is on row 3 (header = row 1); SB-001 follows the 9 North basin rows: row 11
    assert "row 3: 'about 50'" in str(exc.value) and "row 11: '12.5.3'" in str(exc.value)
    res = read_results(path, manifest, rows, strict=False)
    flag = next(f for f in res.flags if f.kind == "unreadable_result")
    assert flag.rows == (3, 11)


def test_unknown_and_duplicate_site_ids(design, tmp_path):
    folder, manifest, rows = design
    filled = fill(rows, all_primaries(rows))
    filled.append(dict(filled[0], result="77"))  # duplicate of NB-001
    filled.append(dict(filled[1], site_id="XX-999", result="5"))
    path = write_csv(tmp_path / "r.csv", filled)
    n = len(filled)
    with pytest.raises(ResultsError) as exc:
        read_results(path, manifest, rows)
    msg = str(exc.value)
    assert f"row {n}: 'NB-001' (first at row 2)" in msg
    assert f"row {n + 1}: 'XX-999'" in msg
    res = read_results(path, manifest, rows, strict=False)
    kinds = {f.kind: f.rows for f in res.flags}
    assert kinds["duplicate_site"] == (n,) and kinds["unknown_site"] == (n + 1,)
    assert res.values("North basin")[0] == 40  # the first row counts


# --------------------------------------------------------------------------- reserves
def test_missing_primary_is_replaced_by_first_reserve(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows)
    vals["NB-003"] = ""
    vals["NB-007"] = "58"  # reserve rank 1
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    assert res.strata[0].n == 6 and 58 in res.values("North basin")
    assert not [f for f in res.flags if f.kind.startswith("reserve")]


def test_reserve_out_of_order_is_flagged(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows)
    vals["NB-003"] = ""
    vals["NB-008"] = "58"  # rank 2 while rank 1 (NB-007, row 8) unused and not attempted
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "reserve_out_of_order")
    assert flag.rows == (9, 8) and "NB-007" in flag.message


def test_attempted_reserve_may_be_skipped(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows)
    vals["NB-003"] = ""
    vals["NB-007"] = ("", "no access: reeds")
    vals["NB-008"] = "58"
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    assert not [f for f in res.flags if f.kind == "reserve_out_of_order"]
    assert 58 in res.values("North basin")


def test_reserve_sampled_while_every_primary_has_a_result(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows)
    vals["NB-007"] = "999"
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "reserve_extra")
    assert flag.rows == (8,)
    assert 999 not in res.values("North basin")


def test_primary_without_result_or_reserve(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows)
    vals["SB-002"] = ""
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "primary_not_replaced")
    assert flag.rows == (12,) and "SB-002" in flag.message
    assert res.strata[1].n == 3


def test_nd_is_reported_and_left_out(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows, {"RB-001": "ND"})
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "not_detected")
    assert flag.rows == (18,)  # 9 North + 7 South rows after the header
    assert res.strata[2].n == 2


def test_censored_values_are_counted(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows, {"NB-001": "<10", "NB-002": ">300"})
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    assert res.strata[0].censored[:2] == ("left", "right")
    assert {f.kind for f in res.flags} >= {"censored_left", "censored_right"}


# --------------------------------------------------------------------------- range and time
def test_results_outside_the_declared_range_are_flagged(design, tmp_path):
    folder, manifest, rows = design
    vals = all_primaries(rows, {"SB-003": "650"})  # range 400: 650 - 79 > 400
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, vals)), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "outside_range")
    assert flag.severity == "voids" and 13 in flag.rows
    assert res.range_exceeded == ("South basin",)


def test_time_far_from_plan_is_flagged(design, tmp_path):
    folder, manifest, rows = design
    filled = fill(rows, all_primaries(rows))
    p0 = dt.datetime.fromisoformat(filled[0]["planned_time"])
    filled[0]["sampled_at"] = (p0 + dt.timedelta(hours=TIME_TOLERANCE_H + 1)).isoformat()  # 3 h late
    filled[1]["sampled_at"] = (dt.datetime.fromisoformat(filled[1]["planned_time"]) + dt.timedelta(days=1)
                               ).isoformat()  # next day
    filled[2]["sampled_at"] = (dt.datetime.fromisoformat(filled[2]["planned_time"]) + dt.timedelta(minutes=50)
                               ).isoformat()  # within tolerance
    # naive local time (America/Chicago, CDT = UTC-5), 1 h after plan: no flag
    p3 = dt.datetime.fromisoformat(filled[3]["planned_time"])
    filled[3]["sampled_at"] = (p3 + dt.timedelta(hours=1)).replace(tzinfo=None).strftime("%Y-%m-%d %H:%M")
    res = read_results(write_csv(tmp_path / "r.csv", filled), manifest, rows)
    flag = next(f for f in res.flags if f.kind == "time_off_plan")
    assert flag.rows == (2, 3)


def test_results_object_is_frozen(design, tmp_path):
    folder, manifest, rows = design
    res = read_results(write_csv(tmp_path / "r.csv", fill(rows, all_primaries(rows))), manifest, rows)
    with pytest.raises(Exception):
        res.path = "x"  # type: ignore[misc]
    assert isinstance(res.values("Reed bay"), np.ndarray)
