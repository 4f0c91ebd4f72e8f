"""The one rule for "growing, falling, flat or uncertain", and rates as percentages.

Every view (dashboard, briefing, report, CSV, command line) reads the
``direction`` the engine stores in the result; none decides on its own.

A segment is *growing* when the probability that its growth rate is above
zero is at least 90%, *falling* when it is at most 10%; otherwise *flat* when
its whole 90% interval lies within +-0.5% per day, else *uncertain* (common
practice, no source: a 90% probability either way is the usual bar for
saying "growing" or "falling" in a briefing). Segments of the level-shift
model have no growth by construction and are *flat*.
"""

from __future__ import annotations

import math

import numpy as np

from .jsonsafe import num as _f

DIRECTIONS = ("growing", "falling", "flat", "uncertain")
#: P(growing) at or above which a trend is "growing" (at or below 1 - this: "falling").
SURE = 0.9
#: A 90% interval within +-this many percent per day reads as "flat".
FLAT_PCT_PER_DAY = 0.5


def direction(rate_per_day):
    """``growing``, ``falling``, ``flat`` or ``uncertain`` from draws of a rate per day.

    Parameters
    ----------
    rate_per_day : numpy.ndarray, shape (S,)
        Continuous growth rates per day.
    """
    r = np.asarray(rate_per_day, dtype=float)
    if r.size == 0 or not np.all(np.isfinite(r)):
        return "uncertain"
    if np.all(r == 0.0):
        return "flat"
    p = float(np.mean(r > 0))
    if p >= SURE:
        return "growing"
    if p <= 1.0 - SURE:
        return "falling"
    lo, hi = np.quantile(100.0 * np.expm1(r), [0.05, 0.95])
    if -FLAT_PCT_PER_DAY <= lo and hi <= FLAT_PCT_PER_DAY:
        return "flat"
    return "uncertain"


def pct_block(rate_per_day, days):
    """Percent change over ``days`` days, ``100 (e^(r days) - 1)``: median and 90% interval.

    Parameters
    ----------
    rate_per_day : numpy.ndarray, shape (S,)
    days : float
        1 for percent per day, 7 for percent per week.
    """
    q05, q50, q95 = np.quantile(np.asarray(rate_per_day, dtype=float), [0.05, 0.5, 0.95])
    return {"median": _f(pct(q50, days)), "q05": _f(pct(q05, days)), "q95": _f(pct(q95, days))}


def pct(rate_per_day, days=1.0):
    """Percent change over ``days`` days of a continuous rate per day (None passes through)."""
    if rate_per_day is None:
        return None
    return 100.0 * math.expm1(rate_per_day * days)
