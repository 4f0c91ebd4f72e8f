"""Plain-language wording of results: honest for growing, falling, flat and uncertain trends."""

from __future__ import annotations

import math

import pytest

from bendline.app import wording


def _result(q05, q50, q95, p_grow, doubling=None, halving=None):
    return {
        "current": {"growth_rate_per_day": {"median": q50, "q05": q05, "q95": q95, "mean": q50},
                    "prob_growing": p_grow, "doubling_time_days": doubling, "halving_time_days": halving,
                    "reproduction_number": None},
        "segments": [{"start_date": "2026-01-05"}, {"start_date": "2026-03-12"}],
        "changepoints": [{"median_date": "2026-03-12", "q05_date": "2026-03-09", "q95_date": "2026-03-15"}],
    }


CASES = [
    # (q05, q50, q95, P(growing), doubling, halving) -> phrases that must / must not appear
    ((0.03, 0.05, 0.07, 1.0, {"median": 13.9, "q05": 9.9, "q95": 23.1}, None),
     ["growing since about 12 Mar 2026", "(90% interval 9 to 15 Mar 2026)", "doubling every 14 days (9.9 to 23)"],
     ["falling", "uncertain"]),
    ((-0.08, -0.063, -0.05, 0.0, None, {"median": 11.0, "q05": 8.7, "q95": 13.9}),
     ["falling since about 12 Mar 2026", "halving every 11 days (8.7 to 14)", "by 6.1% a day"],
     ["growing", "uncertain"]),
    ((-0.003, 0.0005, 0.004, 0.55, {"median": 1386.0, "q05": 173.0, "q95": None}, None),
     ["about flat"], ["growing", "falling"]),
    ((-0.02, 0.001, 0.03, 0.52, None, None),
     ["uncertain", "probability of growth 52%"], ["growing since", "falling since", "flat"]),
    ((-0.001, 0.01, 0.02, 0.85, {"median": 69.0, "q05": 35.0, "q95": None}, None),
     ["uncertain", "85%"], ["growing since", "doubling"]),
]


@pytest.mark.parametrize("args, must, must_not", CASES)
def test_summary_sentence(args, must, must_not):
    text = wording.summary_sentence(_result(*args))
    for phrase in must:
        assert phrase in text, (phrase, text)
    for phrase in must_not:
        assert phrase not in text, (phrase, text)


def test_percent_change_is_from_the_continuous_rate():
    assert wording.pct_per_day(math.log(1.1)) == pytest.approx(10.0)
    assert wording.fmt_pct(-2.34) == "−2.3%"
    assert wording.fmt_pct(-0.04) == "+0.0%" and wording.fmt_pct(-0.4) == "−0.4%"  # no signed zero
    assert wording.fmt_date_range("2026-05-28", "2026-06-03") == "28 May to 3 Jun 2026"
    assert wording.fmt_date_range("2025-12-30", "2026-01-02") == "30 Dec 2025 to 2 Jan 2026"


def test_headline_stats_carry_intervals():
    stats = dict((k, (v, d)) for k, v, d in wording.headline_stats(_result(0.03, 0.05, 0.07, 1.0,
                                                                          {"median": 13.9, "q05": 9.9, "q95": 23.1})))
    assert stats["Current growth rate"][0] == "+5.1% per day"
    assert "90% interval +3.0% to +7.3%" in stats["Current growth rate"][1]
    assert stats["Doubling time"][0] == "14 days"
    assert stats["Probability growing"][0] == "> 99%"
    assert stats["Latest change date"][0] == "12 Mar 2026"


def test_status_line_never_calls_unconverged_results_final():
    assert wording.status_line({"status": "unconverged"}, {"diagnostics": {"rhat_max": 1.05, "ess_bulk_min": 90,
                                                                           "ess_tail_min": 80}})[0] == "bad"
    assert wording.status_line({"status": "running"}, {"phase": "sampling", "draws_per_chain": 50})[0] == "provisional"
    assert wording.status_line({"status": "converged"}, {"diagnostics": {"rhat_max": 1.004, "ess_bulk_min": 900,
                                                                         "ess_tail_min": 800,
                                                                         "converged": True}})[0] == "final"
    # converged but a warning invalidates the numbers: the one verdict says not reportable
    cls, text = wording.status_line({"status": "converged"}, {"diagnostics": {
        "converged": True, "reportable": False, "rhat_max": 1.004, "ess_bulk_min": 900, "ess_tail_min": 800,
        "warnings": [{"kind": "constraint", "message": "Change date 1 sits against ...", "blocking": True}]}})
    assert cls == "bad" and "Not reportable" in text and "Change date 1 sits against" in text
    cls, text = wording.status_line({"status": "stopped"}, {"diagnostics": {"converged": False}})
    assert cls == "bad" and "do not report" in text
