"""One option table, one verdict, one vocabulary: the command line, the API and the dashboard agree.

Table-driven: the same choices given as flags, as an API spec (some values
as strings, as JSON clients send them) and as dashboard control values must
give the same engine options; every view's direction word is the JSON's;
a weekly series is described per week.
"""

from __future__ import annotations

import os

import pytest

from bendline.app.cli import build_parser
from bendline.app.commands.options import options_from_args
from bendline.app.reports import csv_tables
from bendline.app.web.callbacks.running import options_from_controls
from bendline.app.web.controls import controls_from_public
from bendline.inference.options import OPTIONS, engine_options
from bendline.inference.reader import read_series

SAMPLES = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))),
                       "sample_series")

CHOICES = [
    {},
    {"segments": 2, "family": "poisson", "weekday": False, "jumps": True, "growth_prior_pct": 35,
     "min_segment_days": 10, "drop_last": 3, "gi_mean": 5, "gi_sd": 2, "horizon": 7, "chains": 4, "draws": 300,
     "seed": 9, "thin": 2, "max_seconds": 120},
    {"flat_segments": True, "completeness": [0.5, 0.8], "change_date": ["2026-03-10:7", "2026-06-01"],
     "max_draws": 5000},
    {"weekday": True, "segments": 4, "max_seconds": 60.0},
]


def _argv(choice):
    argv = ["fit", "x.csv"]
    for name, value in choice.items():
        flag = "--" + name.replace("_", "-")
        if value is True:
            argv.append(flag)
        elif value is False:
            argv.append("--no-" + flag[2:])
        elif isinstance(value, list) and name == "change_date":
            for v in value:
                argv += [flag, v]
        elif isinstance(value, list):
            argv += [flag, ",".join(str(v) for v in value)]
        else:
            argv += [flag, str(value)]
    return argv


def _as_json_strings(choice):
    """As a JSON client might send them: numbers as strings."""
    return {k: (str(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else v) for k, v in choice.items()}


@pytest.fixture(scope="module")
def daily():
    return read_series(os.path.join(SAMPLES, "daily_admissions.csv"))


@pytest.mark.parametrize("choice", CHOICES)
def test_the_command_line_the_api_and_the_dashboard_give_the_same_options(daily, choice):
    if choice.get("jumps") and choice.get("flat_segments"):
        pytest.skip("not a combination")
    cli = options_from_args(build_parser().parse_args(_argv(choice)), daily)
    api = engine_options(_as_json_strings(choice), daily)
    values = controls_from_public({k: v for k, v in choice.items() if k != "change_date"})
    cps = [{"day": engine_options({"change_date": [c]}, daily)["changepoint_priors"][0]["day"],
            "spread_days": float(c.partition(":")[2] or 14)} for c in choice.get("change_date", [])]
    dash, _public = options_from_controls(daily, cps, values)
    assert cli == api == dash


def test_every_option_has_a_flag_an_api_key_and_a_control():
    from bendline.app.web.controls import NAMES, control_id
    from bendline.app.web.layout import page

    parser_help = build_parser().parse_args(["fit", "x.csv"])
    layout = str(page([]))
    for option in OPTIONS:
        assert hasattr(parser_help, option.name), option.name
        if option.kind != "change_dates":
            assert option.name in NAMES and f"'{control_id(option.name)}'" in layout, option.name


def test_weekly_horizon_is_in_weeks_everywhere():
    weekly = read_series(os.path.join(SAMPLES, "weekly_cases.csv"))
    assert engine_options({}, weekly)["horizon"] == 4
    assert options_from_args(build_parser().parse_args(["fit", "x.csv"]), weekly)["horizon"] == 4
    assert options_from_controls(weekly, [], controls_from_public({}))[0]["horizon"] == 4


def test_strings_are_coerced_only_when_unambiguous(daily):
    from bendline.inference.errors import InputError

    assert engine_options({"segments": "3", "max_seconds": "60", "growth_prior_pct": "20",
                           "completeness": "0.5,0.8"}, daily)["completeness"] == [0.5, 0.8]
    for bad, column in [({"segments": "three"}, "segments"), ({"segments": 2.5}, "segments"),
                        ({"completeness": {"a": 1}}, "completeness"), ({"completeness": [0.5, None]}, "completeness"),
                        ({"completeness": ["x"]}, "completeness"), ({"weekday": "maybe"}, "weekday"),
                        ({"gi_mean": [5]}, "gi_mean"), ({"nonsense": 1}, "nonsense"), ({"family": 3}, "family")]:
        with pytest.raises(InputError) as e:
            engine_options(bad, daily)
        assert e.value.column == column, bad


def test_every_view_says_the_direction_the_json_says(tmp_path):
    from bendline.app import wording
    from bendline.app.web import figures as F
    from bendline.app.reports.content import result_view
    from bendline.inference.fitting import fit_result

    for name, k in (("daily_admissions.csv", 3), ("weekly_cases.csv", 3)):
        series = read_series(os.path.join(SAMPLES, name))
        result, _ = fit_result(series, dict(engine_options({"segments": k, "draws": 200}, series)))
        cur = result["current"]
        word = cur["direction"]
        headline = dict((label, detail) for label, _v, detail in wording.headline_stats(result))
        assert headline["Probability growing"] == wording.DIRECTION_WORDS[word]
        rows = csv_tables(result)["segments"].splitlines()
        header = rows[0].split(",")
        last = rows[-1].split(",")
        assert last[header.index("direction")] == word
        fig = F.rates_figure(result_view(result))
        assert fig.data[0].hovertext[-1].endswith(word)
        unit = "week" if series.interval_days == 7 else "day"
        assert f"per {unit}" in result["summary_text"]
        other = "day" if unit == "week" else "week"
        assert f"per {other}" not in result["summary_text"] and f"a {other}" not in result["summary_text"]
        assert fig.layout.xaxis.title.text.endswith(f"per {unit})")


def test_the_readme_lists_the_options_of_the_option_table():
    """The README's option list is the table's own output, so it cannot drift from the flags."""
    import os

    from bendline.inference.options import markdown_table

    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    with open(os.path.join(root, "README.md"), encoding="utf-8") as fh:
        readme = fh.read()
    start = readme.index("<!-- options table")
    block = readme[readme.index("\n", start) + 1:readme.index("<!-- end of options table -->")]
    assert block.strip() == markdown_table().strip()
