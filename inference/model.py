"""The piecewise-exponential trend model: a batched log density and its gradient.

Time is continuous and measured in intervals (days or weeks) from the start
of the series; value ``t`` (``t = 0 .. n-1``) is the count over the interval
``[t, t+1)``, so the series covers ``[0, n)``. The log trend
``log lambda(s)`` is continuous and piecewise linear in ``s`` with K segments
joined at K-1 interior knots ``tau_1 < ... < tau_{K-1}`` (each segment at least
``m = min_segment`` intervals long), and log levels ``eta_0 .. eta_K`` at
``0``, the knots and ``n``. Segment ``j`` grows at
``r_j = (eta_j - eta_{j-1}) / (tau_j - tau_{j-1})`` per interval.

The log of the expected count of interval ``t`` is the mean of the log trend
over that interval: the value at the interval's midpoint on a straight
stretch, a blend of the two segments in the interval holding a knot. This
makes the density continuously differentiable in the knots (a plain
evaluation at whole intervals would put kinks there, which slow Hamiltonian
Monte Carlo), and it differs from the exact integral of lambda by a factor
``1 + r^2/24`` (under 0.02% for rates below 7% per interval).

Options add a level jump ``J_j`` at each knot (a step at the knot, averaged
over the interval that holds it), a day-of-week log-effect (seven values
summing to zero), negative-binomial overdispersion and per-lag completeness
fractions for the latest values.

The sampler sees a flat unconstrained vector ``theta`` of dimension ``dim``:

``z`` (K-1)
    Knot gaps ``gap_k = m + S * softmax(z, 0)_k`` with slack
    ``S = (n - 1) - K m``; ``tau_j = gap_1 + ... + gap_j``. A uniform prior on
    ordered knots is a Dirichlet(1, ..., 1) on the gap fractions, whose density
    in ``z`` is ``prod_k p_k`` (the additive-logistic Jacobian).
``trend`` (K+1)
    Log levels ``eta_0 .. eta_K`` at 0, the knots and n. With flat segments
    (option) instead the log level of each segment (K); the rates are zero
    and the level jumps by the difference at each knot.
``jump`` (K-1, option), ``weekday`` (6, option; the seventh is minus their sum),
``log_c`` (1, negative binomial; ``c = 1 / sqrt(phi)``).

Priors (all independent, stated in the analyst's coordinates):
knots uniform or Normal(centre, spread) truncated to the feasible set;
``eta_0 ~ Normal(log(mean of the first counts + 0.5), level_prior_sd^2)``;
each rate ``r_j ~ Normal(0, s^2)``, which in level coordinates carries the
Jacobian ``prod_j 1 / gap_j``; jumps ``Normal(0, jump_prior_sd^2)`` (with
flat segments, the differences of neighbouring levels); day-of-week
effects ``Normal(0, weekday_prior_sd^2)`` on all seven; ``c ~ HalfNormal``.

Every function takes ``theta`` of shape (B, dim) and works on all B rows in one
set of numpy calls. A parameter vector outside the model's support gets log
density ``-inf`` and a zero gradient; nothing here raises on sampler input.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from .defaults import resolve
from .errors import InputError
from .fastmath import psi_minus_log
from .model_outputs import LOG_C_FLOOR, TrendOutputs
from .series import Series
from .spec import ModelSpec




class TrendModel(TrendOutputs):
    """Log posterior of the trend model for one series and spec.

    Parameters
    ----------
    series : Series
    spec : ModelSpec
        Resolved against the series on construction (:func:`inference.defaults.resolve`);
        what was chosen is in ``defaults_chosen``.

    Raises
    ------
    InputError
        If the series is too short for the requested segments and minimum
        segment length, or has too few observed values.
    """

    def __init__(self, series: Series, spec: ModelSpec):
        spec, self.defaults_chosen = resolve(spec, series)
        self.series = series
        self.spec = spec
        self.interval_days = series.interval_days
        n = series.n
        K = spec.segments
        self.n = n
        self.K = K
        self.t = np.arange(n, dtype=float)  # interval starts
        self.t_end = float(n)
        self.min_segment = spec.min_segment_days / series.interval_days
        self.slack = self.t_end - K * self.min_segment
        unit = "days" if series.interval_days == 1 else "weeks"
        if self.slack <= 0:
            need = int(math.floor(K * self.min_segment)) + 2
            raise InputError(
                f"{n} values are too few for {K} segments of at least "
                f"{spec.min_segment_days:g} days each; need at least {need} {unit}, "
                f"or fewer segments, or a shorter minimum segment length",
                column="segments",
                value=K,
            )

        observed = series.observed.copy()
        if spec.drop_last:
            if spec.drop_last >= n:
                raise InputError(
                    f"cannot leave out the last {spec.drop_last} values of a series of {n}",
                    column="drop_last",
                )
            observed[n - spec.drop_last :] = False
        self.mask = observed
        n_obs = int(observed.sum())
        if n_obs < 2 * K + 2:
            raise InputError(
                f"only {n_obs} observed values enter the fit, too few for {K} segments "
                f"(they need at least {2 * K + 2})",
                column="segments",
                value=K,
            )
        self.y = np.where(observed, np.nan_to_num(series.values), 0.0)
        self.y_obs = self.y[observed]
        if not self.y_obs.any():
            # the likelihood then pushes every level to minus infinity: the
            # sampler would report a steep "decline" and a halving time that
            # the data say nothing about
            raise InputError(
                f"every one of the {n_obs} counts that enter the fit is zero; there is no trend to "
                "estimate (a growth rate needs at least one case)",
                column="count",
            )
        self.obs_index = np.flatnonzero(observed)
        self.log_completeness = np.zeros(n)
        for lag, frac in enumerate(spec.completeness[:n]):
            self.log_completeness[n - 1 - lag] = math.log(frac)
        self._const = float(special.gammaln(self.y_obs + 1.0).sum())
        self._y_sum = float(self.y_obs.sum())
        self._y_unique, self._y_counts = np.unique(self.y_obs, return_counts=True)
        self._y_counts = self._y_counts.astype(float)
        self._y32 = self.y.astype(np.float32)
        self._mask32 = observed.astype(np.float32)

        self.weekday = bool(spec.weekday)
        self.dow = series.day_of_week() if self.weekday else None
        if self.weekday:
            onehot = np.zeros((n, 7))
            onehot[np.arange(n), self.dow] = 1.0
            self._dow_onehot = onehot * observed[:, None]
        self.flat = bool(spec.flat_segments)
        self.jumps = bool(spec.jumps) and K > 1 and not self.flat
        self.negbin = spec.family == "negbin"

        # priors in model units (intervals)
        self.rate_sd = spec.growth_rate_prior_sd_per_day * series.interval_days
        if spec.level_prior_centre is None:
            first = self.y_obs[: 7 if series.interval_days == 1 else 3]
            self.level_centre = math.log(float(np.mean(first)) + 0.5)
        else:
            self.level_centre = float(spec.level_prior_centre)
        self.level_sd = spec.level_prior_sd
        self.jump_sd = spec.jump_prior_sd
        self.weekday_sd = spec.weekday_prior_sd
        self.c_scale = spec.dispersion_prior_scale
        if spec.changepoint_priors:
            self.knot_centre = np.array([cp.day for cp in spec.changepoint_priors]) / series.interval_days
            self.knot_sd = np.array([cp.spread_days for cp in spec.changepoint_priors]) / series.interval_days
        else:
            self.knot_centre = None
            self.knot_sd = None

        # layout of theta
        sizes = [("z", K - 1), ("trend", K if self.flat else K + 1)]
        if self.jumps:
            sizes.append(("jump", K - 1))
        if self.weekday:
            sizes.append(("weekday", 6))
        if self.negbin:
            sizes.append(("log_c", 1))
        self.slices = {}
        start = 0
        for name, size in sizes:
            self.slices[name] = slice(start, start + size)
            start += size
        self.dim = start

    # ------------------------------------------------------------------ layout
    @property
    def param_names(self):
        """Names of the unconstrained coordinates, in order."""
        names = [f"knot_logit[{j + 1}]" for j in range(self.K - 1)]
        if self.flat:
            names += [f"segment_log_level[{j + 1}]" for j in range(self.K)]
        else:
            names += [f"log_level[{j}]" for j in range(self.K + 1)]
        if self.jumps:
            names += [f"jump[{j + 1}]" for j in range(self.K - 1)]
        if self.weekday:
            names += [f"weekday_free[{d}]" for d in range(6)]
        if self.negbin:
            names += ["log_inv_sqrt_dispersion"]
        return names

    def knot_layout(self, theta):
        """Gap fractions p (B, K), gaps (B, K) and interior knots tau (B, K-1), in intervals."""
        B = theta.shape[0]
        z = theta[:, self.slices["z"]]
        zz = np.concatenate([z, np.zeros((B, 1))], axis=1)
        zz = zz - zz.max(axis=1, keepdims=True)
        e = np.exp(zz)
        p = e / e.sum(axis=1, keepdims=True)
        gaps = self.min_segment + self.slack * p
        tau = np.cumsum(gaps, axis=1)[:, :-1]
        return p, gaps, tau

    def _levels(self, theta, gaps):
        """Log levels at 0, the knots and n (B, K+1), rates per interval (B, K), jumps or None.

        The levels are those of the continuous part of the trend (without the
        jumps). With flat segments the sampler's coordinates are one level
        per segment; the trend then has rate zero everywhere and jumps by the
        difference of neighbouring levels at each knot (the level just before
        knot j is segment j's).
        """
        c = theta[:, self.slices["trend"]]
        if self.flat:
            eta = np.concatenate([c[:, :1], c], axis=1)
            jumps = np.diff(c, axis=1) if self.K > 1 else None
            return eta, np.zeros_like(gaps), jumps
        r = np.diff(c, axis=1) / gaps
        jumps = theta[:, self.slices["jump"]] if self.jumps else None
        return c, r, jumps

    def weekday7(self, theta):
        """Day-of-week log-effects (B, 7), Monday..Sunday, summing to zero."""
        w = theta[:, self.slices["weekday"]]
        return np.concatenate([w, -w.sum(axis=1, keepdims=True)], axis=1)

    @staticmethod
    def _interval_log_trend(eta0, r1, beta, tau, jumps, t, pieces=None):
        """Mean of log lambda over each interval ``[t, t+1)``, hinge form.

        ``log lambda(s) = eta_0 + r_1 s + sum_j beta_j (s - tau_j)_+`` (plus
        ``J_j`` after ``tau_j``), with ``beta_j = r_{j+1} - r_j``. Over
        ``[t, t+1)`` with ``d = t - tau_j``, the mean of ``(s - tau_j)_+`` is
        ``ramp^2 / 2 + max(d, 0)`` and the mean of the step is ``ramp``, where
        ``ramp = clip(d + 1, 0, 1)`` is the share of the interval after the
        knot (and the derivative of the mean hinge in ``d``). Past the ends the
        first and last segments continue.

        Parameters
        ----------
        eta0, r1 : arrays (B,)
        beta, tau : arrays (B, K-1)
        jumps : array (B, K-1) or None
        t : array (n,) of interval starts, in the dtype to compute in
        pieces : dict, optional
            Filled with ``hinge`` and ``ramp`` (and with jumps ``inside``),
            arrays (B, K-1, n), for the gradient.
        """
        dtype = t.dtype.type
        out = eta0[:, None].astype(t.dtype) + r1[:, None].astype(t.dtype) * (t + dtype(0.5))
        if tau.shape[1] == 0:
            return out
        # all knots at once: (B, K-1, n)
        d = t - tau.astype(t.dtype)[:, :, None]
        ramp = np.minimum(np.maximum(d + dtype(1), dtype(0)), dtype(1))
        h = np.maximum(d, dtype(0), out=d)
        h += dtype(0.5) * ramp * ramp
        coef = beta.astype(t.dtype)[:, None, :]
        out += np.matmul(coef, h)[:, 0, :]
        if jumps is not None:
            out += np.matmul(jumps.astype(t.dtype)[:, None, :], ramp)[:, 0, :]
        if pieces is not None:
            pieces["hinge"] = h
            pieces["ramp"] = ramp
            if jumps is not None:
                pieces["inside"] = (ramp > 0) & (ramp < 1)
        return out

    # ------------------------------------------------------------- densities
    def log_density(self, theta):
        """Log posterior density (up to a constant) of each row, in float64.

        Parameters
        ----------
        theta : numpy.ndarray, shape (B, dim)

        Returns
        -------
        numpy.ndarray, shape (B,)
            ``-inf`` where a row is outside the support or overflows.
        """
        theta = _rows(theta)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            fw = self._forward(theta, np.float64, pieces=False)
            return self._value(theta, fw)

    def value_and_grad(self, theta):
        """Log density and its exact gradient in float64, for every row at once.

        Returns
        -------
        lp : numpy.ndarray, shape (B,)
        grad : numpy.ndarray, shape (B, dim)
            Zero in rows where ``lp`` is ``-inf``.
        """
        theta = _rows(theta)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            fw = self._forward(theta, np.float64, pieces=True)
            lp = self._value(theta, fw)
            g, d_logc = self._score_exact(fw)
            G = self._gradient(theta, fw, g, d_logc)
        bad = ~np.isfinite(lp) | ~np.all(np.isfinite(G), axis=1)
        lp[bad] = -np.inf
        G[bad] = 0.0
        return lp, G

    def grad(self, theta):
        """Fast gradient for the sampler's trajectories.

        The per-interval terms are computed in float32 (numpy's exp and log
        are vectorised for float32 on AVX2 machines, not for float64) and the
        negative-binomial dispersion score uses an asymptotic series for the
        digamma differences instead of ``scipy.special.digamma``. The result
        agrees with :meth:`value_and_grad` to about 1e-4 relative. Leapfrog
        steps stay reversible and volume-preserving with any deterministic
        gradient field, and the accept step uses the exact float64 density,
        so the sampler's target is unchanged; only acceptance could suffer.

        Returns
        -------
        numpy.ndarray, shape (B, dim), float64
        """
        theta = _rows(theta)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            fw = self._forward(theta, np.float32, pieces=True)
            g, d_logc = self._score_fast(fw)
            G = self._gradient(theta, fw, g, d_logc)
        G[~np.all(np.isfinite(G), axis=1)] = 0.0
        return G

    # -- the three stages: forward pass, likelihood terms, chain rule
    def _forward(self, theta, dtype, pieces):
        """Trend, mean and (optionally) the per-knot pieces the gradient needs."""
        p, gaps, tau = self.knot_layout(theta)
        eta, r, jumps = self._levels(theta, gaps)
        beta = np.diff(r, axis=1)
        parts = {} if pieces else None
        logmu = self._interval_log_trend(eta[:, 0], r[:, 0], beta, tau, jumps, self.t.astype(dtype), parts)
        w7 = None
        if self.weekday:
            w7 = self.weekday7(theta)
            logmu += w7.astype(dtype)[:, self.dow]
        logmu += self.log_completeness.astype(dtype)
        mu = np.exp(logmu)
        phi = log_c = None
        if self.negbin:
            log_c = theta[:, self.slices["log_c"]][:, 0]
            phi = np.exp(-2.0 * np.maximum(log_c, LOG_C_FLOOR))
        parts = parts or {}
        return _Forward(p, gaps, tau, eta, r, beta, jumps, w7, logmu, mu, phi, log_c,
                        parts.get("hinge"), parts.get("ramp"), parts.get("inside"))

    def _value(self, theta, fw):
        if self.obs_index.size == self.n:  # every interval observed: no copies
            logmu_o, mu_o = fw.logmu, fw.mu
        else:
            logmu_o, mu_o = fw.logmu[:, self.obs_index], fw.mu[:, self.obs_index]
        if self.negbin:
            phi = fw.phi
            lg = special.gammaln(self._y_unique[None, :] + phi[:, None]) @ self._y_counts
            # phi log phi - (phi + y) log(phi + mu) = -y log phi - (phi + y) log1p(mu / phi)
            ll = (
                lg
                - self.y_obs.size * special.gammaln(phi)
                - self._y_sum * np.log(phi)
                + logmu_o @ self.y_obs
                - ((phi[:, None] + self.y_obs) * np.log1p(mu_o / phi[:, None])).sum(axis=1)
                - self._const
            )
        else:
            ll = logmu_o @ self.y_obs - mu_o.sum(axis=1) - self._const
        lp = ll + self._log_prior(theta, fw.p, fw.gaps, fw.tau, fw.eta, fw.r, fw.jumps)
        lp[~np.isfinite(lp)] = -np.inf
        return lp

    def _score_exact(self, fw):
        """d loglik / d log mu per interval (B, n) and d loglik / d log c (B,)."""
        y, mu = self.y, fw.mu
        if not self.negbin:
            return self.mask * (y - mu), None
        phi = fw.phi[:, None]
        g = self.mask * phi * (y - mu) / (phi + mu)
        mu_o = mu[:, self.obs_index]
        dig = special.digamma(self._y_unique[None, :] + phi) @ self._y_counts
        d_phi = (
            dig
            - self.y_obs.size * special.digamma(fw.phi)
            - np.log1p(mu_o / phi).sum(axis=1)
            + ((mu_o - self.y_obs) / (phi + mu_o)).sum(axis=1)
        )
        return g, self._d_logc(fw, d_phi)

    def _score_fast(self, fw):
        """As :meth:`_score_exact`, float32 and with a stable series for phi."""
        y = self._y32
        mu = fw.mu
        if not self.negbin:
            return self._mask32 * (y - mu), None
        phi = fw.phi.astype(np.float32)[:, None]
        den = phi + mu
        u = (y - mu) / den
        g = self._mask32 * phi * u
        # Per interval, d loglik / d phi
        #   = psi(y + phi) - psi(phi) - log1p(mu / phi) + (mu - y) / (phi + mu)
        #   = [log1p(u) - u] + [a(y + phi) - a(phi)],  a(x) = psi(x) - log(x),
        # a form without the cancellations of the first line when phi >> y.
        small = np.abs(u) < 0.01
        u2 = u * u
        series = u2 * (np.float32(-0.5) + u * (np.float32(1 / 3) + u * np.float32(-0.25)))
        l1 = np.where(small, series, np.log1p(np.where(small, 0, u)) - u)
        term = l1 + psi_minus_log(y + phi) - psi_minus_log(phi)
        d_phi = (term * self._mask32).sum(axis=1, dtype=np.float64)
        return g, self._d_logc(fw, d_phi)

    def _d_logc(self, fw, d_phi):
        return np.where(fw.log_c > LOG_C_FLOOR, d_phi * (-2.0 * fw.phi), 0.0)

    def _gradient(self, theta, fw, g, d_logc_lik):
        """Chain rule from d loglik / d log mu to theta, plus the prior's gradient."""
        B = theta.shape[0]
        K = self.K
        G = np.zeros((B, self.dim))
        tau, r, beta, jumps, gaps, p = fw.tau, fw.r, fw.beta, fw.jumps, fw.gaps, fw.p
        d_eta0 = g.sum(axis=1, dtype=np.float64)
        if self.flat:
            return self._gradient_flat(theta, fw, g, d_logc_lik, G, d_eta0)
        d_r = -r / self.rate_sd**2
        d_r[:, 0] += g @ (self.t + 0.5).astype(g.dtype)
        if K > 1:
            gcol = g[:, :, None]
            A = np.matmul(fw.hinge, gcol)[:, :, 0].astype(np.float64)  # d/d beta_j
            S = np.matmul(fw.ramp, gcol)[:, :, 0].astype(np.float64)  # -d/d tau_j per unit beta
            d_r[:, 1:] += A
            d_r[:, :-1] -= A
            d_tau = -beta * S
            if jumps is not None:
                g_in = np.matmul(fw.inside.astype(g.dtype), gcol)[:, :, 0].astype(np.float64)
                G[:, self.slices["jump"]] = S - jumps / self.jump_sd**2
                d_tau -= jumps * g_in
            if self.knot_centre is not None:
                d_tau -= (tau - self.knot_centre) / self.knot_sd**2
        d_eta = np.zeros_like(fw.eta)
        d_eta[:, 0] = d_eta0 - (fw.eta[:, 0] - self.level_centre) / self.level_sd**2
        q = d_r / gaps
        d_eta[:, 1:] += q
        d_eta[:, :-1] -= q
        G[:, self.slices["trend"]] = d_eta
        if K > 1:
            # r_j = (eta_j - eta_{j-1}) / gap_j, and the rate prior's Jacobian -sum log gap
            self._knot_chain_rule(G, fw, d_tau, -q * r - 1.0 / gaps)
        self._nuisance_gradient(G, fw, g, d_logc_lik)
        return G

    def _gradient_flat(self, theta, fw, g, d_logc_lik, G, d_level0):
        """:meth:`_gradient` for flat segments: levels per segment, jumps between them."""
        K = self.K
        L = theta[:, self.slices["trend"]]
        d_L = np.zeros_like(L)
        d_L[:, 0] = d_level0 - (L[:, 0] - self.level_centre) / self.level_sd**2
        if K > 1:
            gcol = g[:, :, None]
            S = np.matmul(fw.ramp, gcol)[:, :, 0].astype(np.float64)  # d/d jump_j
            g_in = np.matmul(fw.inside.astype(g.dtype), gcol)[:, :, 0].astype(np.float64)
            d_J = S - fw.jumps / self.jump_sd**2
            d_L[:, 1:] += d_J
            d_L[:, :-1] -= d_J
            d_tau = -fw.jumps * g_in
            if self.knot_centre is not None:
                d_tau -= (fw.tau - self.knot_centre) / self.knot_sd**2
            self._knot_chain_rule(G, fw, d_tau, np.zeros_like(fw.gaps))
        G[:, self.slices["trend"]] = d_L
        self._nuisance_gradient(G, fw, g, d_logc_lik)
        return G

    def _knot_chain_rule(self, G, fw, d_tau, d_gap):
        """Gradient in the knot logits z from d/d tau and a direct d/d gap term."""
        K, p = self.K, fw.p
        # tau_j = gap_1 + ... + gap_j for j = 1..K-1
        d_gap = d_gap.copy()
        d_gap[:, :-1] += np.cumsum(d_tau[:, ::-1], axis=1)[:, ::-1]
        d_p = self.slack * d_gap
        d_z = p[:, :-1] * (d_p[:, :-1] - (p * d_p).sum(axis=1, keepdims=True))
        d_z += 1.0 - K * p[:, :-1]  # the uniform prior's Jacobian, sum of log p
        G[:, self.slices["z"]] = d_z

    def _nuisance_gradient(self, G, fw, g, d_logc_lik):
        """Day-of-week and dispersion parts of the gradient."""
        if self.weekday:
            d_w7 = g @ self._dow_onehot.astype(g.dtype) - fw.w7 / self.weekday_sd**2
            G[:, self.slices["weekday"]] = d_w7[:, :6] - d_w7[:, 6:7]
        if self.negbin:
            c = np.exp(fw.log_c)
            G[:, self.slices["log_c"]] = (d_logc_lik + 1.0 - (c / self.c_scale) ** 2)[:, None]

    def _log_prior(self, theta, p, gaps, tau, eta, r, jumps):
        lp = np.log(p).sum(axis=1)  # uniform ordered knots (Jacobian of z -> p)
        if self.knot_centre is not None:
            lp -= 0.5 * (((tau - self.knot_centre) / self.knot_sd) ** 2).sum(axis=1)
        lp -= 0.5 * ((eta[:, 0] - self.level_centre) / self.level_sd) ** 2
        if not self.flat:  # rates are zero in the flat model, with no prior
            lp -= 0.5 * ((r / self.rate_sd) ** 2).sum(axis=1) + np.log(gaps).sum(axis=1)
        if jumps is not None:
            lp -= 0.5 * ((jumps / self.jump_sd) ** 2).sum(axis=1)
        if self.weekday:
            lp -= 0.5 * ((self.weekday7(theta) / self.weekday_sd) ** 2).sum(axis=1)
        if self.negbin:
            log_c = theta[:, self.slices["log_c"]][:, 0]
            lp += log_c - 0.5 * (np.exp(log_c) / self.c_scale) ** 2
        return lp

class _Forward:
    """Intermediate arrays of one forward pass (internal)."""

    __slots__ = ("p", "gaps", "tau", "eta", "r", "beta", "jumps", "w7", "logmu", "mu",
                 "phi", "log_c", "hinge", "ramp", "inside")

    def __init__(self, *values):
        for name, value in zip(self.__slots__, values):
            setattr(self, name, value)


def _rows(theta):
    theta = np.asarray(theta, dtype=float)
    if theta.ndim == 1:
        theta = theta[None, :]
    return theta
