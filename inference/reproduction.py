"""Reproduction number from an exponential growth rate and a generation interval.

Wallinga & Lipsitch (2007), "How generation intervals shape the relationship
between growth rates and reproductive numbers", Proc. R. Soc. B 274
("WL 2007"): with growth rate r and generation-interval density g,

    R = 1 / M(-r),   M(s) = integral_0^inf exp(s t) g(t) dt,

the moment generating function of the interval. For a gamma interval with
shape a = mean^2 / sd^2 and rate b = mean / sd^2, M(s) = (1 - s/b)^(-a), so

    R = (1 + r / b)^a = (1 + r sd^2 / mean)^(mean^2 / sd^2).

Limits: sd = mean (exponential interval, a = 1) gives R = 1 + r mean;
sd -> 0 (every interval equal to the mean) gives R = exp(r mean).

Where 1 + r/b <= 0, i.e. r <= -mean / sd^2 (a very fast decline with a wide
interval), M(-r) = E[exp(-r T)] diverges: the integrand grows like
t^(a-1) exp((-r - b) t). Then R = 1 / M(-r) = 0, which is also the limit of
the closed form as r decreases to -b. This module returns 0.0 there.

Only numpy is used.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["GammaGI", "gamma_gi", "reproduction_number"]


@dataclass(frozen=True)
class GammaGI:
    """A gamma generation-interval distribution (or a fixed interval).

    Attributes
    ----------
    mean_days : float
        Mean interval, days (> 0).
    sd_days : float
        Standard deviation, days (>= 0; 0 means every interval equals the
        mean).
    shape : float
        Gamma shape a = mean^2 / sd^2 (dimensionless); ``inf`` when fixed.
    rate : float
        Gamma rate b = mean / sd^2, per day; ``inf`` when fixed.
    """

    mean_days: float
    sd_days: float
    shape: float
    rate: float

    @property
    def is_fixed(self):
        """True for sd = 0 (a point mass at the mean)."""
        return self.sd_days == 0.0


def _finite_number(value, name):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(
            f"{name} must be a number of days, got {value!r}", column=name, value=value
        ) from None
    if not math.isfinite(v):
        raise InputError(f"{name} must be finite, got {v}", column=name, value=value)
    return v


def gamma_gi(mean_days, sd_days):
    """Validate and build a gamma generation interval from its mean and sd.

    Parametrisation as in WL 2007 (gamma interval): shape a = mean^2/sd^2,
    rate b = mean/sd^2 (so mean = a/b, variance = a/b^2).

    Parameters
    ----------
    mean_days : float
        Mean generation interval, days; finite and > 0.
    sd_days : float
        Standard deviation, days; finite and >= 0. 0 means a fixed interval
        (every generation exactly ``mean_days`` long).

    Returns
    -------
    GammaGI
        With ``shape`` and ``rate`` (``inf`` for a fixed interval).

    Raises
    ------
    InputError
        (a ``ValueError``) naming the argument, for a non-number, a
        non-finite value, mean <= 0 or sd < 0.
    """
    mean = _finite_number(mean_days, "mean_days")
    sd = _finite_number(sd_days, "sd_days")
    if mean <= 0:
        raise InputError(
            f"mean_days must be > 0 (a generation interval has positive length), got {mean}",
            column="mean_days",
            value=mean_days,
        )
    if sd < 0:
        raise InputError(
            f"sd_days must be >= 0 (0 means a fixed interval), got {sd}",
            column="sd_days",
            value=sd_days,
        )
    if sd == 0:
        return GammaGI(mean, 0.0, math.inf, math.inf)
    return GammaGI(mean, sd, mean * mean / (sd * sd), mean / (sd * sd))


def reproduction_number(r_per_day, mean_days, sd_days):
    """Reproduction number R from the growth rate r, WL 2007's R = 1 / M(-r).

    Gamma interval (WL 2007, gamma case):
    R = (1 + r sd^2/mean)^(mean^2/sd^2), computed as
    exp(a log1p(r / b)) so that it stays accurate as sd -> 0. Exact limits:
    sd = 0 gives exp(r mean) (fixed interval); sd = mean gives 1 + r mean
    (exponential interval) from the same formula with a = 1. Where
    1 + r sd^2/mean <= 0 the MGF diverges and R = 0 (see module docstring).

    Parameters
    ----------
    r_per_day : float or array_like, any shape
        Exponential growth rate, per day (negative for decline). NaN gives
        NaN; +inf gives inf.
    mean_days : float
        Mean generation interval, days (> 0).
    sd_days : float
        Its standard deviation, days (>= 0).

    Returns
    -------
    float or numpy.ndarray
        R (dimensionless, >= 0), a float for scalar ``r_per_day``, else an
        array of the same shape.

    Raises
    ------
    InputError
        For an invalid interval (see :func:`gamma_gi`).
    """
    gi = gamma_gi(mean_days, sd_days)
    r = np.asarray(r_per_day, dtype=float)
    if gi.is_fixed:
        out = np.exp(r * gi.mean_days)
    elif gi.sd_days == gi.mean_days:
        # exponential interval: M(-r) = 1 / (1 + r mean), exactly
        out = np.maximum(1.0 + r * gi.mean_days, 0.0)
    else:
        x = r / gi.rate
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.exp(gi.shape * np.log1p(x))
        # MGF diverges for 1 + r/b <= 0 -> R = 0 (log1p gives -inf at -1
        # and NaN below it).
        out = np.where(x <= -1.0, 0.0, out)
    if out.ndim == 0:
        return float(out)
    return out
