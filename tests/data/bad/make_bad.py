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


RESULTS_CASES = {
    "results-utf16": results_utf16,
    "results-cp1252": results_cp1252,
    "results-semicolon": results_semicolon,
    "results-spreadsheet-dates": results_spreadsheet_dates,
}
RESULTS_EXPECT = {
    "results-utf16": (["NUL bytes", "UTF-16", "CSV UTF-8"], 2),
    "results-cp1252": (["not UTF-8", "cp1252"], 0),
    "results-semicolon": (["semicolons", "decimal commas"], 0),
    "results-spreadsheet-dates": (["sampled_at could not be read", "ISO 8601",
                                   "spreadsheet may have rewritten the dates"], 0),
}


def results_cases() -> None:
    for case, (expect, code) in RESULTS_EXPECT.items():
        write_case(case, {"README.txt": f"Made by make_bad.{case.replace('-', '_')}(schedule.csv of the demo).\n"},
                   expect, exit_code=code if code != 2 else None)


if __name__ == "__main__":
    plan_cases()
    results_cases()
