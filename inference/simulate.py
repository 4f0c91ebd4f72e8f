"""Simulate count series from known trend parameters.

Used for the invented demo series and for recovery and calibration tests.
The trend is computed here by plain linear interpolation of the log levels,
independently of :mod:`inference.model`, so a recovery test also checks the
model's own trend formula.
"""

from __future__ import annotations

import math

import numpy as np

from .series import Series


def simulate(
    rng,
    start,
    n,
    *,
    interval_days=1,
    start_level,
    knot_days=(),
    growth_rate_per_day,
    weekday_effect=None,
    dispersion=None,
    jumps=(),
    completeness=(),
    name="",
):
    """Draw a series from a piecewise-exponential trend.

    Parameters
    ----------
    rng : numpy.random.Generator
    start : str
        ISO date of the first value.
    n : int
        Number of intervals.
    interval_days : {1, 7}
    start_level : float
        Expected count per interval at the start (not its log).
    knot_days : sequence of float
        Change dates, days from the start, increasing, inside the series.
    growth_rate_per_day : sequence of float
        One rate per segment (``len(knot_days) + 1``), per day.
    weekday_effect : sequence of 7 float, optional
        Multiplicative effects Monday..Sunday (normalised to geometric mean 1).
    dispersion : float, optional
        Negative-binomial phi; Poisson when None.
    jumps : sequence of float, optional
        Log-level jump at each change date (a step at the date; the interval
        holding it gets the share after the date, as in the model).
    completeness : sequence of float, optional
        Fraction reported of the last value, the one before, ...

    Returns
    -------
    series : Series
    truth : dict
        JSON-safe true parameters, in the units of the JSON result.
    """
    knots = np.asarray(knot_days, dtype=float) / interval_days
    rates = np.asarray(growth_rate_per_day, dtype=float) * interval_days
    if rates.size != knots.size + 1:
        raise ValueError("need one growth rate per segment")
    edges = np.concatenate([[0.0], knots, [float(n)]])
    levels = [math.log(start_level)]
    for j, r in enumerate(rates):
        levels.append(levels[-1] + r * (edges[j + 1] - edges[j]))
    # Each value counts the interval [t, t+1); its log mean is the average of
    # the piecewise-linear log trend over the interval (exact for a
    # piecewise-linear function by the trapezoid rule on all breakpoints).
    points = np.union1d(np.arange(n + 1, dtype=float), edges)
    vals = np.interp(points, edges, levels)
    area = np.concatenate([[0.0], np.cumsum(np.diff(points) * 0.5 * (vals[1:] + vals[:-1]))])
    at = np.searchsorted(points, np.arange(n + 1, dtype=float))
    log_lam = np.diff(area[at])
    t = np.arange(n, dtype=float)
    for j, jump in enumerate(jumps):
        log_lam += jump * np.clip(t + 1.0 - knots[j], 0.0, 1.0)
    log_mu = log_lam.copy()
    w = None
    if weekday_effect is not None:
        w = np.log(np.asarray(weekday_effect, dtype=float))
        w = w - w.mean()
        dow = (int((np.datetime64(start, "D").astype("int64") + 3) % 7) + np.arange(n)) % 7
        log_mu += w[dow]
    for lag, frac in enumerate(completeness):
        log_mu[n - 1 - lag] += math.log(frac)
    mu = np.exp(log_mu)
    if dispersion is not None:
        mu = rng.gamma(dispersion, mu / dispersion)
    y = rng.poisson(mu).astype(float)
    series = Series.from_counts(start, y, interval_days, name)
    dates = series.dates
    truth = {
        "start_level": start_level,
        "knot_days": [float(k) for k in knot_days],
        "knot_dates": [
            str(np.datetime64(start, "D") + np.timedelta64(int(round(k)), "D")) for k in knot_days
        ],
        "growth_rate_per_day": [float(r) for r in growth_rate_per_day],
        "weekday_log_effect": None if w is None else [float(v) for v in w],
        "dispersion": dispersion,
        "jumps": [float(j) for j in jumps],
        "completeness": [float(c) for c in completeness],
        "trend": [float(v) for v in np.exp(log_lam)],
        "start": str(dates[0]),
        "interval_days": interval_days,
        "n": n,
    }
    return series, truth
