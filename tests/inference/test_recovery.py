"""Recovery on the invented sample series: the true change dates and growth
rates (written beside each CSV) lie inside the fit's 90% credible intervals.

These are seeded simulation tests (invented data): they check that model,
sampler and summaries fit together, not calibration (see test_calibration).
"""

from __future__ import annotations

import json
import os

import pytest

from bendline.inference.fitting import fit_result
from bendline.inference.reader import read_series

SAMPLES = os.path.join(os.path.dirname(__file__), "..", "..", "sample_series")

CASES = [
    ("daily_admissions", {"segments": 3}),
    ("weekly_cases", {"segments": 4}),
    ("low_count_daily", {"segments": 2, "family": "poisson"}),
]


@pytest.mark.slow
@pytest.mark.parametrize("name, options", CASES)
def test_true_change_dates_and_rates_inside_90_percent_intervals(name, options):
    series = read_series(os.path.join(SAMPLES, f"{name}.csv"))
    with open(os.path.join(SAMPLES, f"{name}.json"), encoding="utf-8") as fh:
        truth = json.load(fh)
    result, _ = fit_result(series, dict(options, seed=2, chains=8))
    assert result["diagnostics"]["converged"], result["diagnostics"]
    misses = []
    for cp, true_day in zip(result["changepoints"], truth["knot_days"]):
        if not cp["q05_day"] <= true_day <= cp["q95_day"]:
            misses.append(f"change date {cp['index']}: true day {true_day}, 90% interval "
                          f"{cp['q05_day']:.1f} to {cp['q95_day']:.1f}")
    for seg, true_rate in zip(result["segments"], truth["growth_rate_per_day"]):
        g = seg["growth_rate_per_day"]
        if not g["q05"] <= true_rate <= g["q95"]:
            misses.append(f"segment {seg['index']}: true rate {true_rate}, 90% interval "
                          f"{g['q05']:.4f} to {g['q95']:.4f}")
    assert not misses, "; ".join(misses)
    assert len(result["changepoints"]) == options["segments"] - 1
