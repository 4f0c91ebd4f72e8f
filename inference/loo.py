"""PSIS-LOO cross-validation and stacking weights of models.

* Pareto-smoothed importance sampling: Vehtari, Simpson, Gelman, Yao & Gabry
  (2024), "Pareto smoothed importance sampling", JMLR 25(72) ("VSGYG 2024"),
  with the generalized Pareto fit of Zhang & Stephens (2009), "A new and
  efficient estimation method for the generalized Pareto distribution",
  Technometrics, plus the weakly informative prior on k that ArviZ 0.23.4
  uses (k shrunk towards 0.5 with the weight of 10 observations).
* PSIS-LOO: Vehtari, Gelman & Gabry (2017), "Practical Bayesian model
  evaluation using leave-one-out cross-validation and WAIC", Statistics and
  Computing 27 ("VGG 2017").
* Stacking: Yao, Vehtari, Simpson & Gelman (2018), "Using
  stacking to average Bayesian predictive distributions", Bayesian Analysis
  ("YVSG 2018").

The arithmetic reproduces ArviZ 0.23.4 (``az.psislw``, ``az.loo``,
``az.compare``) step for step. Conventions to know:

* ``reff`` (relative MCMC efficiency, sets the tail length) is an argument,
  default 1.0. ArviZ's default is the mean of ``ess(method="mean")`` over all
  posterior scalars divided by the number of draws (1.0 for one chain); that
  value is :func:`relative_eff` of the posterior draws. The R package loo
  instead uses a per-observation efficiency of exp(log_lik); not done here.
* ``se`` is sqrt(n var(elpd_i)) with the population variance (ddof 0), as
  ArviZ; the R package uses ddof 1 (relative difference sqrt(n/(n-1))).
* ``n_bad_k`` counts k-hat > 0.7 (the fixed threshold of VSGYG 2024);
  ``good_k`` reports ArviZ's sample-size dependent threshold
  min(1 - 1/log10(S), 0.7) as well.

Only numpy and scipy are used.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import logsumexp as _logsumexp

from .diagnostics import ess_mean as _ess_mean

__all__ = [
    "psis_smooth",
    "loo",
    "relative_eff",
    "stacking_weights",
]

#: k-hat above this: the importance-sampling estimate is unreliable
#: (VSGYG 2024; ArviZ uses min(1 - 1/log10(S), 0.7)).
BAD_K = 0.7

#: Zhang & Stephens (2009) / ArviZ prior constants for the GPD fit.
_PRIOR_BS = 3
_PRIOR_K = 10


def _gpdfit(x):
    """Generalized Pareto fit to sorted exceedances ``x`` (n,) > 0.

    Zhang & Stephens (2009) empirical-Bayes estimate: a grid of m = 30 +
    floor(sqrt(n)) values of b = -k/sigma, profile likelihood weights, the
    posterior mean of b, then k = mean(log1p(-b x)), sigma = -k/b; finally
    k is shrunk towards 0.5 with weight 10 observations (the prior ArviZ
    0.23.4 ``_gpdfit`` uses).

    Returns
    -------
    (float, float)
        k-hat (shape, dimensionless) and sigma (scale, units of ``x``).
    """
    n = len(x)
    m_est = 30 + int(n**0.5)
    b_ary = 1 - np.sqrt(m_est / (np.arange(1, m_est + 1, dtype=float) - 0.5))
    b_ary /= _PRIOR_BS * x[int(n / 4 + 0.5) - 1]
    b_ary += 1 / x[-1]
    k_ary = np.log1p(-b_ary[:, None] * x).mean(axis=1)
    len_scale = n * (np.log(-(b_ary / k_ary)) - k_ary - 1)
    weights = 1 / np.exp(len_scale - len_scale[:, None]).sum(axis=1)
    real = weights >= 10 * np.finfo(float).eps
    if not np.all(real):
        weights = weights[real]
        b_ary = b_ary[real]
    weights /= weights.sum()
    b_post = np.sum(b_ary * weights)
    k_post = np.log1p(-b_post * x).mean()
    sigma = -k_post / b_post
    k_post = (n * k_post + _PRIOR_K * 0.5) / (n + _PRIOR_K)
    return k_post, sigma


def _gpinv(probs, kappa, sigma):
    """Generalized Pareto quantile function at ``probs`` in (0, 1)."""
    if sigma <= 0:
        return np.full_like(probs, np.nan)
    if np.abs(kappa) < np.finfo(float).eps:
        x = -np.log1p(-probs)
    else:
        x = np.expm1(-kappa * np.log1p(-probs)) / kappa
    return x * sigma


def _psis_1d(lr, cutoff_ind, cutoffmin, normalize):
    """PSIS for one vector of log ratios (S,); ArviZ 0.23.4 ``_psislw``."""
    x = np.array(lr, dtype=float)
    max_x = np.max(x)
    x -= max_x
    order = np.argsort(x)
    xcutoff = max(x[order[cutoff_ind]], cutoffmin)
    expxcutoff = np.exp(xcutoff)
    (tailinds,) = np.where(x > xcutoff)
    x_tail = x[tailinds]
    tail_len = len(x_tail)
    if tail_len <= 4:
        k = np.inf  # too few tail draws to fit a GPD
    else:
        tail_order = np.argsort(x_tail)
        x_tail = np.exp(x_tail) - expxcutoff
        k, sigma = _gpdfit(x_tail[tail_order])
        if np.isfinite(k):
            # VSGYG 2024 (PSIS algorithm): replace the M largest weights by the
            # expected order statistics of the fitted GPD, then truncate at
            # the largest raw weight.
            sti = np.arange(0.5, tail_len) / tail_len
            smoothed = np.log(_gpinv(sti, k, sigma) + expxcutoff)
            x[tailinds[tail_order]] = smoothed
            x[x > 0] = 0
    if normalize:
        x -= _logsumexp(x)
    else:
        x += max_x
    return x, k


def psis_smooth(log_ratios, reff=1.0, normalize=True):
    """Pareto-smoothed importance sampling of log importance ratios.

    VSGYG 2024 (the PSIS algorithm): the M = ceil(min(S/5, 3 sqrt(S/reff)))
    largest ratios are replaced by expected order statistics of a generalized
    Pareto distribution fitted (Zhang & Stephens 2009) to the exceedances
    over the (M+1)-th largest, then truncated at the largest raw ratio;
    k-hat is the fitted shape. Same as ArviZ 0.23.4 ``az.psislw`` (which
    takes samples on the *last* axis; here they are on the first).

    Parameters
    ----------
    log_ratios : array_like, shape (S,) or (S, n)
        Log importance ratios, draws on axis 0 (for LOO: -log_lik).
    reff : float, default 1.0
        Relative efficiency ESS / S of the draws (> 0); sets the tail length.
    normalize : bool, default True
        Return log weights that sum (in exp) to 1 over the draws.

    Returns
    -------
    log_weights : numpy.ndarray, same shape as ``log_ratios``
        Smoothed (and normalised) log weights.
    khat : float or numpy.ndarray of shape (n,)
        Pareto shape estimates (dimensionless); ``inf`` when the tail has 4
        or fewer draws (too few to fit, so no smoothing was done).
    """
    a = np.asarray(log_ratios, dtype=float)
    if a.ndim not in (1, 2):
        raise ValueError(f"log_ratios must be (S,) or (S, n), got shape {a.shape}")
    reff = float(reff)
    if not reff > 0:
        raise ValueError(f"reff must be > 0, got {reff}")
    one = a.ndim == 1
    a2 = a[:, None] if one else a
    s = a2.shape[0]
    cutoff_ind = -int(np.ceil(min(s / 5.0, 3 * (s / reff) ** 0.5))) - 1
    cutoffmin = np.log(np.finfo(float).tiny)
    lw = np.empty_like(a2)
    ks = np.empty(a2.shape[1])
    for i in range(a2.shape[1]):
        lw[:, i], ks[i] = _psis_1d(a2[:, i], cutoff_ind, cutoffmin, normalize)
    if one:
        return lw[:, 0], float(ks[0])
    return lw, ks


def relative_eff(posterior):
    """ArviZ 0.23.4's default ``reff`` for :func:`loo`.

    Mean over all posterior scalars of ``ess_mean`` (VGSCB 2021, see
    :mod:`inference.diagnostics`) divided by the number of draws S; 1.0 for a
    single chain (ArviZ ``az.loo`` convention, not a paper's).

    Parameters
    ----------
    posterior : mapping of str to array_like, or array_like
        Draws shaped (chains, draws[, ...]) (a mapping is pooled over all
        its entries; all must share chains and draws).

    Returns
    -------
    float
        Relative efficiency (dimensionless, > 0).
    """
    if isinstance(posterior, dict):
        arrays = [np.asarray(v, dtype=float) for v in posterior.values()]
    else:
        arrays = [np.asarray(posterior, dtype=float)]
    arrays = [v[None] if v.ndim == 1 else v for v in arrays]
    c, n = arrays[0].shape[:2]
    if c == 1:
        return 1.0
    ess = np.concatenate([np.atleast_1d(_ess_mean(v)).ravel() for v in arrays])
    return float(ess.mean() / (c * n))


def loo(log_lik, reff=1.0):
    """PSIS-LOO estimate of the expected log pointwise predictive density.

    VGG 2017 (PSIS-LOO estimate of elpd) with PSIS weights (VSGYG 2024):
    elpd_i = log sum_s w_is p(y_i | theta_s), w the normalised smoothed
    weights of the ratios 1/p(y_i | theta_s); elpd_loo = sum_i elpd_i;
    se = sqrt(n var(elpd_i)) (ddof 0, ArviZ's convention; VGG 2017 write
    the sample variance); p_loo = lppd - elpd_loo with
    lppd = sum_i log mean_s p(y_i | theta_s) (VGG 2017, lppd and p_loo).
    Same as ArviZ 0.23.4 ``az.loo(idata, pointwise=True, reff=reff)``.

    Parameters
    ----------
    log_lik : array_like, shape (chains, draws, n) or (draws, n)
        Pointwise log likelihood log p(y_i | theta_s), nats. Chains are
        pooled chain-major (the order ArviZ stacks them in).
    reff : float, default 1.0
        Relative efficiency passed to :func:`psis_smooth`; use
        :func:`relative_eff` of the posterior draws for ArviZ's default.

    Returns
    -------
    dict
        JSON-safe: ``elpd_loo`` (nats), ``se`` (nats), ``p_loo`` (effective
        number of parameters), ``elpd_pointwise`` (list of n floats, nats),
        ``pareto_k`` (list of n floats; ``None`` where the tail was too short
        to fit), ``n_bad_k`` (count of k-hat > 0.7), ``good_k`` (ArviZ's
        threshold min(1 - 1/log10(S), 0.7)), ``n_samples`` (S),
        ``n_data_points`` (n).
    """
    ll = np.asarray(log_lik, dtype=float)
    if ll.ndim == 3:
        ll = ll.reshape(ll.shape[0] * ll.shape[1], ll.shape[2])
    if ll.ndim != 2:
        raise ValueError(
            f"log_lik must be (chains, draws, n) or (draws, n), got shape {np.shape(log_lik)}"
        )
    s, n = ll.shape
    if s < 2 or n < 1:
        raise ValueError(f"need at least 2 draws and 1 observation, got shape {ll.shape}")
    if not np.all(np.isfinite(ll)):
        raise ValueError("log_lik contains NaN or infinite values")
    lw, ks = psis_smooth(-ll, reff=reff, normalize=True)
    elpd_i = _logsumexp(lw + ll, axis=0)
    elpd = float(elpd_i.sum())
    se = float(math.sqrt(n * np.var(elpd_i)))
    lppd = float(np.sum(_logsumexp(ll, axis=0) - np.log(s)))
    good_k = min(1 - 1 / np.log10(s), BAD_K)
    return {
        "elpd_loo": elpd,
        "se": se,
        "p_loo": lppd - elpd,
        "elpd_pointwise": [float(v) for v in elpd_i],
        "pareto_k": [float(k) if np.isfinite(k) else None for k in ks],
        "n_bad_k": int(np.sum(ks > BAD_K)),
        "good_k": float(good_k),
        "n_samples": int(s),
        "n_data_points": int(n),
    }


def stacking_weights(pointwise_elpd):
    """Stacking weights of K models from their pointwise LOO log densities.

    YVSG 2018 (stacking of predictive distributions using LOO predictive
    densities; recalled from the paper, no section number): maximise over
    the simplex
    sum_i log sum_k w_k exp(elpd_ik). The objective is concave; it is solved
    with SLSQP (bounds 0 <= w <= 1, sum w = 1), with each row shifted by its
    maximum before exponentiating so that very negative elpd_ik do not
    underflow (the shift changes the objective by a constant only).

    Parameters
    ----------
    pointwise_elpd : array_like, shape (n, K)
        elpd_i of each observation (row) under each model (column), nats,
        e.g. ``loo(...)["elpd_pointwise"]`` stacked as columns.

    Returns
    -------
    numpy.ndarray, shape (K,)
        Weights >= 0 summing to 1, in the column order.
    """
    lpd = np.asarray(pointwise_elpd, dtype=float)
    if lpd.ndim != 2 or lpd.shape[0] < 1 or lpd.shape[1] < 1:
        raise ValueError(f"pointwise_elpd must be (observations, models), got shape {lpd.shape}")
    if not np.all(np.isfinite(lpd)):
        raise ValueError("pointwise_elpd contains NaN or infinite values")
    n, k = lpd.shape
    if k == 1:
        return np.ones(1)
    dens = np.exp(lpd - lpd.max(axis=1, keepdims=True))

    def objective(w):
        return -np.sum(np.log(dens @ w)) / n

    def gradient(w):
        return -np.sum(dens / (dens @ w)[:, None], axis=0) / n

    # imported here, not at the top: scipy.optimize costs ~0.1 s to import and
    # only the segment comparison needs it, not every fit
    from scipy import optimize as _opt

    res = _opt.minimize(
        objective,
        np.full(k, 1.0 / k),
        jac=gradient,
        method="SLSQP",
        bounds=[(0.0, 1.0)] * k,
        constraints=[{"type": "eq", "fun": lambda w: np.sum(w) - 1.0, "jac": lambda w: np.ones(k)}],
        options={"ftol": 1e-12, "maxiter": 1000},
    )
    w = np.clip(res.x, 0.0, None)
    return w / w.sum()
