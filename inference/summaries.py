"""Derived quantities of a posterior, as JSON-safe pieces.

All functions take the model and a flat array of draws ``theta`` (S, dim) in
the model's unconstrained coordinates, and return plain dictionaries and
lists (floats, strings, None) ready for ``json.dumps``. Quantile keys ``q05``
and ``q95`` are the 5th and 95th percentiles (a 90% credible interval). Rates
are per day whatever the series' interval.
"""

from __future__ import annotations

import math

import numpy as np

from .direction import direction, pct_block
from .jsonsafe import num as _f
from .jsonsafe import num_list as _flist
from .modes import find_modes
from .reproduction import reproduction_number

LN2 = math.log(2.0)


def _q(x, probs=(0.05, 0.5, 0.95)):
    return np.quantile(x, probs, axis=0)


def date_of_day(model, day):
    """Calendar date (ISO string) of the day holding a day offset from the start.

    Day 0 runs from the start date's midnight to the next, so offset 44.6 is
    in day 44.
    """
    if day is None or not math.isfinite(day):
        return None
    return str(model.series.start + np.timedelta64(int(math.floor(day)), "D"))


def dates_of_steps(model, t):
    """ISO dates of grid (or future) times t, in intervals."""
    return [
        str(model.series.start + np.timedelta64(int(ti) * model.interval_days, "D")) for ti in t
    ]


def reported_quantities(model, positions):
    """The named quantities diagnostics are computed on.

    Parameters
    ----------
    model : TrendModel
    positions : numpy.ndarray, shape (chains, draws, dim)

    Returns
    -------
    names : list of str
    values : numpy.ndarray, shape (chains, draws, P)
    """
    C, N, D = positions.shape
    q = model.constrain(positions.reshape(C * N, D))
    names, cols = [], []
    for j in range(model.K - 1):
        names.append(f"change date {j + 1} (day)")
        cols.append(q["knot_days"][:, j])
    if model.flat:  # rates are zero by construction: the segments' levels instead
        for j in range(model.K):
            names.append(f"segment level {j + 1} (log)")
            cols.append(q["segment_log_levels"][:, j])
    else:
        for j in range(model.K):
            names.append(f"growth rate {j + 1} (per day)")
            cols.append(q["growth_rate_per_day"][:, j])
        for j in range(model.K + 1):
            names.append(f"log level {j}")
            cols.append(q["log_levels"][:, j])
    if "jumps" in q:
        for j in range(model.K - 1):
            names.append(f"level jump {j + 1} (log)")
            cols.append(q["jumps"][:, j])
    if "weekday" in q:
        for d, day in enumerate(("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")):
            names.append(f"weekday effect {day} (log)")
            cols.append(q["weekday"][:, d])
    if "dispersion" in q:
        names.append("dispersion (log phi)")
        cols.append(np.log(q["dispersion"]))
    values = np.stack(cols, axis=1).reshape(C, N, len(cols))
    return names, values


def rate_summary(r):
    """Mean, median and 90% interval of a growth rate per day, shape (S,)."""
    q05, q50, q95 = _q(r)
    return {"mean": _f(np.mean(r)), "median": _f(q50), "q05": _f(q05), "q95": _f(q95)}


def doubling_and_halving(r):
    """Doubling or halving time in days from draws of a rate per day.

    Quantiles are taken on the rate and mapped through ``ln 2 / r``, which is
    monotone on each side of zero: the doubling time's 5th percentile is
    ``ln 2 / r_95`` and so on. A bound whose rate quantile is on the other
    side of zero is ``None``: the interval reaches "no doubling" (flat or
    falling).

    Returns
    -------
    (doubling, halving) : dict or None each
        ``doubling`` when the median rate is positive, ``halving`` when it is
        negative; keys median, q05, q95.
    """
    q05, q50, q95 = _q(r)
    doubling = halving = None
    if q50 > 0:
        doubling = {
            "median": _f(LN2 / q50),
            "q05": _f(LN2 / q95) if q95 > 0 else None,
            "q95": _f(LN2 / q05) if q05 > 0 else None,
        }
    elif q50 < 0:
        halving = {
            "median": _f(LN2 / -q50),
            "q05": _f(LN2 / -q05) if q05 < 0 else None,
            "q95": _f(LN2 / -q95) if q95 < 0 else None,
        }
    return doubling, halving


def _r_summary(r, gi):
    if gi is None:
        return None
    R = reproduction_number(r, gi[0], gi[1])
    q05, q50, q95 = _q(R)
    return {"median": _f(q50), "q05": _f(q05), "q95": _f(q95), "prob_above_1": _f(np.mean(R > 1))}


def changepoints(model, theta):
    """Each change date as a posterior distribution, in days and calendar dates."""
    q = model.constrain(theta)
    out = []
    for j in range(model.K - 1):
        d = q["knot_days"][:, j]
        cp = dict(index=j + 1, **_date_summary(model, d), mean_day=_f(np.mean(d)), sd_days=_f(np.std(d)))
        cp["modes"] = [
            dict(_date_summary(model, d[m]), probability=_f(np.mean(m), 3))
            for m in find_modes(d, min_width=model.interval_days)
        ]
        if "jumps" in q:
            ratio = np.exp(q["jumps"][:, j])
            lo, mid, hi = _q(ratio)
            cp["level_ratio"] = {"median": _f(mid), "q05": _f(lo), "q95": _f(hi),
                                 "prob_up": _f(np.mean(ratio > 1.0))}
        out.append(cp)
    return out


def _date_summary(model, d):
    """Median and 90% interval of change-date draws, in days and as dates."""
    q05, q50, q95 = _q(d)
    return {
        "median_day": _f(q50), "q05_day": _f(q05), "q95_day": _f(q95),
        "median_date": date_of_day(model, q50), "q05_date": date_of_day(model, q05),
        "q95_date": date_of_day(model, q95),
    }


def changepoint_histograms(model, theta, bins_per_interval=1):
    """Histograms of each change date over the series, one bin per interval.

    Returns
    -------
    dict
        ``edges_day`` (bin edges in days, shared), ``counts`` (one list per
        change date, fractions of draws).
    """
    q = model.constrain(theta)
    n_bins = int(model.n) * bins_per_interval
    edges = np.linspace(0.0, model.t_end, n_bins + 1) * model.interval_days  # whole intervals
    counts = []
    for j in range(model.K - 1):
        h, _ = np.histogram(q["knot_days"][:, j], bins=edges)
        counts.append(_flist(h / max(theta.shape[0], 1), 4))
    return {"edges_day": _flist(edges), "counts": counts}


def segments(model, theta, gi=None):
    """Per-segment growth rate, doubling or halving time, P(growing), R.

    Parameters
    ----------
    model : TrendModel
    theta : numpy.ndarray, shape (S, dim)
    gi : (mean_days, sd_days) or None
        Generation interval for reproduction numbers.
    """
    q = model.constrain(theta)
    knots_med = np.median(q["knot_days"], axis=0) if model.K > 1 else np.zeros(0)
    edges = np.concatenate([[0.0], knots_med, [model.t_end * model.interval_days]])
    out = []
    for j in range(model.K):
        r = q["growth_rate_per_day"][:, j]
        seg = {
            "index": j + 1,
            "start_date": date_of_day(model, edges[j]),
            # the last day the segment covers (the series ends at n intervals)
            "end_date": date_of_day(model, edges[j + 1] - 1e-9),
            "start_day": _f(edges[j]),
            "end_day": _f(edges[j + 1]),
            **_growth(r, gi),
        }
        if "segment_log_levels" in q:
            lo, mid, hi = _q(np.exp(q["segment_log_levels"][:, j]) / model.interval_days)
            seg["level_per_day"] = {"median": _f(mid), "q05": _f(lo), "q95": _f(hi)}
        out.append(seg)
    return out


def _growth(r, gi):
    """The growth-rate pieces of a segment or of the current trend, from draws per day."""
    doubling, halving = doubling_and_halving(r)
    return {
        "growth_rate_per_day": rate_summary(r),
        "growth_pct_per_day": pct_block(r, 1.0),
        "growth_pct_per_week": pct_block(r, 7.0),
        "direction": direction(r),
        "doubling_time_days": doubling,
        "halving_time_days": halving,
        "prob_growing": _f(np.mean(r > 0)),
        "reproduction_number": _r_summary(r, gi),
    }


def current(model, theta, gi=None):
    """The growth rate at the last date of the series (the last segment's)."""
    r = model.constrain(theta)["growth_rate_per_day"][:, -1]
    return {"date": str(model.series.end), **_growth(r, gi)}


#: Time points evaluated at once for bands and checks (bounds memory to
#: draws x COLUMNS values per array, e.g. 4000 x 256 for a ten-year series).
COLUMNS = 256


def predictive_summary(model, theta, rng):
    """Per-interval trend quantiles and predictive moments, computed in column chunks.

    Returns
    -------
    dict of numpy.ndarray, each shape (n,)
        ``trend_q05``, ``trend_q50``, ``trend_q95`` (lambda), and of the
        predictive counts as reported: ``pred_q05``, ``pred_q95``,
        ``pred_mean``, ``pred_sd``.
    """
    n = model.n
    out = {k: np.empty(n) for k in ("trend_q05", "trend_q50", "trend_q95", "pred_q05", "pred_q95",
                                    "pred_mean", "pred_sd")}
    phi = model.constrain(theta)["dispersion"][:, None] if model.negbin else None
    for lo in range(0, n, COLUMNS):
        t = np.arange(lo, min(n, lo + COLUMNS))
        trend = np.exp(np.clip(model.log_trend(theta, t), -700, 700))
        out["trend_q05"][t], out["trend_q50"][t], out["trend_q95"][t] = _q(trend)
        mu = np.exp(np.minimum(model.log_mean(theta, t, completeness=True), 700.0))
        if phi is not None:
            mu = rng.gamma(phi, mu / phi)
        y = rng.poisson(np.minimum(mu, 1e15)).astype(float)
        out["pred_q05"][t], out["pred_q95"][t] = np.quantile(y, (0.05, 0.95), axis=0)
        out["pred_mean"][t] = y.mean(axis=0)
        out["pred_sd"][t] = y.std(axis=0)
    return out


def band(model, theta, rng, predictive=True, stats=None):
    """Trend band (90%, with median) and predictive band over the series.

    The trend is lambda(t), the expected count with the day-of-week effect
    averaged out; the predictive band adds the weekday effect,
    overdispersion and the completeness fractions, so it is what the observed
    values should fall in. ``stats`` (from :func:`predictive_summary`) avoids
    drawing the predictive counts twice when :func:`checks` needs them too.
    """
    stats = stats or predictive_summary(model, theta, rng)
    out = {
        "dates": dates_of_steps(model, range(model.n)),
        "trend_q05": _flist(stats["trend_q05"]),
        "trend_q50": _flist(stats["trend_q50"]),
        "trend_q95": _flist(stats["trend_q95"]),
    }
    if predictive:
        out["predictive_q05"] = _flist(stats["pred_q05"])
        out["predictive_q95"] = _flist(stats["pred_q95"])
    return out


def projection(model, theta, rng, horizon):
    """Counts expected in the next ``horizon`` intervals if the last trend continues.

    Not a forecast: it extends the last segment's exponential trend, with
    weekday effects and overdispersion, and says nothing about changes to
    come.
    """
    if horizon <= 0:
        return {"dates": [], "q05": [], "q50": [], "q95": [], "trend_q05": [], "trend_q50": [], "trend_q95": []}
    t = np.arange(model.n, model.n + horizon)
    y = model.sample_counts(rng, theta, t)
    q05, q50, q95 = _q(y)
    trend = np.exp(np.clip(model.log_trend(theta, t), -700, 700))
    t05, t50, t95 = _q(trend)
    return {
        "dates": dates_of_steps(model, t),
        "q05": _flist(q05),
        "q50": _flist(q50),
        "q95": _flist(q95),
        "trend_q05": _flist(t05),
        "trend_q50": _flist(t50),
        "trend_q95": _flist(t95),
    }


def weekday_effects(model, theta):
    """Multiplicative day-of-week factors (geometric mean 1), or None."""
    if not model.weekday:
        return None
    w = np.exp(model.constrain(theta)["weekday"])
    q05, q50, q95 = _q(w)
    days = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
    return [
        {"day": days[d], "median": _f(q50[d]), "q05": _f(q05[d]), "q95": _f(q95[d])}
        for d in range(7)
    ]


def checks(model, theta, rng, stats=None):
    """Posterior predictive checks: coverage and residuals by day of week.

    Returns
    -------
    dict
        ``coverage_90``: fraction of observed values inside their 90%
        predictive interval (near 0.9 when the model fits);
        ``residual_by_weekday``: for daily series, the mean Pearson residual
        per day of week (near 0 when the weekday pattern is captured);
        ``pearson``: Pearson residual per observed value (null where
        missing), ``dates``.
    """
    stats = stats or predictive_summary(model, theta, rng)
    t = np.arange(model.n)
    obs = model.obs_index
    yo = model.y_obs
    inside = (yo >= stats["pred_q05"][obs]) & (yo <= stats["pred_q95"][obs])
    sd = np.maximum(stats["pred_sd"], 1e-9)
    pearson = np.full(model.n, np.nan)
    pearson[obs] = (yo - stats["pred_mean"][obs]) / sd[obs]
    out = {
        "coverage_90": _f(np.mean(inside)),
        "n_checked": int(obs.size),
        "dates": dates_of_steps(model, t),
        "pearson": _flist(pearson, 4),
        "residual_by_weekday": None,
    }
    if model.interval_days == 1:
        dow = model.day_of_week_at(t)[obs]
        res = pearson[obs]
        days = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
        out["residual_by_weekday"] = [
            {
                "day": days[d],
                "mean": _f(res[dow == d].mean()) if np.any(dow == d) else None,
                "n": int(np.sum(dow == d)),
            }
            for d in range(7)
        ]
    return out
