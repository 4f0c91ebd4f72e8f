"""``bendline fit``: exit codes, messages and the JSON result's keys."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_series")

# Keys of the JSON result that scripts and batch jobs read (the project's design).
TOP_KEYS = {"schema_version", "series", "spec", "seed", "diagnostics", "changepoints", "segments",
            "current", "band", "projection", "data_quality"}
DIAG_KEYS = {"converged", "rhat_max", "ess_bulk_min", "ess_tail_min", "chains", "draws_per_chain", "seconds"}
CP_KEYS = {"index", "median_date", "q05_date", "q95_date", "median_day", "q05_day", "q95_day"}
SEG_KEYS = {"index", "start_date", "end_date", "growth_rate_per_day", "doubling_time_days",
            "halving_time_days", "prob_growing", "reproduction_number"}
BAND_KEYS = {"dates", "trend_q05", "trend_q50", "trend_q95", "predictive_q05", "predictive_q95"}


def bendline(*args, timeout=300):
    env = dict(os.environ, PYTHONPATH=ROOT)
    return subprocess.run([sys.executable, "-m", "bendline.app.cli", *args], capture_output=True, text=True,
                          timeout=timeout, env=env, cwd=ROOT)


@pytest.mark.slow
def test_fit_writes_a_converged_result_with_every_key(tmp_path):
    out = tmp_path / "result.json"
    p = bendline("fit", os.path.join(SAMPLES, "daily_admissions.csv"), "--segments", "3",
                 "--gi-mean", "5", "--gi-sd", "2", "--chains", "8", "--out", str(out))
    assert p.returncode == 0, p.stderr
    r = json.loads(out.read_text())
    assert TOP_KEYS <= set(r)
    assert {"start", "end", "n", "interval_days", "total"} <= set(r["series"])
    assert DIAG_KEYS <= set(r["diagnostics"]) and r["diagnostics"]["converged"] is True
    assert len(r["changepoints"]) == 2 and all(CP_KEYS <= set(c) for c in r["changepoints"])
    assert len(r["segments"]) == 3 and all(SEG_KEYS <= set(s) for s in r["segments"])
    assert all(s["reproduction_number"] is not None for s in r["segments"])
    assert {"date", "growth_rate_per_day", "prob_growing"} <= set(r["current"])
    assert BAND_KEYS <= set(r["band"]) and len(r["band"]["dates"]) == r["series"]["n"]
    assert {"dates", "q05", "q50", "q95"} <= set(r["projection"]) and len(r["projection"]["dates"]) == 14
    assert {"notes", "rows_read", "rows_used"} <= set(r["data_quality"])
    kinds = {n["kind"] for n in r["data_quality"]["notes"]}
    assert {"negative", "gap"} <= kinds  # the sample's injected issues are reported
    for seg in r["segments"]:  # exactly one of doubling / halving for a clear trend
        assert (seg["doubling_time_days"] is None) != (seg["halving_time_days"] is None)
    # progress went to stderr, not into the result
    assert "draws/chain" in p.stderr


def test_bad_file_exits_2_with_a_message_naming_the_row(tmp_path):
    f = tmp_path / "bad.csv"
    f.write_text("date,cases\n2026-01-01,3\n2026-01-02,abc\n2026-01-03,4\n")
    p = bendline("fit", str(f), "--segments", "1", "--quiet")
    assert p.returncode == 2
    assert "row 3" in p.stderr and "abc" in p.stderr and "cases" in p.stderr
    assert "Traceback" not in p.stderr


def test_missing_file_and_bad_flags_exit_2():
    p = bendline("fit", "no/such/file.csv", "--quiet")
    assert p.returncode == 2 and "not found" in p.stderr.lower() and "Traceback" not in p.stderr
    p = bendline("fit", os.path.join(SAMPLES, "daily_admissions.csv"), "--family", "gaussian")
    assert p.returncode == 2 and "gaussian" in p.stderr


def test_too_many_segments_is_refused_with_the_numbers():
    p = bendline("fit", os.path.join(SAMPLES, "low_count_daily.csv"), "--segments", "12",
                 "--min-segment-days", "20", "--quiet")
    assert p.returncode == 2
    assert "182 values" in p.stderr and "12 segments" in p.stderr


def test_unconverged_fit_still_writes_its_result_and_says_so(tmp_path):
    out = tmp_path / "r.json"
    # 4 chains x 10 draws cannot reach the criterion at any speed: the ESS of
    # S draws is at most S log10(S) (the estimator's floor on tau; Vehtari et
    # al. 2021), 64 here, below the 400 required.
    p = bendline("fit", os.path.join(SAMPLES, "weekly_cases.csv"), "--segments", "4", "--chains", "4",
                 "--draws", "10", "--max-draws", "10", "--quiet", "--out", str(out))
    assert p.returncode == 3, p.stderr
    assert "did not converge" in p.stderr
    r = json.loads(out.read_text())
    assert r["diagnostics"]["converged"] is False
    assert r["diagnostics"]["draws_per_chain"] == 10


def test_change_date_outside_the_series_is_refused():
    p = bendline("fit", os.path.join(SAMPLES, "daily_admissions.csv"), "--segments", "2",
                 "--change-date", "2031-01-01", "--quiet")
    assert p.returncode == 2 and "outside the series" in p.stderr
