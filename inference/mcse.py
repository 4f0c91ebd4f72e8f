"""Monte Carlo standard errors and the per-parameter summary table.

:func:`mcse_mean`, :func:`mcse_quantile` and :func:`summarize`, built on the
rank normalisation, split chains, R-hat and ESS of :mod:`inference.diagnostics`
(which re-exports all three). The references, the array layout
(``(chains, draws, *param_shape)``) and the answers on degenerate input are
those described there; like it, this module gives the same numbers as
ArviZ 0.23.4 (``az.mcse(method="mean" | "quantile")``, ``az.summary``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
from scipy import stats as _stats

from .diagnostics import (
    bad_params,
    check_prob,
    ess_core,
    ess_quantile_pcn,
    ess_tail_pcn,
    as_param_shape,
    rhat_rank_pcn,
    split_pcn,
    to_pcn,
    z_scale_pcn,
)

__all__ = ["mcse_mean", "mcse_quantile", "summarize"]

#: Normal probabilities of -1 and +1 sd, used by ArviZ's quantile MCSE
#: (VGSCB 2021, MCSE of quantiles) as the ends of a 68% interval.
_MCSE_Q_PROBS = np.array([0.1586553, 0.8413447])


def mcse_mean(x):
    """Monte Carlo standard error of the posterior mean.

    MCSE = sd / sqrt(ESS_mean), sd over all draws with ddof = 1
    (VGSCB 2021 section 3.2); same as ``arviz.mcse(x, method="mean")``
    (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, in the parameter's units.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Standard error, in the parameter's units.
    """
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        ess = ess_core(split_pcn(a))
        sd = a.reshape(a.shape[0], -1).std(axis=1, ddof=1)
        res = sd / np.sqrt(ess)
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def mcse_quantile(x, prob):
    """Monte Carlo standard error of the ``prob`` quantile.

    VGSCB 2021 section 4.4 (MCSE of quantiles): with S_q the quantile ESS, the draws' order
    statistics at the Beta(S_q p + 1, S_q (1 - p) + 1) quantiles
    0.1586553 and 0.8413447 (+-1 normal sd) bracket the quantile; MCSE is half
    their distance. Index rounding (floor for the lower, ceil for the upper,
    0-based ``ppf * S - 1``) as in ArviZ 0.23.4
    ``arviz.mcse(x, method="quantile", prob=prob)``.

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, in the parameter's units.
    prob : float
        Quantile level in (0, 1).

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Standard error, in the parameter's units.
    """
    prob = check_prob(prob)
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    p = a.shape[0]
    res = np.full(p, np.nan)
    if not bad.all():
        ess = ess_quantile_pcn(a, prob)
        with np.errstate(invalid="ignore"):
            ppf = _stats.beta.ppf(
                _MCSE_Q_PROBS[None, :],
                ess[:, None] * prob + 1,
                ess[:, None] * (1 - prob) + 1,
            )
        xs = np.sort(a.reshape(p, -1), axis=1)
        size = xs.shape[1]
        ppf_size = ppf * size - 1
        lo = np.floor(np.fmax(ppf_size[:, 0], 0)).astype(int)
        hi = np.ceil(np.fmin(ppf_size[:, 1], size - 1)).astype(int)
        rows = np.arange(p)
        res = (xs[rows, hi] - xs[rows, lo]) / 2
        res[bad] = np.nan
    return as_param_shape(res, pshape)



def _json_float(v):
    v = float(v)
    return v if math.isfinite(v) else None


def summarize(draws, names=None):
    """Posterior summary and convergence diagnostics per parameter.

    Parameters
    ----------
    draws : mapping of str to array_like, or array_like
        Either ``{name: array (chains, draws) or (chains, draws, *shape)}``
        (a parameter with a shape is expanded to ``name[i]`` / ``name[i,j]``,
        C order), or one array shaped (chains, draws, params) (or
        (chains, draws) for a single parameter). All arrays must share
        chains and draws.
    names : sequence of str, optional
        Parameter names for the array form (default ``x[0]``, ``x[1]``, ...);
        ignored for a mapping.

    Returns
    -------
    list of dict
        One dict per parameter, in order, with JSON-safe values (Python
        floats; NaN and infinities become ``None``):
        ``name``; ``mean``; ``sd`` (ddof = 1, as ``arviz.summary``); ``q05``,
        ``q50``, ``q95`` (type-7 quantiles of all draws), all in the
        parameter's units; ``rhat`` (:func:`rhat`); ``ess_bulk``,
        ``ess_tail`` (counts); ``mcse_mean`` (parameter units).
    """
    if isinstance(draws, Mapping):
        labels, columns = [], []
        shape0 = None
        for name, value in draws.items():
            arr = np.asarray(value, dtype=float)
            if arr.ndim == 1:
                arr = arr[None, :]
            if arr.ndim < 2:
                raise ValueError(f"{name}: expected (chains, draws[, ...]), got shape {arr.shape}")
            if shape0 is None:
                shape0 = arr.shape[:2]
            elif arr.shape[:2] != shape0:
                raise ValueError(
                    f"{name}: (chains, draws) = {arr.shape[:2]} differs from {shape0}"
                )
            tail = arr.shape[2:]
            flat = arr.reshape(arr.shape[:2] + (-1,))
            if tail:
                for idx in np.ndindex(*tail):
                    labels.append(f"{name}[{','.join(str(i) for i in idx)}]")
            else:
                labels.append(str(name))
            columns.append(flat)
        if not columns:
            return []
        arr = np.concatenate(columns, axis=2)
    else:
        arr = np.asarray(draws, dtype=float)
        if arr.ndim == 1:
            arr = arr[None, :]
        if arr.ndim == 2:
            arr = arr[:, :, None]
        if arr.ndim != 3:
            raise ValueError(f"expected (chains, draws, params), got shape {arr.shape}")
        n_par = arr.shape[2]
        if names is None:
            labels = [f"x[{i}]" for i in range(n_par)]
        else:
            labels = [str(s) for s in names]
            if len(labels) != n_par:
                raise ValueError(f"{len(labels)} names for {n_par} parameters")

    a, _ = to_pcn(arr)
    p = a.shape[0]
    flat = a.reshape(p, -1)
    bad1 = bad_params(a)
    bad2 = bad_params(a, min_chains=2)
    nan = np.full(p, np.nan)
    with np.errstate(invalid="ignore"):
        mean = flat.mean(axis=1)
        sd = flat.std(axis=1, ddof=1) if flat.shape[1] > 1 else nan
        qs = np.quantile(flat, [0.05, 0.5, 0.95], axis=1)
    if bad1.all():
        r_hat, e_bulk, e_tail, m_mean = nan, nan, nan, nan
    else:
        split = split_pcn(a)
        z_split = z_scale_pcn(split)
        r_hat = rhat_rank_pcn(a, z_split) if not bad2.all() else nan.copy()
        r_hat = np.where(bad2, np.nan, r_hat)
        e_bulk = np.where(bad1, np.nan, ess_core(z_split))
        e_tail = np.where(bad1, np.nan, ess_tail_pcn(a))
        e_mean = ess_core(split)
        m_mean = np.where(bad1, np.nan, sd / np.sqrt(e_mean))
    rows = []
    for i in range(p):
        rows.append(
            {
                "name": labels[i],
                "mean": _json_float(mean[i]),
                "sd": _json_float(sd[i]),
                "q05": _json_float(qs[0, i]),
                "q50": _json_float(qs[1, i]),
                "q95": _json_float(qs[2, i]),
                "rhat": _json_float(r_hat[i]),
                "ess_bulk": _json_float(e_bulk[i]),
                "ess_tail": _json_float(e_tail[i]),
                "mcse_mean": _json_float(m_mean[i]),
            }
        )
    return rows
