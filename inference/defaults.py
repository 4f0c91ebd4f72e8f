"""Defaults that depend on the series, chosen where the model meets the data.

Two settings shape results more than any other and have no value that suits
every series:

* the minimum segment length: 14 days (28 for weekly series) suits a year of
  data, but on a six-week outbreak with three segments it leaves the change
  dates no room and pins them to the limit;
* the growth-rate prior: "rates rarely exceed 20% a day" suits most series
  but holds an explosive rise (1 to 143 a day in three days) far below the
  data.

When the analyst leaves them unset, :func:`resolve` picks them for the
series at hand and says what it picked and why; every result carries that
list (``defaults_chosen``) so no default decides silently.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .errors import InputError

#: Minimum segment length when the series has room, in days, by interval.
STANDARD_MIN_SEGMENT_DAYS = {1: 14.0, 7: 28.0}
#: A series should be at least this many minimum segments per segment long
#: (common practice, no source: 60% of the series is then free for the
#: change dates).
ROOM = 2.5
#: Growth-rate prior when the data show nothing steeper: rates rarely exceed
#: this many percent per day (common practice, no source).
STANDARD_GROWTH_PCT = 20.0
#: The prior's "rarely exceeds" bound is set this many times above the
#: steepest change seen, so the prior does not hold it back (common
#: practice, no source).
GROWTH_HEADROOM = 1.5
#: A change counts as seen only where the later smoothed level has at least
#: this many counts per interval; below it, noise makes steep ratios
#: (common practice, no source).
STEEP_MIN_LEVEL = 10.0
#: Standard errors of noise discounted from each log ratio (common practice,
#: no source).
NOISE_SE = 3.0


def resolve(spec, series):
    """Fill the series-dependent settings a spec leaves unset.

    Parameters
    ----------
    spec : ModelSpec
    series : Series

    Returns
    -------
    spec : ModelSpec
        With ``weekday``, ``min_segment_days`` and
        ``growth_rate_prior_pct_per_day`` set.
    chosen : list of dict
        ``{"option", "value", "reason"}`` for each setting chosen here.

    Raises
    ------
    InputError
        A day-of-week effect asked for on a weekly series, or a minimum
        segment shorter than two intervals.
    """
    interval = series.interval_days
    chosen = []
    weekday = spec.weekday
    if weekday is None:
        weekday = interval == 1
        chosen.append({"option": "weekday", "value": weekday,
                       "reason": "on for daily series, off for weekly"})
    if weekday and interval != 1:
        raise InputError("a day-of-week effect needs a daily series; this one is weekly", column="weekday")
    msd = spec.min_segment_days
    if msd is None:
        msd, reason = min_segment_default(series.n, interval, spec.segments)
        chosen.append({"option": "min_segment_days", "value": msd, "reason": reason})
    if msd < 2 * interval:
        raise InputError(
            f"minimum segment length must be at least two intervals ({2 * interval} days), got {msd:g} days",
            column="min_segment_days",
        )
    pct = spec.growth_rate_prior_pct_per_day
    if pct is None:
        pct, reason = growth_prior_default(series)
        chosen.append({"option": "growth_rate_prior_pct_per_day", "value": pct, "reason": reason})
    resolved = replace(spec, weekday=bool(weekday), min_segment_days=float(msd),
                       growth_rate_prior_pct_per_day=float(pct))
    return resolved, chosen


def min_segment_default(n, interval_days, segments):
    """(days, reason): the standard length, shortened so that K segments have room.

    Room means the series is at least :data:`ROOM` minimum segments per
    segment long, so most of it is free for the change dates to move in;
    never below two intervals.
    """
    standard = STANDARD_MIN_SEGMENT_DAYS.get(interval_days, 14.0)
    days = n * interval_days
    room = math.floor(days / (ROOM * segments) / interval_days) * interval_days
    if room >= standard:
        unit = "daily" if interval_days == 1 else "weekly"
        return standard, f"the standard {standard:g} days for {unit} series"
    value = float(max(room, 2 * interval_days))
    return value, (f"shortened from {standard:g} to {value:g} days so that {segments} segments have room "
                   f"in {n} {'days' if interval_days == 1 else 'weeks'}")


def steepest_rate_per_day(series):
    """The steepest sustained change in the data, as a continuous rate per day (>= 0).

    Log ratios of 3-interval moving averages (plus 0.5) taken 3 to 7
    intervals apart, where either average is at least
    :data:`STEEP_MIN_LEVEL`, less :data:`NOISE_SE` Poisson standard errors
    (so that the largest of many noisy ratios does not pass for a trend); 0
    when no stretch qualifies. Daily counts are
    first divided by a day-of-week profile (the median ratio of each
    weekday's counts to a centred 7-day moving average), so the weekly
    reporting pattern does not pass for growth.
    """
    y = np.asarray(series.values, dtype=float)
    if y.size < 4:
        return 0.0
    ok = np.isfinite(y)
    filled = np.where(ok, y, 0.0)
    if series.interval_days == 1:
        filled = filled / _weekday_profile(filled, ok, series.day_of_week())
    avg = _moving_average(filled, ok, 3)
    best = 0.0
    for lag in range(3, 8):
        if avg.size <= lag:
            break
        a, b = avg[:-lag], avg[lag:]
        strong = np.isfinite(a) & np.isfinite(b) & (np.maximum(a, b) >= STEEP_MIN_LEVEL)
        if np.any(strong):
            a, b = a[strong] + 0.5, b[strong] + 0.5
            # discount three Poisson standard errors of the log ratio of the two 3-interval sums
            noise = NOISE_SE * np.sqrt(1.0 / (3 * a) + 1.0 / (3 * b))
            rates = np.maximum(np.abs(np.log(b / a)) - noise, 0.0) / (lag * series.interval_days)
            best = max(best, float(rates.max()))
    return best


def _moving_average(values, ok, width):
    """Moving average over ``width`` intervals (NaN where fewer than half are observed)."""
    kernel = np.ones(width)
    sums = np.convolve(np.where(ok, values, 0.0), kernel, mode="valid")
    counts = np.convolve(ok.astype(float), kernel, mode="valid")
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(counts >= width / 2, sums / np.maximum(counts, 1), np.nan)


def _weekday_profile(values, ok, dow):
    """Multiplicative weekday factor of each value (geometric mean 1); ones when too short."""
    factors = np.ones(values.size)
    if values.size < 21:
        return factors
    ma7 = _moving_average(values, ok, 7)  # centred: ma7[i] covers values i .. i+6
    centre = np.arange(3, 3 + ma7.size)
    good = np.isfinite(ma7) & ok[centre]
    log_ratio = np.log((values[centre] + 0.5) / (ma7 + 0.5))
    profile = np.zeros(7)
    for d in range(7):
        sel = good & (dow[centre] == d)
        profile[d] = np.median(log_ratio[sel]) if np.any(sel) else 0.0
    profile -= profile.mean()
    return np.exp(profile[dow])


def growth_prior_default(series):
    """(percent per day, reason): the standard prior, widened for steep series."""
    steep = steepest_rate_per_day(series)
    needed = 100.0 * math.expm1(GROWTH_HEADROOM * steep)
    if needed <= STANDARD_GROWTH_PCT:
        return STANDARD_GROWTH_PCT, f"the standard {STANDARD_GROWTH_PCT:g}% per day"
    pct = _round_up(needed)
    seen = 100.0 * math.expm1(steep)
    return pct, (f"widened from {STANDARD_GROWTH_PCT:g}% to {pct:g}% per day: the data change by up to "
                 f"{seen:.0f}% a day, which a {STANDARD_GROWTH_PCT:g}% prior would hold back")


def _round_up(x):
    """Round up to two significant figures (25, 130, 430, ...)."""
    mag = 10 ** max(0, math.floor(math.log10(x)) - 1)
    return float(math.ceil(x / mag) * mag)
