"""Convergence diagnostics for MCMC draws: R-hat and ESS.

Everything follows Vehtari, Gelman, Simpson, Carpenter & Bürkner (2021),
"Rank-normalization, folding, and localization: an improved R-hat for
assessing convergence of MCMC", *Bayesian Analysis*
(cited below as "VGSCB 2021"; the section numbers 3.2 for multi-chain
ESS and 4.4 for quantile MCSE are from the first author's announcement of
the revised preprint, recalled, not checked against the journal text; other
pieces are cited by name), and is written to give the same numbers as
ArviZ 0.23.4 (``az.rhat(method="rank")``, ``az.ess(method="bulk" | "tail" |
"mean")``, ``az.mcse(method="mean" | "quantile")``), whose implementation
choices (Blom offset 3/8 in the rank transform, R's type-7 quantile, the
``1 / log10(S)`` floor on the autocorrelation time, dropping the middle draw
of an odd-length chain when splitting) are reproduced here.

Array layout
------------
Every function takes draws shaped ``(chains, draws)`` or
``(chains, draws, *param_shape)`` (a 1-D array is one chain). The
diagnostic is computed per parameter, vectorised over the trailing axes;
a 2-D input gives a Python ``float``, a ``(chains, draws, P)`` input gives an
array of shape ``(P,)``.

Degenerate input (same answers as ArviZ 0.23.4)
------------------------------------------------
* fewer than 4 draws per chain, or any NaN in a parameter: NaN;
* R-hat with a single chain: NaN (ArviZ requires two chains even though the
  split halves would give two);
* a constant parameter: R-hat is NaN (0/0: no within-chain variance to
  compare with); every ESS is the number of (split) draws, because
  ArviZ short-circuits an array whose range is below ``finfo(float).resolution``;
  ``mcse_mean`` and ``mcse_quantile`` are then 0.

Monte Carlo standard errors (``mcse_mean``, ``mcse_quantile``) and the
per-parameter table (``summarize``) are in :mod:`inference.mcse`, built on
the estimators here, and are re-exported from this module.

Only numpy and scipy are used; nothing here imports ArviZ.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
from scipy import fft as _sfft
from scipy import special as _special

if TYPE_CHECKING:  # at run time they come from __getattr__ below
    from .mcse import mcse_mean, mcse_quantile, summarize

__all__ = [
    "split_chains",
    "rank_normalize",
    "rhat",
    "ess_bulk",
    "ess_tail",
    "ess_mean",
    "ess_quantile",
    "mcse_mean",
    "mcse_quantile",
    "nested_rhat",
    "summarize",
]

#: Fewer draws per chain than this gives NaN (ArviZ 0.23.4's ``min_draws``).
MIN_DRAWS = 4

#: Blom (1958) offset in the rank transform, as VGSCB 2021 use (rank normalisation).
_BLOM_C = 3.0 / 8.0


# ---------------------------------------------------------------------------
# array plumbing
# ---------------------------------------------------------------------------


def to_pcn(x):
    """(chains, draws, *shape) -> float array (P, C, N) and the param shape."""
    a = np.asarray(x, dtype=float)
    if a.ndim == 0:
        raise ValueError("expected draws shaped (chains, draws[, ...]), got a scalar")
    if a.ndim == 1:
        a = a[None, :]
    c, n = a.shape[:2]
    pshape = a.shape[2:]
    p = int(np.prod(pshape)) if pshape else 1
    pcn = np.moveaxis(a.reshape(c, n, p), 2, 0)
    return np.ascontiguousarray(pcn), pshape


def as_param_shape(values, pshape):
    """(P,) -> float for scalar parameters, else array of the param shape."""
    values = np.asarray(values, dtype=float)
    if pshape == ():
        return float(values[0])
    return values.reshape(pshape)


def split_pcn(a):
    """Split each chain in halves, as ArviZ does: (P, C, N) -> (P, 2C, N//2).

    With an odd N the middle draw is dropped (``x[:, :half]`` and
    ``x[:, -half:]``). VGSCB 2021 (split-R-hat).
    """
    half = a.shape[2] // 2
    return np.concatenate([a[:, :, :half], a[:, :, a.shape[2] - half:]], axis=1)


def _average_ranks(flat):
    """1-based ranks of each row of ``flat`` (P, S), ties given their average.

    Same values as ``scipy.stats.rankdata(flat, method="average", axis=1)``
    (ranks are exact integers or half-integers), computed from one argsort
    per row, which is several times faster for the sizes the sampler sees.
    """
    p, s = flat.shape
    order = np.argsort(flat, axis=1)
    xs = np.take_along_axis(flat, order, axis=1)
    new_run = np.empty((p, s), dtype=bool)
    new_run[:, 0] = True
    np.not_equal(xs[:, 1:], xs[:, :-1], out=new_run[:, 1:])
    idx = np.arange(s)
    if new_run.all():
        avg = np.broadcast_to(idx + 1.0, (p, s))
    else:
        start = np.maximum.accumulate(np.where(new_run, idx, 0), axis=1)
        run_end = np.empty((p, s), dtype=bool)
        run_end[:, -1] = True
        run_end[:, :-1] = new_run[:, 1:]
        end = np.minimum.accumulate(np.where(run_end, idx, s - 1)[:, ::-1], axis=1)[:, ::-1]
        avg = (start + end) / 2.0 + 1.0
    ranks = np.empty((p, s))
    np.put_along_axis(ranks, order, avg, axis=1)
    return ranks


def z_scale_pcn(a):
    """Rank-normalise each parameter over all its chains and draws jointly.

    VGSCB 2021 (rank normalisation): z = Phi^-1((r - 3/8) / (S - 2*3/8 + 1)), r the
    average rank among all S draws of the parameter.
    """
    p, c, n = a.shape
    size = c * n
    ranks = _average_ranks(a.reshape(p, size))
    z = _special.ndtri((ranks - _BLOM_C) / (size - 2 * _BLOM_C + 1))
    return z.reshape(p, c, n)


def bad_params(a, min_chains=1):
    """Mask (P,) of parameters ArviZ 0.23.4 would refuse (NaN or too short)."""
    p, c, n = a.shape
    bad = np.isnan(a).any(axis=(1, 2))
    if n < MIN_DRAWS or c < min_chains:
        bad = np.ones(p, dtype=bool)
    return bad


def _type7_quantile(flat, prob):
    """R's type-7 quantile of each row of ``flat`` (P, S), as mquantiles does.

    Reproduces ``scipy.stats.mstats.mquantiles(alphap=1, betap=1)``
    (Hyndman & Fan 1996, definition 7), which ArviZ uses, operation for
    operation so that indicator functions ``x <= q`` agree exactly.
    """
    s = flat.shape[1]
    xs = np.sort(flat, axis=1)
    if s == 1:
        return xs[:, 0]
    aleph = s * prob + (1.0 - prob)
    k = int(np.floor(np.clip(aleph, 1, s - 1)))
    gamma = float(np.clip(aleph - k, 0, 1))
    return (1.0 - gamma) * xs[:, k - 1] + gamma * xs[:, k]


# ---------------------------------------------------------------------------
# core estimators on (P, C, N)
# ---------------------------------------------------------------------------


def _rhat_core(a):
    """Classic (non-split) potential scale reduction of each row of (P, C, N).

    Gelman et al. (2013) BDA3 chapter 11 / VGSCB 2021 (review of R-hat):
    B = N var(chain means), W = mean within-chain variance,
    R = sqrt(((N - 1)/N W + B/N) / W).
    """
    n = a.shape[2]
    with np.errstate(invalid="ignore", divide="ignore"):
        chain_mean = a.mean(axis=2)
        chain_var = a.var(axis=2, ddof=1)
        between = n * chain_mean.var(axis=1, ddof=1)
        within = chain_var.mean(axis=1)
        return np.sqrt((between / within + n - 1) / n)


def _autocov(a):
    """Autocovariance at every lag along the last axis, by FFT.

    Biased estimator (divide by N), as ArviZ and VGSCB 2021 use;
    zero-padded to the next 5-smooth length >= 2N (same as ArviZ's
    ``scipy.fftpack.next_fast_len``) so that there is no wrap-around.
    """
    n = a.shape[-1]
    m = _sfft.next_fast_len(2 * n, real=True)
    centred = a - a.mean(axis=-1, keepdims=True)
    f = np.fft.rfft(centred, n=m, axis=-1)
    f *= np.conjugate(f)
    cov = np.fft.irfft(f, n=m, axis=-1)[..., :n]
    cov /= n
    return cov


def ess_core(a):
    """Multi-chain ESS of each row of (P, C, N) (no splitting or ranking here).

    VGSCB 2021 section 3.2 (multi-chain ESS): the combined autocorrelation
    rho_t = 1 - (W - mean_c acov_c(t)) / var_plus, truncated by Geyer's
    (1992) initial positive sequence on pair sums P_j = rho_2j + rho_2j+1 and
    made monotone (initial monotone sequence), tau = -1 + 2 sum_j P_j (+ the
    last positive even lag as ArviZ/Stan add), tau floored at 1/log10(S),
    ESS = S / tau. Vectorised form of ArviZ 0.23.4 ``_ess`` (its Python
    loop is replaced by the equivalent first-stop index and a cumulative
    minimum).
    """
    p, c, n = a.shape
    size = c * n
    out = np.empty(p)

    span = a.max(axis=(1, 2)) - a.min(axis=(1, 2))
    const = span < np.finfo(float).resolution

    acov = _autocov(a)
    chain_mean = a.mean(axis=2)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_var = acov[:, :, 0].mean(axis=1) * n / (n - 1.0)
        var_plus = mean_var * (n - 1.0) / n
        if c > 1:
            var_plus = var_plus + chain_mean.var(axis=1, ddof=1)

        jmax = max(0, math.ceil((n - 4) / 2))
        n_lags = 2 * jmax + 2
        rho = 1.0 - (mean_var[:, None] - acov[:, :, :n_lags].mean(axis=1)) / var_plus[:, None]
        rho[:, 0] = 1.0

        pairs = rho[:, 0::2] + rho[:, 1::2]  # (P, jmax + 1)
        j = np.arange(jmax + 1)
        # Geyer's initial positive sequence stops at the first pair that is
        # not > 0, or when the next pair would run past the chain.
        stop = (2 * j + 1 >= n - 3)[None, :] | ~(pairs > 0)
        big_j = np.argmax(stop, axis=1)
        mono = np.minimum.accumulate(pairs, axis=1)  # initial monotone sequence
        keep = j[None, :] < big_j[:, None]
        total = np.where(keep, mono, 0.0).sum(axis=1)
        rows = np.arange(p)
        even_last = rho[rows, 2 * big_j]
        pair_last = pairs[rows, big_j]
        last = np.where((pair_last >= 0) | (even_last > 0), even_last, 0.0)
        tau = -1.0 + 2.0 * total + last
        floor = 1.0 / np.log10(size)
        tau = np.where(floor > tau, floor, tau)
        ess = size / tau
        ess = np.where(np.isnan(rho[:, 1]), np.nan, ess)

    out[:] = ess
    out[const] = float(size)
    return out


def ess_quantile_pcn(a, prob):
    """ESS of the indicator I(x <= q_prob), VGSCB 2021 (quantile ESS)."""
    p, c, n = a.shape
    q = _type7_quantile(a.reshape(p, c * n), prob)
    ind = (a <= q[:, None, None]).astype(float)
    return ess_core(split_pcn(ind))


def ess_tail_pcn(a):
    """min(ESS of I(x <= q05), ESS of I(x <= q95)), VGSCB 2021 (tail-ESS)."""
    low = ess_quantile_pcn(a, 0.05)
    high = ess_quantile_pcn(a, 0.95)
    # Python's min(low, high), as ArviZ uses: keep `low` unless high < low.
    return np.where(high < low, high, low)


def rhat_rank_pcn(a, z_split=None):
    """Rank-normalised split R-hat, max of bulk and folded (VGSCB 2021)."""
    split = split_pcn(a)
    if z_split is None:
        z_split = z_scale_pcn(split)
    bulk = _rhat_core(z_split)
    p, c2, h = split.shape
    med = np.median(split.reshape(p, c2 * h), axis=1)
    folded = np.abs(split - med[:, None, None])
    tail = _rhat_core(z_scale_pcn(folded))
    # Python's max(bulk, tail), as ArviZ uses: keep `bulk` unless tail > bulk.
    return np.where(tail > bulk, tail, bulk)


# ---------------------------------------------------------------------------
# public API
# ---------------------------------------------------------------------------


def split_chains(x):
    """Split every chain into its first and second half.

    VGSCB 2021 ("split-R-hat"): each chain of N draws becomes two
    chains of N // 2 draws; with N odd the middle draw is dropped, as ArviZ
    0.23.4 does.

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units. A 1-D array is one chain.

    Returns
    -------
    numpy.ndarray, shape (2 * chains, draws // 2, *param_shape)
        Halves stacked on the chain axis: first halves of all chains, then
        second halves.
    """
    a = np.asarray(x)
    if a.ndim == 0:
        raise ValueError("expected draws shaped (chains, draws[, ...]), got a scalar")
    if a.ndim == 1:
        a = a[None, :]
    half = a.shape[1] // 2
    return np.concatenate([a[:, :half], a[:, a.shape[1] - half:]], axis=0)


def rank_normalize(x):
    """Rank-normalise ("z-scale") draws over all chains jointly.

    VGSCB 2021 (rank normalisation): z = Phi^-1((r - 3/8) / (S - 3/4 + 1)) with r the
    average rank (ties averaged) of each draw among all S = chains * draws
    draws of the same parameter (Blom 1958 offset 3/8).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units. A 1-D array is one chain.

    Returns
    -------
    numpy.ndarray, same shape as ``x`` (1-D input gives (1, draws))
        Standard-normal scores, dimensionless. NaN input gives NaN for that
        parameter.
    """
    a, pshape = to_pcn(x)
    z = z_scale_pcn(a)
    c, n = a.shape[1:]
    return np.moveaxis(z, 0, 2).reshape((c, n) + pshape)


def rhat(x):
    """Rank-normalised split R-hat: max of bulk and folded R-hat.

    VGSCB 2021 (rank-normalised split-R-hat): R-hat is computed on the rank-normalised
    split chains (bulk) and on the rank-normalised split chains folded about
    the median, |x - median(x)| (tails); the larger is returned. Same as
    ``arviz.rhat(x, method="rank")`` (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units; at least 2 chains and 4 draws.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Dimensionless, >= 1 up to rounding; close to 1 (VGSCB 2021 suggest
        < 1.01) at convergence. NaN for a single chain, fewer than 4 draws,
        NaN draws, or a constant parameter.
    """
    a, pshape = to_pcn(x)
    bad = bad_params(a, min_chains=2)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        res = rhat_rank_pcn(a)
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def ess_bulk(x):
    """Bulk effective sample size: ESS of the rank-normalised split chains.

    VGSCB 2021 ("bulk-ESS"); same as
    ``arviz.ess(x, method="bulk")`` (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units; at least 4 draws per chain.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Effective number of draws (count, may exceed chains * draws for
        antithetic chains). NaN for fewer than 4 draws or NaN draws.
    """
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        res = ess_core(z_scale_pcn(split_pcn(a)))
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def ess_quantile(x, prob):
    """Effective sample size for the ``prob`` quantile.

    VGSCB 2021 (quantile ESS): ESS of the split-chain indicator I(x <= q), q the
    type-7 sample quantile of all draws. Same as
    ``arviz.ess(x, method="quantile", prob=prob)`` (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units.
    prob : float
        Quantile level in (0, 1).

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Effective number of draws for that quantile (count).
    """
    prob = check_prob(prob)
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        res = ess_quantile_pcn(a, prob)
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def ess_tail(x):
    """Tail effective sample size: min of the 5% and 95% quantile ESS.

    VGSCB 2021 ("tail-ESS"); same as
    ``arviz.ess(x, method="tail")`` (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units; at least 4 draws per chain.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Effective number of draws (count).
    """
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        res = ess_tail_pcn(a)
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def ess_mean(x):
    """Effective sample size for the posterior mean (split chains, no ranks).

    VGSCB 2021 section 3.2 (multi-chain ESS) applied to the split chains of the
    raw draws; same as ``arviz.ess(x, method="mean")`` (ArviZ 0.23.4).

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units; at least 4 draws per chain.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Effective number of draws (count).
    """
    a, pshape = to_pcn(x)
    bad = bad_params(a)
    res = np.full(a.shape[0], np.nan)
    if not bad.all():
        res = ess_core(split_pcn(a))
        res[bad] = np.nan
    return as_param_shape(res, pshape)


def nested_rhat(x, n_superchains):
    """Nested R-hat for many short chains grouped into superchains.

    Margossian, Hoffman, Sountsov, Riou-Durand, Vehtari & Gelman (2022),
    "Nested R-hat: assessing the convergence of Markov chain Monte Carlo when
    running many short chains", arXiv:2110.13017 (identifier from memory).
    Written from memory of the paper's definition, not checked
    against the text or a reference implementation. With K superchains of M
    chains of N draws, chain means theta_.mk, superchain means theta_..k and
    the grand mean theta_...:

    * B_nu = 1/(K-1) sum_k (theta_..k - theta_...)^2   (between superchains)
    * Btilde_k = 1/(M-1) sum_m (theta_.mk - theta_..k)^2  (0 if M = 1)
    * Wtilde_k = 1/M sum_m 1/(N-1) sum_n (theta_nmk - theta_.mk)^2  (0 if N = 1)
    * W_nu = 1/K sum_k (Btilde_k + Wtilde_k)
    * nR-hat = sqrt(1 + B_nu / W_nu)

    No chain splitting and no rank normalisation are applied. With M = 1 this
    is sqrt(1 + var(chain means) / mean within-chain variance), i.e.
    nR-hat^2 - 1 = R-hat^2 - (N - 1)/N for the classic (non-split) R-hat.

    Parameters
    ----------
    x : array_like, shape (chains, draws) or (chains, draws, *param_shape)
        Draws, any units. Chains ``k*M .. (k+1)*M - 1`` form superchain k
        (M = chains // n_superchains): keep chains that share an
        initialisation next to each other.
    n_superchains : int
        K >= 2; must divide the number of chains.

    Returns
    -------
    float or numpy.ndarray of shape param_shape
        Dimensionless, >= 1; NaN for NaN draws, inf when W_nu = 0 but
        B_nu > 0, NaN when both are 0.
    """
    a, pshape = to_pcn(x)
    p, c, n = a.shape
    k = int(n_superchains)
    if k != n_superchains or k < 2:
        raise ValueError(f"n_superchains must be an integer >= 2, got {n_superchains!r}")
    if c % k:
        raise ValueError(f"n_superchains={k} does not divide the number of chains ({c})")
    m = c // k
    if m == 1 and n == 1:
        raise ValueError("nested R-hat needs more than one chain per superchain or more than one draw")
    grouped = a.reshape(p, k, m, n)
    chain_mean = grouped.mean(axis=3)  # (P, K, M)
    super_mean = chain_mean.mean(axis=2)  # (P, K)
    b_nu = super_mean.var(axis=1, ddof=1)
    b_tilde = chain_mean.var(axis=2, ddof=1) if m > 1 else np.zeros((p, k))
    w_tilde = grouped.var(axis=3, ddof=1).mean(axis=2) if n > 1 else np.zeros((p, k))
    w_nu = (b_tilde + w_tilde).mean(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        res = np.sqrt(1.0 + b_nu / w_nu)
    return as_param_shape(res, pshape)


def check_prob(prob):
    prob = float(prob)
    if not 0.0 < prob < 1.0:
        raise ValueError(f"prob must be in (0, 1), got {prob}")
    return prob


# ---------------------------------------------------------------------------
# re-exported from inference.mcse
# ---------------------------------------------------------------------------

# inference.mcse imports the estimators above, so its names are imported on
# first use rather than at the top (either module can then be imported first).
_FROM_MCSE = ("mcse_mean", "mcse_quantile", "summarize")


def __getattr__(name):
    """``mcse_mean``, ``mcse_quantile`` and ``summarize`` from :mod:`inference.mcse`."""
    if name in _FROM_MCSE:
        from . import mcse

        value = getattr(mcse, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_FROM_MCSE))
