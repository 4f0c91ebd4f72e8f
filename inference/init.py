"""Starting points for the chains: a multi-start search for the posterior mode.

The posterior has trap modes where a knot idles in a straight stretch of the
series, each far below the main mode. Chains started there stay for a long
time, so the chains start near the best modes found from many random knot
placements:

1. draw knot placements (uniform over ordered positions with the minimum gap,
   plus the analyst's tentative dates when given);
2. for each, fit the log levels (and weekday and jump terms) by weighted
   least squares on ``log(y + 0.5)``, which is linear given the knots;
3. polish the best of them together by Adam on the batched log density;
4. take a Laplace approximation (finite-difference Hessian) at the best mode
   as the first preconditioner and as the spread of the chains' starts.
"""

from __future__ import annotations

import time

import numpy as np

from .conditional import design, linear_index
from .hmc import safe_cholesky

#: Largest variance the start preconditioner gives any direction, in the
#: sampler's unconstrained coordinates (log levels, knot-gap logits, log
#: dispersion): a standard deviation of 2 there already spans a factor of
#: e^4 in a level or most of a knot's range (common practice, no source).
MAX_START_VARIANCE = 4.0


def random_knots(model, rng, count):
    """Random feasible knot placements, shape (count, K-1), in intervals."""
    K = model.K
    if K == 1:
        return np.zeros((count, 0))
    p = rng.dirichlet(np.ones(K), size=count)
    gaps = model.min_segment + model.slack * p
    knots = np.cumsum(gaps, axis=1)[:, :-1]
    if model.knot_centre is not None:
        # a quarter of the starts near the analyst's dates, pushed into the feasible set
        m = max(1, count // 4)
        near = model.knot_centre + rng.normal(0, 1, (m, K - 1)) * model.knot_sd * 0.5
        knots[:m] = _feasible(model, near)
    return knots


def _feasible(model, knots):
    """Project knot rows onto the ordered, minimum-gap set (clip and sort)."""
    K = model.K
    m = model.min_segment
    out = np.sort(knots, axis=1)
    eps = 1e-6 * max(model.slack, 1.0)
    for j in range(K - 1):
        lo = (j + 1) * m + eps * (j + 1)
        hi = model.t_end - (K - 1 - j) * m - eps * (K - j)
        out[:, j] = np.clip(out[:, j], lo, hi)
        if j > 0:
            out[:, j] = np.maximum(out[:, j], out[:, j - 1] + m + eps)
    return out


def least_squares_starts(model, knots, chunk=32):
    """Fit levels (and weekday, jumps) given knots by weighted least squares.

    Parameters
    ----------
    model : TrendModel
    knots : numpy.ndarray, shape (S, K-1)
    chunk : int
        Placements solved at once (bounds the design arrays' memory).

    Returns
    -------
    numpy.ndarray, shape (S, dim)
        Unconstrained positions.
    """
    if knots.shape[0] > chunk:
        return np.concatenate([
            least_squares_starts(model, knots[i : i + chunk], chunk)
            for i in range(0, knots.shape[0], chunk)
        ])
    S = knots.shape[0]
    idx = model.obs_index
    y = model.y_obs
    target = np.log(y + 0.5) - model.log_completeness[idx]
    w = np.sqrt(y + 0.5)  # sd of log(y) is about 1/sqrt(y) for Poisson counts
    X = design(model, knots)  # levels and jumps, exact interval means
    P_lin = X.shape[2]
    if model.weekday:
        dow = model.dow[idx]
        wd = np.stack([(dow == d).astype(float) - (dow == 6).astype(float) for d in range(6)], axis=1)
        X = np.concatenate([X, np.broadcast_to(wd, (S, idx.size, 6))], axis=2)
    P = X.shape[2]
    Xw = X * w[None, :, None]
    A = np.einsum("snp,snq->spq", Xw, Xw) + 1e-6 * np.eye(P)
    b = np.einsum("snp,n->sp", Xw, target * w)
    coef = np.linalg.solve(A, b[:, :, None])[:, :, 0]
    weekday = None
    if model.weekday:
        w6 = coef[:, P_lin:]
        weekday = np.concatenate([w6, -w6.sum(axis=1, keepdims=True)], axis=1)
    dispersion = None
    if model.negbin:
        fit = np.einsum("snp,sp->sn", X, coef)
        mu = np.exp(fit + model.log_completeness[idx])
        # method of moments: var = mu + mu^2 / phi
        excess = ((y - mu) ** 2 - mu).sum(axis=1) / np.maximum((mu**2).sum(axis=1), 1e-12)
        dispersion = 1.0 / np.clip(excess, 1e-4, 10.0)
    n_levels = model.K if model.flat else model.K + 1
    theta = model.unconstrain(knots, np.zeros((S, n_levels)), weekday=weekday, dispersion=dispersion)
    theta[:, linear_index(model)] = coef[:, :P_lin]
    return theta


def adam_polish(model, theta, iterations=150, lr=0.05, deadline=None, clock=time.monotonic):
    """Maximise the log density of every row together with Adam.

    Kingma & Ba (2015), "Adam: a method for stochastic optimization"; the
    defaults beta1 = 0.9, beta2 = 0.999 from that paper. Rows that leave the
    support are moved back to their last finite point.

    Returns
    -------
    (theta, lp) : positions (S, dim) and their exact log densities (S,)
    """
    theta = np.array(theta, dtype=float)
    m = np.zeros_like(theta)
    v = np.zeros_like(theta)
    b1, b2 = 0.9, 0.999
    for i in range(1, iterations + 1):
        if deadline is not None and i % 10 == 0 and clock() > deadline:
            break  # the fit's time budget: the best so far will do
        g = model.grad(theta)
        m = b1 * m + (1 - b1) * g
        v = b2 * v + (1 - b2) * g * g
        rate = lr * (0.1 + 0.9 * (1 - i / iterations))
        theta = theta + rate * (m / (1 - b1**i)) / (np.sqrt(v / (1 - b2**i)) + 1e-8)
    lp = model.log_density(theta)
    return theta, lp


def laplace_chol(model, theta, ridge=1e-6):
    """Cholesky factor of the inverse negative Hessian at ``theta`` (one row).

    The Hessian is a central difference of the exact gradient, with a wide
    step (0.05) in the knot coordinates, where the log density has kinks at
    whole intervals, and 0.01 elsewhere. Eigenvalues are floored so the result
    is always a valid covariance, and no direction gets a variance above
    :data:`MAX_START_VARIANCE` (a spare change date in a straight stretch
    is nearly flat at the mode, and its Laplace variance would otherwise be
    thousands, which first throws the starts far off and then shrinks the
    first step size to a thousandth).
    """
    D = model.dim
    h = np.full(D, 0.01)
    h[model.slices["z"]] = 0.05
    E = np.diag(h)
    rows = np.concatenate([theta[None, :] + E, theta[None, :] - E])
    _, G = model.value_and_grad(rows)
    H = (G[:D] - G[D:]) / (2 * h[:, None])
    H = 0.5 * (H + H.T)
    w, V = np.linalg.eigh(-H)
    if not np.all(np.isfinite(w)):
        return np.eye(D) * 0.1
    w = np.maximum(w, max(float(np.abs(w).max()) * 1e-6, ridge, 1.0 / MAX_START_VARIANCE))
    cov = (V / w) @ V.T
    return safe_cholesky(cov)


def find_starts(model, rng, n_random=256, n_polish=32, iterations=150, deadline=None, clock=time.monotonic):
    """Multi-start mode search.

    Parameters
    ----------
    model : TrendModel
    rng : numpy.random.Generator
    n_random : int
        Knot placements tried by least squares.
    n_polish : int
        Best of those polished by Adam.
    iterations : int
        Adam iterations.
    deadline : float, optional
        Clock time by which the search stops polishing (the fit's time budget).
    clock : callable

    Returns
    -------
    modes : numpy.ndarray, shape (M, dim)
        Polished modes, best first.
    lp : numpy.ndarray, shape (M,)
    chol : numpy.ndarray, shape (dim, dim)
        Laplace preconditioner at the best mode.
    """
    knots = random_knots(model, rng, n_random)
    theta = least_squares_starts(model, knots)
    lp = model.log_density(theta)
    order = np.argsort(-np.where(np.isfinite(lp), lp, -np.inf))[:n_polish]
    theta, lp = adam_polish(model, theta[order], iterations=iterations, deadline=deadline, clock=clock)
    lp = np.where(np.isfinite(lp), lp, -np.inf)
    order = np.argsort(-lp)
    theta, lp = theta[order], lp[order]
    chol = laplace_chol(model, theta[0])
    return theta, lp, chol
