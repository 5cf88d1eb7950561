"""Build the bad-input corpus (run: ``python tests/data/bad/make_bad.py``; deterministic).

Every case is a folder holding ``plan.toml`` (with its layers) and ``expect.txt``:
the text fragments, one per line, that geosample's message must contain. A case
whose input is repaired rather than refused also holds ``exit.txt`` with the
expected exit code (0); every other case must exit 2.

The lake, Pellow Tarn, and all its names are invented. It sits on open land at
about 97.55 W, 46.05 N; the bad layers are it, broken in one way each.

Results cases (``results-*``) hold no plan: the test builds the packaged demo
design once and turns its schedule.csv into the broken results file with the
function of the same name in :data:`RESULTS_CASES`.
"""
from __future__ import annotations

import csv
import io
import json
import shutil
from pathlib import Path

HERE = Path(__file__).resolve().parent
LON0, LAT0 = -97.55, 46.05
# the tarn: a 2.3 km x 1.1 km lon/lat rectangle with a notch on its south shore
TARN = [(0.0, 0.0), (0.012, 0.0), (0.012, 0.002), (0.016, 0.002), (0.016, 0.0), (0.03, 0.0), (0.03, 0.01),
        (0.0, 0.01), (0.0, 0.0)]


def ring(offsets, lon0=LON0, lat0=LAT0):
    return [[round(lon0 + dx, 6), round(lat0 + dy, 6)] for dx, dy in offsets]


def geojson(features, crs_name=None):
    """A GeoJSON FeatureCollection text; ``crs_name`` adds the (pre-RFC 7946) named CRS member."""
    doc = {"type": "FeatureCollection"}
    if crs_name:
        doc["crs"] = {"type": "name", "properties": {"name": crs_name}}
    doc["features"] = [{"type": "Feature", "properties": props, "geometry": {"type": "Polygon",
                                                                            "coordinates": [coords]}}
                       for props, coords in features]
    return json.dumps(doc, indent=1) + "\n"


PLAN = """# bad-input case {case}: Pellow Tarn (invented)
[survey]
title = {title}
parameter = "E. coli"
units = "MPN/100 mL"
criterion = 126
timezone = "America/Chicago"

[area]
water = "{water}"
{area_extra}
[size]
tolerance = {tolerance}
range = 80
confidence = 0.90

[draw]
method = "simple"
seed = 7

[time]
start = {start}
end = {end}
window = {window}
"""


def plan_text(case, *, water="water.geojson", title='"Pellow Tarn bad-input case"', area_extra="",
              tolerance="20", start="2027-06-01", end="2027-06-30", window='["07:00", "15:00"]'):
    return PLAN.format(case=case, water=water, title=title, area_extra=area_extra, tolerance=tolerance,
                       start=start, end=end, window=window)


def tarn_layer(name="Pellow Tarn"):
    return geojson([({"name": name}, ring(TARN))])


def write_case(case, files, expect, exit_code=None):
    folder = HERE / case
    if folder.exists():
        shutil.rmtree(folder)
    folder.mkdir()
    for name, content in files.items():
        if isinstance(content, bytes):
            (folder / name).write_bytes(content)
        else:
            (folder / name).write_text(content, encoding="utf-8", newline="\n")
    (folder / "expect.txt").write_text("\n".join(expect) + "\n", encoding="utf-8", newline="\n")
    if exit_code is not None:
        (folder / "exit.txt").write_text(f"{exit_code}\n", encoding="utf-8", newline="\n")


def empty_gpkg(path: Path) -> None:
    import geopandas
    import shapely

    import os

    old = os.environ.get("OGR_CURRENT_DATE")
    os.environ["OGR_CURRENT_DATE"] = "2027-01-01T00:00:00.000Z"  # GDAL stamps this date: same bytes every run
    try:
        gdf = geopandas.GeoDataFrame({"name": ["x"]}, geometry=[shapely.box(0, 0, 1, 1)], crs=4326).iloc[:0]
        gdf.to_file(path, layer="tarn", driver="GPKG", engine="pyogrio")
    finally:
        if old is None:
            del os.environ["OGR_CURRENT_DATE"]
        else:
            os.environ["OGR_CURRENT_DATE"] = old


def plan_cases() -> None:
    bowtie = [(0.0, 0.0), (0.03, 0.01), (0.03, 0.0), (0.0, 0.01), (0.0, 0.0)]
    write_case("bowtie", {"plan.toml": plan_text("bowtie"),
                          "water.geojson": geojson([({"name": "Pellow Tarn"}, ring(bowtie))])},
               ["Pellow Tarn", "invalid polygon", "Self-intersection", "repaired with make_valid"], exit_code=0)
    flat = [(0.0, 0.0), (0.01, 0.0), (0.03, 0.0), (0.0, 0.0)]  # on one line: no area
    write_case("zero-area", {"plan.toml": plan_text("zero-area"),
                             "water.geojson": geojson([({"name": "Pellow Tarn"}, ring(flat))])},
               ["area.water", "water.geojson", "no polygon with an area", "zero area"])
    # Web Mercator metres (EPSG:3857) of the tarn, in a file that says it is lon/lat
    import pyproj

    to3857 = pyproj.Transformer.from_crs(4326, 3857, always_xy=True)
    merc = [[round(v, 1) for v in to3857.transform(x, y)] for x, y in ring(TARN)]
    write_case("wrong-crs-3857", {"plan.toml": plan_text("wrong-crs-3857"),
                                  "water.geojson": geojson([({"name": "Pellow Tarn"}, merc)],
                                                           crs_name="urn:ogc:def:crs:OGC:1.3:CRS84")},
               ["area.water", "outside", "-180", "CRS"])
    swapped = [[y, x] for x, y in ring(TARN)]  # lat, lon: lon 46 and lat -97
    write_case("swapped-lat-lon", {"plan.toml": plan_text("swapped-lat-lon"),
                                   "water.geojson": geojson([({"name": "Pellow Tarn"}, swapped)])},
               ["area.water", "latitude", "swapped?"])
    write_case("plan-typo", {"plan.toml": plan_text("plan-typo").replace("tolerance =", "tolerence ="),
                             "water.geojson": tarn_layer()},
               ["unknown key size.tolerence", "Did you mean 'tolerance'?"])
    write_case("plan-wrong-type", {"plan.toml": plan_text("plan-wrong-type", tolerance='"20"'),
                                   "water.geojson": tarn_layer()},
               ["size.tolerance = '20'", "a positive number"])
    write_case("plan-bad-toml", {"plan.toml": plan_text("plan-bad-toml", start='"2027-06-01'),
                                 "water.geojson": tarn_layer()},
               ["not valid TOML", "without quotes"])
    write_case("reversed-dates", {"plan.toml": plan_text("reversed-dates", start="2027-08-31", end="2027-06-01"),
                                  "water.geojson": tarn_layer()},
               ["time.end", "2027-06-01", "swap start and end"])
    write_case("window-never-opens", {"plan.toml": plan_text("window-never-opens",
                                                             window='["sunset-30", "sunrise+30"]'),
                                      "water.geojson": tarn_layer()},
               ["time.window", "sunset-30", "sunrise+30"])
    folder_files = {"plan.toml": plan_text("empty-gpkg-layer", water="water.gpkg")}
    write_case("empty-gpkg-layer", folder_files, ["area.water", "water.gpkg", "no features"])
    empty_gpkg(HERE / "empty-gpkg-layer" / "water.gpkg")

    more_plan_cases()


def _variant(case, expect, *, replace=(), extra="", water=None, files=None, **kw):
    """A plan case: the tarn plan with text replaced (old, new pairs) and ``extra`` appended."""
    text = plan_text(case, **kw)
    for old, new in replace:
        assert old in text, (case, old)
        text = text.replace(old, new, 1)
    layers = {"water.geojson": tarn_layer() if water is None else water}
    write_case(case, {"plan.toml": text + extra, **layers, **(files or {})}, expect)


def more_plan_cases() -> None:
    """Mistakes that gave a traceback, an endless run, a silent absurd design or a misleading message."""
    tz = '"America/Chicago"'
    _variant("timezone-region", ["survey.timezone = 'America'", "a region, not a zone", "America/"],
             replace=[(tz, '"America"')])
    _variant("timezone-too-long", ["survey.timezone", "(2999 characters)", "short and printable"],
             replace=[(tz, '"' + "Europe/" * 428 + 'Ber"')])
    _variant("timezone-offset", ["survey.timezone = '+02:00'", "UTC offsets like +02:00 are not zones"],
             replace=[(tz, '"+02:00"')])
    _variant("tolerance-tiny", ["size.tolerance = 1e-200", "between 1e-12 and 1e+12"], tolerance="1e-200")
    _variant("tolerance-huge", ["size.tolerance = 1e+308", "between 1e-12 and 1e+12"], tolerance="1e308")
    _variant("tolerance-wider-than-range", ["size.tolerance = 100", "at most the range size.range = 80",
                                            "guarantees nothing"], tolerance="100")
    _variant("geomean-tolerance-400", ["size.tolerance = 400", "log10 units", "factor of 10^400"], tolerance="400",
             replace=[('criterion = 126', 'criterion = 126\nstatistic = "geomean"'), ("range = 80", "range = 3")])
    _variant("geomean-criterion-zero", ["survey.criterion = 0", "above 0"], tolerance="0.3",
             replace=[('criterion = 126', 'criterion = 0\nstatistic = "geomean"'), ("range = 80", "range = 3")])
    _variant("per-day-huge", ["time.per_day = 10000000000", "at most 1000"], extra="per_day = 10000000000\n")
    _variant("n-huge", ["size.n = 2000000", "at most 100000"], replace=[("range = 80", "range = 80\nn = 2000000")])
    _variant("reserve-huge", ["draw.reserve = 1000000", "at most 10"],
             replace=[("seed = 7", "seed = 7\nreserve = 1000000")])
    _variant("season-millennium", ["time.end = '3027-06-30'", "1900 to 2199"], end="3027-06-30")
    _variant("confidence-percent", ["size.confidence = 90", "strictly between 0 and 1"],
             replace=[("confidence = 0.90", "confidence = 90")])
    _variant("seed-and-seed-text", ["draw.seed_text", "either seed or seed_text, not both"],
             replace=[("seed = 7", 'seed = 7\nseed_text = "announced 2027-05-01"')])
    _variant("cantelli-two-sided", ["size.sides = 'two'", "cantelli"],
             replace=[("confidence = 0.90", 'confidence = 0.90\nbound = "cantelli"\nsides = "two"')])
    _variant("reach-without-access", ["area.reach_m = 500", "access"], area_extra="reach_m = 500\n")
    _variant("shore-reversed", ["area.shore_m = [100, 20]", "Write [20, 100]"], area_extra="shore_m = [100, 20]\n")
    _variant("weekday-typo", ["time.days = 'fryday'", "weekday names"], extra='days = ["mon", "fryday"]\n')
    _variant("unknown-section", ["unknown section [sise]", "Did you mean 'size'?"],
             replace=[("[size]", "[sise]")])
    _variant("missing-timezone", ["[survey] needs timezone"], replace=[(f"timezone = {tz}\n", "")])
    _variant("water-missing", ["area.water", "lake.geojson", "does not exist", "relative to the plan file"],
             water="", replace=[('water = "water.geojson"', 'water = "lake.geojson"')])
    _variant("water-empty-file", ["area.water", "is empty (0 bytes)"], water="")
    _variant("water-not-geojson", ["area.water", "named as a GeoJSON file but cannot be read as one",
                                   "export the layer again"], water='{"type": "FeatureCollection", "features": [\n')
    _variant("water-empty-gpkg-file", ["area.water", "water.gpkg", "is empty (0 bytes)"], water="",
             replace=[('water = "water.geojson"', 'water = "water.gpkg"')], files={"water.gpkg": b""})
    point = json.dumps({"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {"name": "Launch"},
                        "geometry": {"type": "Point", "coordinates": ring([(0.001, 0.001)])[0]}}]}, indent=1) + "\n"
    _variant("water-points", ["area.water", "1 Point", "needs polygons"], water=point)
    nan_tarn = tarn_layer().replace(f"{LAT0 + 0.01:.2f}", "NaN", 1)
    assert "NaN" in nan_tarn
    _variant("water-nan-vertex", ["area.water", "not a number (NaN", "Pellow Tarn"], water=nan_tarn)
    nan_point = point.replace(f"{LAT0 + 0.001:.3f}", "NaN", 1)
    assert "NaN" in nan_point
    _variant("access-nan-point", ["area.access", "not a number (NaN", "Launch"], area_extra='access = "access.geojson"\n',
             files={"access.geojson": nan_point})
    west = [(-0.01, -0.01), (0.015, -0.01), (0.015, 0.02), (-0.01, 0.02), (-0.01, -0.01)]
    east = [(0.015, -0.01), (0.04, -0.01), (0.04, 0.02), (0.015, 0.02), (0.015, -0.01)]
    strata = 'strata = "zones.geojson"\nstrata_field = "zone"\n'
    _variant("strata-same-name", ["area.strata (zone) = 'Bay'", "both named 'Bay'", "merge those features"],
             area_extra=strata, files={"zones.geojson": geojson([({"zone": "Bay"}, ring(west)),
                                                                 ({"zone": "Bay"}, ring(east))])})
    _variant("strata-name-case", ["differ only in letter case", "'West Bay'", "'west bay'"], area_extra=strata,
             files={"zones.geojson": geojson([({"zone": "West Bay"}, ring(west)),
                                              ({"zone": "west\u00a0bay "}, ring(east))])})
    _variant("strata-name-line-break", ["area.strata (zone)", "line break", "feature 1"], area_extra=strata,
             files={"zones.geojson": geojson([({"zone": "West Bay"}, ring(west)),
                                              ({"zone": "East\nBay"}, ring(east))])})
    _variant("strata-field-unknown", ["area.strata_field", "no field 'basin'", "'zone'"],
             area_extra='strata = "zones.geojson"\nstrata_field = "basin"\n',
             files={"zones.geojson": geojson([({"zone": "West"}, ring(west)), ({"zone": "East"}, ring(east))])})
    sliver = [(0.0, 0.0), (0.03, 0.0), (0.03, 2e-6), (0.0, 2e-6), (0.0, 0.0)]  # 2.3 km long, 0.2 m wide
    _variant("water-sliver-shore", ["area.shore_m = [20, 1500]", "nowhere more than 0.1", "from its shore",
                                    "drawing error"], area_extra="shore_m = [20, 1500]\n",
             water=geojson([({"name": "Pellow Tarn"}, ring(sliver))]))
    speck = [(0.0, 0.0), (2e-6, 0.0), (2e-6, 2e-6), (0.0, 2e-6), (0.0, 0.0)]  # 0.15 m x 0.22 m
    _variant("water-speck", ["area.water", "0.034 m²", "smaller than 1 m²", "CRS"],
             water=geojson([({"name": "Pellow Tarn"}, ring(speck))]))
    write_case("plan-not-utf8", {"plan.toml": plan_text("plan-not-utf8", title='"Pellow Tarn caf\u00e9"').encode("cp1252"),
                                 "water.geojson": tarn_layer()}, ["not UTF-8", "Save it as UTF-8"])


# --------------------------------------------------------------------------- results cases
def _rows(schedule: str) -> tuple[list[str], list[dict]]:
    reader = csv.DictReader(io.StringIO(schedule))
    return list(reader.fieldnames or []), list(reader)


def _filled(schedule: str, *, note="Crew: Zoë Ñandú, café shore") -> tuple[list[str], list[dict]]:
    """Every primary site sampled at its planned time, results 10, 20, 30, ... (cycling)."""
    header, rows = _rows(schedule)
    k = 0
    for r in rows:
        if r["role"] == "primary":
            r["result"] = str(10 * (k % 9 + 1))
            r["sampled_at"] = r["planned_time"]
            r["notes"] = note
            k += 1
    return header, rows


def _csv(header, rows, delimiter=",") -> str:
    out = io.StringIO()
    w = csv.DictWriter(out, fieldnames=header, delimiter=delimiter, lineterminator="\r\n")
    w.writeheader()
    w.writerows(rows)
    return out.getvalue()


def results_utf16(schedule: str) -> bytes:
    return _csv(*_filled(schedule)).encode("utf-16")


def results_cp1252(schedule: str) -> bytes:
    return _csv(*_filled(schedule)).encode("cp1252")


def results_semicolon(schedule: str) -> bytes:
    header, rows = _filled(schedule)
    for r in rows:
        if r["result"]:
            r["result"] = r["result"] + ",5"  # 10,5 -> 10.5
        for k in ("lat", "lon", "x", "y"):
            r[k] = r[k].replace(".", ",")
    return _csv(header, rows, delimiter=";").encode("utf-8")


def results_spreadsheet_dates(schedule: str) -> bytes:
    """sampled_at as a spreadsheet rewrites it: "6/2/27 8:06" and serial day numbers "46541.34"."""
    import datetime as dt

    header, rows = _filled(schedule)
    k = 0
    for r in rows:
        if r["sampled_at"]:
            t = dt.datetime.fromisoformat(r["sampled_at"])
            if k % 2:
                r["sampled_at"] = f"{t.month}/{t.day}/{t.year % 100} {t.hour}:{t.minute:02d}"
            else:
                serial = (t.replace(tzinfo=None) - dt.datetime(1899, 12, 30)).total_seconds() / 86400
                r["sampled_at"] = f"{serial:.2f}"
            k += 1
    return _csv(header, rows).encode("utf-8")


def _first_primary(schedule: str, **cells) -> bytes:
    """The filled-in results with ``cells`` written into the first data row (row 2, a primary site)."""
    header, rows = _filled(schedule)
    assert rows[0]["role"] == "primary"
    rows[0].update(cells)
    return _csv(header, rows).encode("utf-8")


def results_bom_cp1252(schedule: str) -> bytes:
    """A BOM, then Windows-1252 bytes: a file saved as UTF-8 once, then edited and saved as ANSI."""
    return b"\xef\xbb\xbf" + _csv(*_filled(schedule)).encode("cp1252")


def results_far_future_time(schedule: str) -> bytes:
    return _first_primary(schedule, sampled_at="9999-12-31T23:59-12:00")


def results_huge_value(schedule: str) -> bytes:
    return _first_primary(schedule, result="1e308")


def results_nan_value(schedule: str) -> bytes:
    return _first_primary(schedule, result="nan")


def results_infinite_value(schedule: str) -> bytes:
    return _first_primary(schedule, result="1e400")


def results_two_result_columns(schedule: str) -> bytes:
    """A second 'result' column at the end (the lab's numbers pasted beside the crew's)."""
    header, rows = _filled(schedule)
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\r\n")
    w.writerow(header + ["result"])
    for r in rows:
        w.writerow([r[h] for h in header] + [str(float(r["result"]) * 2) if r["result"] else ""])
    return out.getvalue().encode("utf-8")


def results_unterminated_quote(schedule: str) -> bytes:
    """Row 3's result typed as '"12' : the quote is never closed, so the rest of the file is one cell."""
    header, rows = _filled(schedule, note="Crew A")
    lines = _csv(header, rows).split("\r\n")
    cells = lines[2].split(",")
    cells[header.index("result")] = '"12'
    lines[2] = ",".join(cells)
    return "\r\n".join(lines).encode("utf-8")


def results_sep_line(schedule: str) -> bytes:
    """A spreadsheet's delimiter hint 'sep=;' as the first line, then semicolons."""
    header, rows = _filled(schedule, note="Crew A")
    return ("sep=;\r\n" + _csv(header, rows, delimiter=";")).encode("utf-8")


def results_empty(schedule: str) -> bytes:
    return b""


def results_workbook(schedule: str) -> bytes:
    """The first bytes of a zipped workbook saved under a .csv name."""
    return b"PK\x03\x04\x14\x00\x06\x00\x08\x00\x00\x00!\x00" + b"\x00" * 32


def results_unknown_site(schedule: str) -> bytes:
    return _first_primary(schedule, site_id="XX-999")


def results_duplicate_site(schedule: str) -> bytes:
    header, rows = _filled(schedule)
    rows[1]["site_id"] = rows[0]["site_id"]
    return _csv(header, rows).encode("utf-8")


def results_no_result_column(schedule: str) -> bytes:
    header, rows = _filled(schedule)
    header = [("value" if h == "result" else h) for h in header]
    for r in rows:
        r["value"] = r.pop("result")
    return _csv(header, rows).encode("utf-8")


def results_header_only(schedule: str) -> bytes:
    header, _ = _rows(schedule)
    return _csv(header, []).encode("utf-8")


def results_nothing_filled(schedule: str) -> bytes:
    return schedule.encode("utf-8")


RESULTS_CASES = {
    "results-utf16": results_utf16,
    "results-cp1252": results_cp1252,
    "results-semicolon": results_semicolon,
    "results-spreadsheet-dates": results_spreadsheet_dates,
    "results-bom-cp1252": results_bom_cp1252,
    "results-far-future-time": results_far_future_time,
    "results-huge-value": results_huge_value,
    "results-nan-value": results_nan_value,
    "results-infinite-value": results_infinite_value,
    "results-two-result-columns": results_two_result_columns,
    "results-unterminated-quote": results_unterminated_quote,
    "results-sep-line": results_sep_line,
    "results-empty": results_empty,
    "results-workbook": results_workbook,
    "results-unknown-site": results_unknown_site,
    "results-duplicate-site": results_duplicate_site,
    "results-no-result-column": results_no_result_column,
    "results-header-only": results_header_only,
    "results-nothing-filled": results_nothing_filled,
}
RESULTS_EXPECT = {
    "results-utf16": (["NUL bytes", "UTF-16", "CSV UTF-8"], 2),
    "results-cp1252": (["not UTF-8", "cp1252"], 0),
    "results-semicolon": (["semicolons", "decimal commas"], 0),
    "results-spreadsheet-dates": (["sampled_at could not be read", "ISO 8601",
                                   "spreadsheet may have rewritten the dates"], 0),
    "results-bom-cp1252": (["not UTF-8", "cp1252", "after its UTF-8 byte order mark"], 0),
    "results-far-future-time": (["sampled_at", "row 2", "9999-12-31T23:59-12:00", "1900 to 2199"], 2),
    "results-huge-value": (["row 2", "'1e308'", "1e+15"], 2),
    "results-nan-value": (["unreadable results", "row 2: 'nan'"], 2),
    "results-infinite-value": (["unreadable results", "row 2: '1e400'"], 2),
    "results-two-result-columns": (["2 columns named 'result'", "which one to read cannot be known"], 2),
    "results-unterminated-quote": (["row 3", "quote", "never closed", "column 'result'"], 2),
    "results-sep-line": (["sep=;", "semicolons"], 0),
    "results-empty": (["is empty"], 2),
    "results-workbook": (["spreadsheet workbook", "CSV UTF-8"], 2),
    "results-unknown-site": (["site ids not in the design", "row 2: 'XX-999'"], 2),
    "results-duplicate-site": (["duplicated site ids", "row 3", "first at row 2"], 2),
    "results-no-result-column": (["no 'result' column", "'value'"], 2),
    "results-header-only": (["a header but no data rows"], 2),
    "results-nothing-filled": (["no numeric result the estimate can use"], 2),
}


def results_cases() -> None:
    for case, (expect, code) in RESULTS_EXPECT.items():
        write_case(case, {"README.txt": f"Made by make_bad.{case.replace('-', '_')}(schedule.csv of the demo).\n"},
                   expect, exit_code=code if code != 2 else None)


if __name__ == "__main__":
    plan_cases()
    results_cases()
