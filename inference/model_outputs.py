"""Named quantities of the trend model: the map from sampler coordinates back
to knots, levels and rates, the trend and mean at any time, pointwise
likelihoods and predictive draws.

:class:`TrendOutputs` is mixed into :class:`inference.model.TrendModel`,
which provides the layout (``slices``, ``K``, ``interval_days``, ...) and the
pieces ``knot_layout``, ``weekday7``, ``_levels`` and ``_interval_log_trend``.
"""

from __future__ import annotations

import numpy as np
from scipy import special

#: Below this ``c = 1/sqrt(phi)`` (phi above 1e6) the negative binomial is
#: evaluated as if c were at the floor: it is indistinguishable from Poisson
#: there, and the floor keeps lgamma differences accurate.
C_FLOOR = 1e-3
LOG_C_FLOOR = float(np.log(C_FLOOR))


class TrendOutputs:
    """Derived quantities of a :class:`~inference.model.TrendModel`."""

    def constrain(self, theta):
        """Named, constrained quantities of each row.

        Parameters
        ----------
        theta : numpy.ndarray, shape (B, dim)

        Returns
        -------
        dict of numpy.ndarray
            ``knots`` (B, K-1) in intervals from the start; ``knot_days``
            (B, K-1); ``log_levels`` (B, K+1) at 0, the knots (just before
            any jump) and n; ``rates`` (B, K) per interval;
            ``growth_rate_per_day`` (B, K); ``jumps`` (B, K-1) or absent;
            ``segment_log_levels`` (B, K) with flat segments;
            ``weekday`` (B, 7) log-effects Monday..Sunday or absent;
            ``dispersion`` (B,) phi, or absent for Poisson.
        """
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        p, gaps, tau = self.knot_layout(theta)
        eta, r, jumps = self._levels(theta, gaps)
        out = {
            "knots": tau,
            "knot_days": tau * self.interval_days,
            "log_levels": eta,
            "rates": r,
            "growth_rate_per_day": r / self.interval_days,
        }
        if self.flat:
            out["segment_log_levels"] = theta[:, self.slices["trend"]]
        if jumps is not None:
            out["jumps"] = jumps
        if self.weekday:
            out["weekday"] = self.weekday7(theta)
        if self.negbin:
            log_c = theta[:, self.slices["log_c"]][:, 0]
            out["dispersion"] = np.exp(-2.0 * np.maximum(log_c, LOG_C_FLOOR))
        return out

    def log_trend(self, theta, t=None):
        """Mean log trend over intervals, without day-of-week or completeness terms.

        Parameters
        ----------
        theta : numpy.ndarray, shape (B, dim)
        t : array_like, optional
            Interval starts, in intervals from the series start (may lie past
            the end: the last segment continues). Defaults to the series grid.

        Returns
        -------
        numpy.ndarray, shape (B, len(t))
            For a straight stretch, log lambda at the interval's midpoint.
        """
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        t = self.t if t is None else np.asarray(t, dtype=float)
        _, gaps, tau = self.knot_layout(theta)
        eta, r, jumps = self._levels(theta, gaps)
        return self._interval_log_trend(eta[:, 0], r[:, 0], np.diff(r, axis=1), tau, jumps, t)

    def day_of_week_at(self, t):
        """Day of week (0 = Monday) of integer times t, for daily series."""
        start_dow = int((self.series.start.astype("int64") + 3) % 7)
        return (start_dow + np.asarray(t, dtype=np.int64)) % 7

    def log_mean(self, theta, t=None, completeness=False):
        """log of the expected count at integer times t (weekday effect included).

        Parameters
        ----------
        theta : numpy.ndarray, shape (B, dim)
        t : array_like of int, optional
            Defaults to the grid.
        completeness : bool
            Include the completeness fractions (as reported, not final).
        """
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        t = np.arange(self.n) if t is None else np.asarray(t)
        out = self.log_trend(theta, t)
        if self.weekday:
            out = out + self.weekday7(theta)[:, self.day_of_week_at(t)]
        if completeness:
            inside = (t >= 0) & (t < self.n)
            off = np.zeros(t.shape)
            off[inside] = self.log_completeness[t[inside].astype(int)]
            out = out + off
        return out

    def pointwise_log_lik(self, theta):
        """Log-likelihood of each observed value, shape (B, n_obs), for LOO."""
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        logmu = self.log_mean(theta, completeness=True)[:, self.obs_index]
        y = self.y_obs
        if self.negbin:
            phi = self.constrain(theta)["dispersion"][:, None]
            return (
                special.gammaln(y + phi)
                - special.gammaln(phi)
                - special.gammaln(y + 1.0)
                + y * logmu
                + phi * np.log(phi)
                - (phi + y) * np.logaddexp(np.log(phi), logmu)
            )
        return y * logmu - np.exp(logmu) - special.gammaln(y + 1.0)

    def sample_counts(self, rng, theta, t):
        """Draw predictive counts at integer times t, one row per theta row.

        Parameters
        ----------
        rng : numpy.random.Generator
        theta : numpy.ndarray, shape (B, dim)
        t : array_like of int

        Returns
        -------
        numpy.ndarray, shape (B, len(t))
        """
        mu = np.exp(np.minimum(self.log_mean(theta, t), 700.0))
        if self.negbin:
            phi = self.constrain(theta)["dispersion"][:, None]
            lam = rng.gamma(phi, mu / phi)
            return rng.poisson(np.minimum(lam, 1e15)).astype(float)
        return rng.poisson(np.minimum(mu, 1e15)).astype(float)

    # ------------------------------------------------------------ starting
    def unconstrain(self, knots, log_levels, jumps=None, weekday=None, dispersion=None):
        """Map named quantities (one row each) back to theta.

        Parameters
        ----------
        knots : array_like, shape (B, K-1)
            Interior knots in intervals, feasible (ordered, min gap).
        log_levels : array_like, shape (B, K+1), or (B, K) with flat segments
            (one level per segment)
        jumps : array_like, shape (B, K-1), optional
        weekday : array_like, shape (B, 7), optional
            Log-effects; centred to sum to zero.
        dispersion : array_like, shape (B,), optional

        Returns
        -------
        numpy.ndarray, shape (B, dim)
        """
        log_levels = np.atleast_2d(np.asarray(log_levels, dtype=float))
        B = log_levels.shape[0]
        theta = np.zeros((B, self.dim))
        if self.K > 1:
            knots = np.asarray(knots, dtype=float).reshape(B, self.K - 1)
            edges = np.concatenate([np.zeros((B, 1)), knots, np.full((B, 1), self.t_end)], axis=1)
            gaps = np.diff(edges, axis=1)
            p = (gaps - self.min_segment) / self.slack
            if np.any(p <= 0):
                raise ValueError("knots violate the minimum segment length")
            theta[:, self.slices["z"]] = np.log(p[:, :-1]) - np.log(p[:, -1:])
        theta[:, self.slices["trend"]] = log_levels
        if self.jumps:
            theta[:, self.slices["jump"]] = 0.0 if jumps is None else np.asarray(jumps).reshape(B, -1)
        if self.weekday:
            w = np.zeros((B, 7)) if weekday is None else np.asarray(weekday, dtype=float).reshape(B, 7)
            w = w - w.mean(axis=1, keepdims=True)
            theta[:, self.slices["weekday"]] = w[:, :6]
        if self.negbin:
            phi = np.full(B, 100.0) if dispersion is None else np.asarray(dispersion, dtype=float).reshape(B)
            theta[:, self.slices["log_c"]] = (-0.5 * np.log(phi))[:, None]
        return theta


