"""``geosample size`` from the command line: output, JSON, and bad input (exit 2, option named)."""
from __future__ import annotations

import json
import math

import pytest

from geosample.cli import main
from geosample.stats.sizing import BOUNDS


def run(capsys, *args):
    code = main(["size", *args])
    out, err = capsys.readouterr()
    return code, out, err


def test_plain_sentence_with_bound_assumption_and_guarantee(capsys):
    # CHECKS.md, Chebyshev two-sided: L = 80, d = 15, a = 0.10 -> 72
    code, out, _ = run(capsys, "--tolerance", "15", "--range", "80", "--confidence", "0.90")
    assert code == 0
    first = out.splitlines()[0]
    assert first.startswith("72 samples: by Chebyshev's inequality")
    assert "pairwise independent" in first and "Popoviciu" in first and "±15" in first
    assert "at least 90%" in first and "0.0988" in first  # computed: 40^2 / (72 x 15^2)


def test_json_keys_and_values(capsys):
    code, out, _ = run(capsys, "--tolerance", "15", "--range", "80", "--confidence", "0.9", "--bound",
                       "hoeffding", "--json")
    assert code == 0
    data = json.loads(out)
    for key in ("n", "bound", "sides", "confidence", "tolerance", "range", "sd", "assumption", "error_bound",
                "statistic", "formula", "tolerance_factor"):
        assert key in data
    assert data["n"] == 43  # CHECKS.md, Hoeffding two-sided (Hoeffding 1963): 42.6 -> 43
    assert math.isclose(data["error_bound"], 2 * math.exp(-2 * 43 * 15**2 / 80**2))  # computed
    assert data["sd"] is None and data["tolerance_factor"] is None


def test_cantelli_defaults_to_one_sided(capsys):
    # CHECKS.md, Cantelli one-sided: exactly 64
    code, out, _ = run(capsys, "--tolerance", "15", "--range", "80", "--confidence", "0.9", "--bound", "cantelli",
                       "--json")
    assert code == 0 and json.loads(out)["n"] == 64 and json.loads(out)["sides"] == "one"


def test_t_bound(capsys):
    code, out, _ = run(capsys, "--tolerance", "10", "--sd", "30", "--bound", "t")
    assert code == 0 and "approximately normal" in out and "about" in out


def test_what_n_samples_buy(capsys):
    code, out, _ = run(capsys, "--n", "24", "--range", "80", "--tolerance", "15", "--json")
    assert code == 0
    data = json.loads(out)
    assert data["n"] == 24
    assert math.isclose(data["error_bound"], 1600 / (24 * 225))  # computed, Chebyshev: sigma^2 / (n d^2)
    assert math.isclose(data["confidence_reached"], 1 - 1600 / (24 * 225))
    assert math.isclose(data["achieved_tolerance"], 40 / math.sqrt(24 * 0.05))  # computed: 36.5 at 95%
    code, out, _ = run(capsys, "--n", "24", "--range", "80", "--tolerance", "15")
    assert "24 samples" in out and "70.37%" in out and "±36.51" in out
    code, out, _ = run(capsys, "--n", "24", "--range", "80", "--confidence", "0.9")
    assert code == 0 and "for 90% confidence the tolerance is ±25.82" in out  # computed: 40 / sqrt(2.4)


def test_geomean_gives_the_factor(capsys):
    code, out, _ = run(capsys, "--tolerance", "0.3", "--range", "2", "--statistic", "geomean")
    assert code == 0 and "factor of 1.995" in out and "geometric mean" in out  # computed: 10^0.3


@pytest.mark.parametrize("args, option, accepted", [
    (["--tolerance", "0", "--range", "80"], "--tolerance", "positive number"),
    (["--tolerance", "-5", "--range", "80"], "--tolerance", "positive number"),
    (["--range", "80"], "--tolerance", "positive number"),
    (["--tolerance", "15", "--range", "80", "--confidence", "1.5"], "--confidence", "between 0 and 1"),
    (["--tolerance", "15", "--range", "80", "--confidence", "0"], "--confidence", "between 0 and 1"),
    (["--tolerance", "15", "--range", "80", "--confidence", "1"], "--confidence", "between 0 and 1"),
    (["--tolerance", "15", "--bound", "t"], "--sd", "pilot sd"),
    (["--tolerance", "15", "--bound", "hoeffding"], "--range", "range L"),
    (["--tolerance", "15", "--range", "80", "--sd", "-1"], "--sd", "positive number"),
    (["--tolerance", "15", "--range", "0"], "--range", "positive number"),
    (["--n", "0", "--range", "80", "--tolerance", "15"], "--n", "whole number >= 1"),
    (["--tolerance", "15", "--range", "80", "--bound", "cantelli", "--sides", "two"], "--sides", '"one"'),
    (["--tolerance", "abc"], "--tolerance", "float"),
])
def test_bad_input_exits_2_naming_the_option(capsys, args, option, accepted):
    code, out, err = run(capsys, *args)
    assert code == 2
    assert option in err and accepted in err
    assert out == ""


def test_unknown_bound_lists_every_bound(capsys):
    code, _, err = run(capsys, "--tolerance", "15", "--range", "80", "--bound", "median")
    assert code == 2 and "--bound" in err
    assert all(repr(b) in err for b in BOUNDS)


def test_help_lists_the_bounds(capsys):
    code, out, _ = run(capsys, "--help")
    assert code == 0 and all(b in out for b in BOUNDS) and "--tolerance" in out


@pytest.mark.parametrize("args, words", [
    (["--tolerance", "1e-200", "--range", "80"], "--tolerance = 1e-200"),  # was a ZeroDivisionError
    (["--tolerance", "1e308", "--range", "80"], "--tolerance = 1e+308"),  # was "error probability at most 0"
    (["--tolerance", "400", "--range", "2", "--statistic", "geomean"], "factor of 10^400"),  # was an OverflowError
    (["--tolerance", "100", "--range", "80"], "at most the range --range = 80"),
    (["--tolerance", "15", "--range", "inf"], "a finite number"),
    (["--n", "10000000000", "--range", "80", "--tolerance", "15"], "--n = 10000000000"),
])
def test_absurd_sizes_exit_2_naming_the_option(capsys, args, words):
    code, out, err = run(capsys, *args)
    assert code == 2, out + err
    assert words in err and "Traceback" not in err


def test_field_days_sizing_prints_days_visits_and_what_it_rests_on(capsys):
    # CHECKS.md "Two-stage designs": range 80, d = 16, 16 days -> Chebyshev error bound 0.39
    code, out, _ = run(capsys, "--tolerance", "16", "--range", "80", "--days", "16", "--per-day", "4",
                       "--confidence", "0.9")
    assert code == 0
    assert out.startswith("16 field days x 4 visits a day = 64 visits") and "0.391" in out
    assert "days: 16, visits per day: 4, visits: 64" in out and "rests on:" in out and "range alone" in out


def test_field_days_with_components_and_costs(capsys):
    code, out, _ = run(capsys, "--tolerance", "5", "--range", "80", "--bound", "t", "--sd-between-days", "6",
                       "--sd-within-day", "15", "--cost-day", "200", "--cost-visit", "20", "--json")
    assert code == 0
    data = json.loads(out)
    assert math.isclose(data["per_day_optimum"], 15 / 6 * math.sqrt(10))  # Brus 2022 ch. 7, computed
    assert data["basis"] == "components" and data["visits"] == data["days"] * data["per_day"]
    assert "assumption" in data["statement"]


def test_field_days_bad_input_exits_2_naming_the_option(capsys):
    code, _, err = run(capsys, "--tolerance", "5", "--range", "80", "--bound", "t", "--sd-between-days", "6")
    assert code == 2 and "--sd-within-day" in err and "Traceback" not in err


def test_independent_samples_say_how_to_count_days(capsys):
    code, out, _ = run(capsys, "--tolerance", "15", "--range", "80")
    assert code == 0 and "--per-day" in out
