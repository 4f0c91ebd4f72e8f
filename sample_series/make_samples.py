"""Regenerate the invented sample series and their true parameters.

Scenario (invented): the fictional province of Vessmark tracks an invented
respiratory illness, "grey fever". Every number here is made up; each CSV has
a JSON beside it with the parameters it was drawn from, so a fit can be
checked against the truth.

Run from the repository root:  python sample_series/make_samples.py
"""

from __future__ import annotations

import csv
import json
import math
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from bendline.inference.simulate import simulate  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
# Reports dip at the weekend and catch up on Tuesday (invented pattern).
WEEKDAY = [1.10, 1.25, 1.05, 1.00, 0.95, 0.75, 0.70]


def _write_csv(path, header, rows):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)


def _write_truth(path, truth):
    truth = dict(truth)
    truth.pop("trend", None)
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(truth, fh, indent=1)
        fh.write("\n")


def _fmt(v):
    return "" if not math.isfinite(v) else str(int(v))


def daily_admissions():
    """~9 months of daily hospital admissions, 3 segments, weekday pattern."""
    rng = np.random.default_rng(20260105)
    series, truth = simulate(
        rng, "2026-01-05", 273, start_level=18.0,
        knot_days=[74.0, 168.0], growth_rate_per_day=[0.04, -0.028, 0.011],
        weekday_effect=WEEKDAY, dispersion=30.0, name="Vessmark admissions",
    )
    dates = [str(d) for d in series.dates]
    values = list(series.values)
    # data-quality issues a loader must report (a fit treats them as missing)
    values[40] = -3.0  # a negative revision
    rows = [(d, _fmt(v) if v >= 0 else str(int(v))) for d, v in zip(dates, values)]
    del rows[120:122]  # two days never reported (a gap)
    _write_csv(os.path.join(HERE, "daily_admissions.csv"), ["date", "admissions"], rows)
    truth.update(
        scenario="Daily hospital admissions with grey fever in the invented province of Vessmark: "
        "growth, a decline after an invented school-closure policy on 2026-03-20, then slow regrowth.",
        model="negative binomial, day-of-week effect, 3 segments",
        weekday_effect_multiplicative=WEEKDAY,
        generator_seed=20260105,
        injected_data_issues=[
            {"date": dates[40], "issue": "negative value (a revision), should be set to missing"},
            {"date": dates[120], "issue": "missing from the file (gap of 2 days)"},
            {"date": dates[121], "issue": "missing from the file (gap of 2 days)"},
        ],
    )
    _write_truth(os.path.join(HERE, "daily_admissions.json"), truth)


def weekly_cases():
    """Two years of weekly confirmed cases, 4 segments, no weekday effect."""
    rng = np.random.default_rng(20240101)
    series, truth = simulate(
        rng, "2024-01-01", 104, interval_days=7, start_level=220.0,
        knot_days=[154.0, 343.0, 532.0], growth_rate_per_day=[0.012, -0.009, 0.006, -0.004],
        dispersion=60.0, name="Vessmark weekly cases",
    )
    rows = [(str(d), _fmt(v)) for d, v in zip(series.dates, series.values)]
    _write_csv(os.path.join(HERE, "weekly_cases.csv"), ["week_start", "cases"], rows)
    truth.update(
        scenario="Weekly confirmed grey-fever cases in Vessmark over two years (weeks start Monday): "
        "two waves.",
        model="negative binomial, no day-of-week effect (weekly), 4 segments",
        generator_seed=20240101,
    )
    _write_truth(os.path.join(HERE, "weekly_cases.json"), truth)


def low_count_daily():
    """Half a year of daily deaths, mostly 0-10 a day, Poisson."""
    rng = np.random.default_rng(20250301)
    series, truth = simulate(
        rng, "2025-03-01", 182, start_level=1.5,
        knot_days=[88.0], growth_rate_per_day=[0.022, -0.02], name="Vessmark deaths",
    )
    rows = [(str(d), _fmt(v)) for d, v in zip(series.dates, series.values)]
    _write_csv(os.path.join(HERE, "low_count_daily.csv"), ["date", "deaths"], rows)
    truth.update(
        scenario="Daily deaths with grey fever in Vessmark, a low-count series (mostly 0 to 10 a day).",
        model="Poisson, no day-of-week effect, 2 segments",
        generator_seed=20250301,
    )
    _write_truth(os.path.join(HERE, "low_count_daily.json"), truth)


def regions_long():
    """Daily cases for four invented districts, long format (date, district, cases)."""
    districts = {
        "Orlund": dict(start_level=30.0, knot_days=[60.0], growth_rate_per_day=[0.03, -0.02]),
        "Tamsey": dict(start_level=12.0, knot_days=[45.0, 110.0], growth_rate_per_day=[0.035, -0.01, 0.02]),
        "Quillby": dict(start_level=60.0, knot_days=[80.0], growth_rate_per_day=[-0.005, -0.03]),
        "Harrowmere": dict(start_level=8.0, knot_days=[70.0], growth_rate_per_day=[0.045, 0.0]),
    }
    rows = []
    truths = {}
    for i, (name, p) in enumerate(districts.items()):
        rng = np.random.default_rng(20260301 + i)
        series, truth = simulate(
            rng, "2026-03-02", 150, weekday_effect=WEEKDAY, dispersion=40.0, name=name, **p
        )
        for d, v in zip(series.dates, series.values):
            rows.append((str(d), name, _fmt(v)))
        truth.pop("trend", None)
        truth["generator_seed"] = 20260301 + i
        truths[name] = truth
    rows.sort(key=lambda r: (r[0], r[1]))
    _write_csv(os.path.join(HERE, "regions_long.csv"), ["date", "district", "cases"], rows)
    with open(os.path.join(HERE, "regions_long.json"), "w", encoding="utf-8") as fh:
        json.dump(
            {
                "scenario": "Daily grey-fever cases in four invented districts of Vessmark, long format.",
                "model": "negative binomial, day-of-week effect; segments as listed per district",
                "weekday_effect_multiplicative": WEEKDAY,
                "districts": truths,
            },
            fh,
            indent=1,
        )
        fh.write("\n")


if __name__ == "__main__":
    daily_admissions()
    weekly_cases()
    low_count_daily()
    regions_long()
    print("wrote", ", ".join(sorted(f for f in os.listdir(HERE) if f.endswith((".csv", ".json")))))
