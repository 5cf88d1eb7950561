"""The plan file loader: defaults, validation messages, path resolution (geosample/plan.py)."""
from __future__ import annotations

import datetime as dt
import tomllib
from pathlib import Path

import pytest

from geosample.errors import GeosampleError, InputFileError, PlanError, SettingError
from geosample.plan import SCHEMA, load_plan, load_plan_text, schema_markdown

MINIMAL = """
[survey]
title = "Test survey"
timezone = "America/Chicago"
[area]
water = "water.geojson"
[size]
tolerance = 15
range = 80
[time]
start = 2027-06-01
end = 2027-08-31
"""


def load(text: str):
    return load_plan_text(text, base_dir="/tmp/plans", source="plan.toml")


def test_minimal_plan_gets_the_design_defaults():
    s = load(MINIMAL).settings
    assert s["size"]["confidence"] == 0.95
    assert s["size"]["bound"] == "chebyshev"
    assert s["size"]["sides"] == "two"
    assert s["draw"]["method"] == "balanced"
    assert s["draw"]["reserve"] == 0.5
    assert s["time"]["days"] == ["mon", "tue", "wed", "thu", "fri"]
    assert s["time"]["window"] == ["sunrise+60", "sunset-120"]
    assert s["time"]["start"] == dt.date(2027, 6, 1)
    assert s["area"]["exclude"] == []


def test_the_design_documents_example_plan_is_accepted():
    # The plan of DESIGN.md's "Plan file (TOML)" section, key for key (dates inline).
    text = """
[survey]
title = "Summer indicator bacteria survey"
parameter = "E. coli"
units = "MPN/100 mL"
statistic = "mean"
criterion = 126
timezone = "America/Chicago"
[area]
water = "water.geojson"
exclude = ["closed.geojson"]
access = "access.geojson"
reach_m = 4000
shore_m = [0, 1000]
strata = "zones.geojson"
strata_field = "zone"
[size]
tolerance = 15
range = 80
confidence = 0.95
bound = "chebyshev"
sides = "two"
allocation = "proportional"
min_per_stratum = 2
[size.strata.north]
sd = 12
[draw]
method = "balanced"
reserve = 0.5
spacing_m = 100
seed = 20270601
[time]
start = 2027-06-01
end = 2027-08-31
days = ["mon", "tue", "wed", "thu", "fri"]
skip = [2027-07-05]
window = ["sunrise+60", "sunset-120"]
per_day = 8
speed_kmh = 15
minutes_on_site = 15
holding_h = 6
lab_minutes = 40
"""
    plan = load(text)
    assert plan.settings["size"]["strata"] == {"north": {"sd": 12}}
    assert plan.input_paths()["exclude[0]"] == Path("/tmp/plans/closed.geojson")
    assert plan.input_names()["strata"] == "zones.geojson"


def test_unknown_key_suggests_the_close_one():
    with pytest.raises(PlanError, match=r"size\.tolerence.*Did you mean 'tolerance'"):
        load(MINIMAL.replace("tolerance = 15", "tolerence = 15"))


def test_unknown_section_suggests_the_close_one():
    with pytest.raises(PlanError, match=r"\[sizes\].*Did you mean 'size'"):
        load(MINIMAL.replace("[size]", "[sizes]"))


@pytest.mark.parametrize(
    "old,new,setting",
    [
        ("range = 80", 'range = "80"', "size.range"),
        ("range = 80", "range = -3", "size.range"),
        ("tolerance = 15", "tolerance = 0", "size.tolerance"),
        ('timezone = "America/Chicago"', 'timezone = "Mars/Olympus"', "survey.timezone"),
        ("end = 2027-08-31", 'end = "2027-08-31"', "time.end"),
        ("[time]", "[time]\nper_day = 2.5", "time.per_day"),
        ("[time]", '[time]\ndays = ["mon", "funday"]', "time.days"),
        ("[size]", "[size]\nconfidence = 95", "size.confidence"),
        ("[size]", '[size]\nbound = "chebychev"', "size.bound"),
    ],
)
def test_wrong_values_name_the_key_and_value(old, new, setting):
    with pytest.raises(SettingError) as info:
        load(MINIMAL.replace(old, new))
    assert info.value.setting == setting
    assert setting in str(info.value)
    assert isinstance(info.value, ValueError)  # the builtin it also inherits


@pytest.mark.parametrize(
    "old, new, setting, words",
    [
        ('timezone = "America/Chicago"', 'timezone = "America"', "survey.timezone", "is a region, not a zone"),
        ('timezone = "America/Chicago"', 'timezone = "America/Chicgo"', "survey.timezone", "'America/Chicago'"),
        ('timezone = "America/Chicago"', f'timezone = "{"A" * 5000}"', "survey.timezone", "5000 characters"),
        ('timezone = "America/Chicago"', 'timezone = "America/\\u0000x"', "survey.timezone", "printable"),
        ("tolerance = 15", "tolerance = 1e-200", "size.tolerance", "between 1e-12 and 1e+12"),
        ("tolerance = 15", "tolerance = 1e308", "size.tolerance", "between 1e-12 and 1e+12"),
        ("tolerance = 15", "tolerance = 100", "size.tolerance", "at most the range size.range = 80"),
        ("tolerance = 15", "tolerance = 1e-9", "size.tolerance", "at least size.range / 1e+09"),
        ("[survey]", '[survey]\nstatistic = "geomean"', "size.tolerance", "at most 10 log10 units"),
        ("[time]", "[time]\nper_day = 10000000000", "time.per_day", "at most 1000"),
        ("[time]", "[time]\nfield_days = 99999", "time.field_days", "at most 1830"),
        ("[time]", "[time]\nspeed_kmh = 1e-300", "time.speed_kmh", "between 0.1 and 500"),
        ("[size]", "[size]\nn = 2000000", "size.n", "at most 100000"),
        ("end = 2027-08-31", "end = 2027-08-31\n[size.strata.A]\nsd = 1e300", "size.strata.A.sd", "1e+12"),
        ("[area]", "[area]\nreach_m = 1e9\naccess = 'a.geojson'", "area.reach_m", "20 000 km"),
        ("[area]", "[area]\nshore_m = [0, 1e12]", "area.shore_m", "20 000 km"),
        ("[draw]" if "[draw]" in MINIMAL else "[time]", "[draw]\nreserve = 1e6\n[time]", "draw.reserve", "at most 10"),
        ("end = 2027-08-31", "end = 3027-08-31", "time.end", "1900 to 2199"),
        ("end = 2027-08-31", "end = 2037-08-31", "time.end", "at most 1830 days"),
        ("[area]", '[area]\nremainder = "Open\\nWater"', "area.remainder", "line break"),
    ],
)
def test_absurd_values_are_refused_with_the_bound(old, new, setting, words):
    # each of these gave a traceback, an endless run or a silently absurd design before it was bounded
    text = MINIMAL.replace(old, new, 1)
    assert text != MINIMAL
    with pytest.raises(SettingError) as info:
        load(text)
    assert info.value.setting == setting, str(info.value)
    assert words in str(info.value)


def test_a_geomean_criterion_must_be_above_zero():
    text = MINIMAL.replace("tolerance = 15\nrange = 80", "tolerance = 0.3\nrange = 2").replace(
        'title = "Test survey"', 'title = "Test survey"\nstatistic = "geomean"\ncriterion = 0')
    with pytest.raises(SettingError, match="survey.criterion = 0 .*above 0"):
        load(text)


def test_size_strata_names_are_normalised_like_the_layer_names():
    plan = load(MINIMAL + '[size.strata."North\u00a0Basin "]\nsd = 3\n')
    assert list(plan.settings["size"]["strata"]) == ["North Basin"]
    with pytest.raises(SettingError, match="differ only in letter case"):
        load(MINIMAL + '[size.strata."North Basin"]\nsd = 3\n[size.strata."north basin"]\nsd = 4\n')


def test_reversed_dates_say_so():
    text = MINIMAL.replace("start = 2027-06-01", "start = 2027-09-01")
    with pytest.raises(SettingError, match="reversed"):
        load(text)


def test_missing_required_key_names_it():
    with pytest.raises(PlanError, match=r"\[area\] needs water"):
        load(MINIMAL.replace('water = "water.geojson"', ""))


def test_toml_syntax_error_is_a_plan_error():
    with pytest.raises(PlanError, match="not valid TOML"):
        load(MINIMAL + "\nthis is not toml")


def test_chebyshev_without_range_is_refused():
    with pytest.raises(SettingError, match="size.range"):
        load(MINIMAL.replace("range = 80", ""))


def test_cantelli_two_sided_is_refused_with_the_fix():
    with pytest.raises(SettingError, match='sides = "one"'):
        load(MINIMAL.replace("[size]", '[size]\nbound = "cantelli"'))


def test_missing_plan_file_is_an_oserror(tmp_path):
    with pytest.raises(InputFileError) as info:
        load_plan(tmp_path / "nope.toml")
    assert isinstance(info.value, OSError)
    assert "nope.toml" in str(info.value)


def test_paths_resolve_relative_to_the_plan_file(tmp_path):
    sub = tmp_path / "survey"
    sub.mkdir()
    (sub / "plan.toml").write_text(MINIMAL.replace("water.geojson", "layers/water.geojson"))
    plan = load_plan(sub / "plan.toml")
    assert plan.input_paths()["water"] == (sub / "layers" / "water.geojson").resolve()
    assert len(plan.sha256) == 64


def test_every_error_is_a_geosample_error():
    for text in (MINIMAL.replace("[size]", "[sise]"), MINIMAL.replace("range = 80", "range = []")):
        with pytest.raises(GeosampleError):
            load(text)


def test_schema_reference_lists_every_key():
    md = schema_markdown()
    for section, keys in SCHEMA.items():
        assert f"## [{section}]" in md
        for key in keys:
            assert f"| `{key}` |" in md


def test_docs_plan_reference_is_up_to_date():
    doc = Path(__file__).resolve().parents[1] / "docs" / "plan-file.md"
    assert doc.read_text() == schema_markdown(), "regenerate: python -m geosample.plan > docs/plan-file.md"


def test_defaults_are_valid_toml_values():
    # Every default must itself pass the key's check (so a written-out plan reloads).
    for section, keys in SCHEMA.items():
        for key, spec in keys.items():
            if spec.default is not None and not spec.required:
                assert spec.check(spec.default), f"{section}.{key} default {spec.default!r}"
    tomllib.loads(MINIMAL)


def test_docs_cli_reference_names_every_command_and_option():
    # Not a byte comparison: click's help layout changes between click versions.
    import click

    from geosample.cli import cli

    doc = (Path(__file__).resolve().parents[1] / "docs" / "cli.md").read_text()
    ctx = click.Context(cli)
    for name in cli.list_commands(ctx):
        assert f"## geosample {name}" in doc, "regenerate: python -m geosample.cli._reference > docs/cli.md"
        for param in cli.get_command(ctx, name).params:
            for opt in getattr(param, "opts", []):
                if opt.startswith("-"):
                    assert opt in doc, f"{name} {opt}: regenerate docs/cli.md"


@pytest.mark.parametrize("extra, setting", [
    ("sd_between_days = 4", "size.sd_within_day"),
    ("sd_within_day = 4", "size.sd_between_days"),
    ("cost_day = 100", "size.cost_visit"),
    ("sd_between_days = 0\nsd_within_day = 0", "size.sd_between_days"),
    ("lower = \"zero\"", "size.lower"),
])
def test_field_day_keys_go_together_and_name_the_missing_one(extra, setting):
    with pytest.raises(SettingError, match=setting.replace(".", r"\.")):
        load(MINIMAL.replace("range = 80", "range = 80\n" + extra))


def test_field_day_keys_are_accepted_and_t_needs_no_sd_with_them():
    p = load(MINIMAL.replace("range = 80", 'range = 80\nlower = -5\nbound = "t"\nsd_between_days = 3\n'
                                           "sd_within_day = 9\ncost_day = 120\ncost_visit = 15"))
    size = p.settings["size"]
    assert (size["lower"], size["sd_between_days"], size["sd_within_day"]) == (-5, 3, 9)
    assert (size["cost_day"], size["cost_visit"]) == (120, 15)
