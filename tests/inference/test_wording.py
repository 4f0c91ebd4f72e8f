"""The summary sentence and headline: where the direction began, modes as modes, weeks for weekly series."""

from __future__ import annotations

import math

from bendline.inference.direction import direction, pct_block
from bendline.inference.wording import headline_stats, summary_sentence

import numpy as np


def _seg(r, index, start):
    draws = np.random.default_rng(index).normal(r, abs(r) / 10 + 1e-4, 4000)
    q05, q50, q95 = np.quantile(draws, [0.05, 0.5, 0.95])
    return {"index": index, "start_date": start, "growth_rate_per_day": {"median": q50, "q05": q05, "q95": q95},
            "growth_pct_per_day": pct_block(draws, 1), "growth_pct_per_week": pct_block(draws, 7),
            "direction": direction(draws), "prob_growing": float(np.mean(draws > 0)),
            "halving_time_days": {"median": math.log(2) / -q50, "q05": math.log(2) / -q05,
                                  "q95": math.log(2) / -q95} if q95 < 0 else None,
            "doubling_time_days": {"median": math.log(2) / q50, "q05": math.log(2) / q95,
                                   "q95": math.log(2) / q05} if q05 > 0 else None}


def _cp(date, lo, hi, modes=None):
    cp = {"median_date": date, "q05_date": lo, "q95_date": hi}
    if modes:
        cp["modes"] = modes
    return cp


def _result(rates, cps, interval_days=1):
    segs = [_seg(r, i + 1, d) for i, (r, d) in enumerate(rates)]
    return {"series": {"interval_days": interval_days}, "segments": segs, "changepoints": cps,
            "current": dict(segs[-1], date="2026-09-30")}


def test_the_sentence_names_where_the_fall_began_and_where_it_slowed():
    res = _result([(0.3, "2026-08-19"), (-0.22, "2026-09-01"), (-0.08, "2026-09-13")],
                  [_cp("2026-09-01", "2026-08-31", "2026-09-01"), _cp("2026-09-13", "2026-09-11", "2026-09-16")])
    text = summary_sentence(res)
    assert text.startswith("Counts have been falling since about 1 Sep 2026 (90% interval 31 Aug to 1 Sep 2026), "
                           "more slowly since about 13 Sep, by 7.7% a day"), text
    assert "halving every" in text


def test_a_turn_is_named_even_when_the_last_change_only_changed_speed():
    res = _result([(-0.05, "2026-01-05"), (0.06, "2026-03-01"), (0.02, "2026-05-01")],
                  [_cp("2026-03-01", "2026-02-25", "2026-03-04"), _cp("2026-05-01", "2026-04-20", "2026-05-09")])
    assert summary_sentence(res).startswith("Counts have been growing since about 1 Mar 2026")


def test_a_change_date_with_separate_modes_is_given_as_its_modes():
    modes = [{"median_date": "2026-03-01", "q05_date": "2026-02-25", "q95_date": "2026-03-04", "probability": 0.62},
             {"median_date": "2026-05-02", "q05_date": "2026-04-28", "q95_date": "2026-05-06", "probability": 0.38}]
    res = _result([(0.05, "2026-01-05"), (-0.04, "2026-04-01")], [_cp("2026-04-01", "2026-02-26", "2026-05-05", modes)])
    text = summary_sentence(res)
    assert "falling since around 1 Mar 2026 (62%) or around 2 May 2026 (38%)" in text
    stats = {label: (value, detail) for label, value, detail in headline_stats(res)}
    assert stats["Latest change date"][0] == "1 Mar 2026 or 2 May 2026"


def test_weekly_series_are_described_per_week():
    res = _result([(0.01, "2026-01-05"), (-0.02, "2026-06-01")], [_cp("2026-06-01", "2026-05-18", "2026-06-15")],
                  interval_days=7)
    text = summary_sentence(res)
    assert "a week" in text and "per week" in text and "a day" not in text and "per day" not in text
    stats = headline_stats(res)
    assert stats[0][1].endswith("per week") and all(label != "Per week" for label, _, _ in stats)


def test_the_step_model_reports_the_level_and_the_last_step():
    res = {"series": {"interval_days": 7}, "spec_resolved": {"flat_segments": True},
           "segments": [{"level_per_day": {"median": 0.43, "q05": 0.36, "q95": 0.5}},
                        {"level_per_day": {"median": 0.13, "q05": 0.11, "q95": 0.16}}],
           "changepoints": [{"median_date": "1891-01-05", "q05_date": "1888-01-02", "q95_date": "1894-01-01",
                             "level_ratio": {"median": 0.3, "q05": 0.23, "q95": 0.38}}],
           "current": {"direction": "flat"}}
    text = summary_sentence(res)
    assert text.startswith("Counts have been level at about 0.9 a week")
    assert "after a step down of 70% (90% interval −77% to −62%)" in text


def test_rhat_is_never_rounded_onto_the_convergence_threshold():
    # 1.00996 passes "R-hat below 1.01" and must not read as 1.010 beside it
    from bendline.inference.snapshots import RHAT_MAX
    from bendline.inference.wording import fmt_rhat

    assert RHAT_MAX == 1.01
    assert fmt_rhat(1.00449) == "1.004"
    assert fmt_rhat(1.00996) == "1.0099" and fmt_rhat(1.00951) == "1.0095"
    assert fmt_rhat(1.0104) == "1.010"  # at or above the threshold: rounding says no more than it is
    assert fmt_rhat(1.3) == "1.300"
