"""Validation of options at the edge: every message names the option and value."""

from __future__ import annotations

import pytest

from bendline.inference.errors import InputError
from bendline.inference.spec import ModelSpec, RunSettings, options_from_spec, spec_from_options


def test_flat_options_split_into_model_and_run():
    model, run = spec_from_options(
        {"segments": "4", "family": "poisson", "weekday": "false", "chains": 8, "draws": 300,
         "gi_mean": 5.0, "gi_sd": 2.0, "changepoint_priors": [{"day": 30, "spread_days": 7},
                                                              {"day": 60}, {"day": 90.5}]}
    )
    assert model.segments == 4 and model.family == "poisson" and model.weekday is False
    assert run.chains == 8 and run.gi_mean_days == 5.0 and run.gi_sd_days == 2.0
    assert [cp.day for cp in model.changepoint_priors] == [30, 60, 90.5]
    assert model.changepoint_priors[1].spread_days == 14.0
    again = spec_from_options(options_from_spec(model, run))
    assert again == (model, run)


@pytest.mark.parametrize(
    "options, fragment",
    [
        ({"segments": 0}, "segments"),
        ({"segments": 2.5}, "segments"),
        ({"family": "gaussian"}, "family"),
        ({"weekday": "maybe"}, "weekday"),
        ({"drop_last": -1}, "drop_last"),
        ({"completeness": [0.5, 1.5]}, "completeness"),
        ({"chains": 1}, "chains"),
        ({"gi_mean": 5.0}, "gi_sd"),
        ({"gi_mean": 5.0, "gi_sd": -1}, "gi_sd"),
        ({"segments": 3, "changepoint_priors": [{"day": 10}]}, "changepoint_priors"),
        ({"segments": 3, "changepoint_priors": [{"day": 50}, {"day": 10}]}, "date order"),
        ({"segments": 2, "changepoint_priors": [{"when": 50}]}, "changepoint_priors"),
        ({"growth_rate_prior_pct_per_day": 0}, "growth_rate_prior_pct_per_day"),
        ({"colour": "red"}, "unknown option 'colour'"),
    ],
)
def test_bad_options_are_refused_by_name(options, fragment):
    with pytest.raises(InputError) as e:
        spec_from_options(options)
    assert fragment in str(e.value)


def test_drop_last_and_completeness_are_exclusive():
    with pytest.raises(InputError, match="either drop_last or completeness"):
        ModelSpec(drop_last=3, completeness=(0.5,))


def test_spec_must_be_an_object():
    with pytest.raises(InputError, match="JSON object"):
        spec_from_options(["segments", 3])


def test_run_settings_defaults_are_valid():
    RunSettings()
