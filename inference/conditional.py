"""The trend's linear coordinates given the knots: design, prior and conditional mode.

Given the knots, the log expected count of every interval is linear in the
sampler's level coordinates (log levels, and jumps when fitted) plus an
offset (day-of-week effect, completeness). This module builds that linear
map exactly (by evaluating the model's own trend at unit vectors, so it
always matches :meth:`TrendModel.log_trend`), the Gaussian prior on those
coordinates, and the conditional posterior mode of the coordinates by a few
Fisher-scoring steps of the penalised log-linear model (iteratively
reweighted least squares; McCullagh & Nelder 1989, section 2.5).

The start search uses the least-squares fit; the knot relocation move uses
the conditional mode as a deterministic function of the knots (and of the
coordinates the move leaves alone), which is what keeps that move exact.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Largest change of any coordinate in one scoring step (log units): keeps a
#: step from a poor least-squares start from overshooting into overflow.
MAX_STEP = 3.0
#: Design elements (rows x coordinates x intervals) built at once.
CHUNK_ELEMENTS = 2_000_000
#: Bins of neighbouring intervals the relocation move's conditional mode is
#: computed on (common practice, no source: enough to place a trend's
#: levels; measured with the window in :mod:`inference.relocate`: 32 bins
#: moved the change dates as far per move as 64, at less cost).
MAX_BINS = 32


def linear_index(model):
    """Indices in theta of the linear coordinates: the trend block, then jumps."""
    idx = list(range(model.dim))[model.slices["trend"]]
    if model.jumps:
        idx += list(range(model.dim))[model.slices["jump"]]
    return np.array(idx, dtype=int)


def z_from_knots(model, knots):
    """Knot logits z (B, K-1) of feasible knots (B, K-1) in intervals."""
    B = knots.shape[0]
    edges = np.concatenate([np.zeros((B, 1)), knots, np.full((B, 1), model.t_end)], axis=1)
    p = (np.diff(edges, axis=1) - model.min_segment) / model.slack
    p = np.maximum(p, 1e-300)
    return np.log(p[:, :-1]) - np.log(p[:, -1:])


def design(model, knots, rows=None, t=None):
    """Linear map from the level coordinates to the log trend on observed intervals.

    The log trend is ``eta_0 + r_1 (t + 1/2) + sum_j beta_j H_j(t) + sum_j J_j R_j(t)``
    (the hinge form of :meth:`TrendModel._interval_log_trend`: ``H_j`` the
    interval mean of ``(s - tau_j)_+``, ``R_j`` the share of the interval after
    knot j, ``beta_j = r_{j+1} - r_j``, ``r_k = (eta_k - eta_{k-1}) / gap_k``),
    linear in the levels given the knots; with flat segments it is
    ``L_1 + sum_j (L_{j+1} - L_j) R_j``. The basis is built once per row and
    mapped by a small matrix, so the cost does not grow with the number of
    coordinates.

    Parameters
    ----------
    model : TrendModel
    knots : numpy.ndarray, shape (B, K-1)
    rows : numpy.ndarray of int, optional
        Intervals to keep; the observed ones by default.
    t : numpy.ndarray, optional
        Interval starts to use instead of ``rows`` (may be fractional: the
        centre of a bin of intervals).

    Returns
    -------
    numpy.ndarray, shape (B, len(rows), P)
        ``log_trend[b, rows] = X[b] @ theta[b, linear_index]``.
    """
    if t is None:
        t = model.t[model.obs_index if rows is None else rows]
    B, K = knots.shape[0], model.K
    n = t.size
    P = linear_index(model).size
    X = np.empty((B, n, P))
    X[:, :, 0] = 1.0
    if K == 1:
        if not model.flat:  # eta_0 + (eta_1 - eta_0) (t + 1/2) / n
            f = (t + 0.5) / model.t_end
            X[:, :, 0] = 1.0 - f
            X[:, :, 1] = f
        return X
    d = t[None, :, None] - knots[:, None, :]  # (B, n, K-1)
    ramp = np.clip(d + 1.0, 0.0, 1.0)
    if model.flat:
        # L_1 + sum_j (L_{j+1} - L_j) R_j: coefficient of L_k is R_{k-1} - R_k
        X[:, :, 0] = 1.0 - ramp[:, :, 0]
        X[:, :, 1:K - 1] = ramp[:, :, :-1] - ramp[:, :, 1:]
        X[:, :, K - 1] = ramp[:, :, -1]
        return X
    hinge = np.maximum(d, 0.0)
    hinge += 0.5 * ramp * ramp
    # eta_0 + r_1 (t + 1/2) + sum_j (r_{j+1} - r_j) H_j: the coefficient of r_k
    # is V_k = H_{k-1} - H_k, with H_0 = t + 1/2 and H_K = 0; and
    # r_k = (eta_k - eta_{k-1}) / gap_k, so eta_i's is V_i / gap_i - V_{i+1} / gap_{i+1}
    V = np.empty((B, n, K))
    V[:, :, 0] = (t + 0.5)[None, :] - hinge[:, :, 0]
    V[:, :, 1:K - 1] = hinge[:, :, :-1] - hinge[:, :, 1:]
    V[:, :, K - 1] = hinge[:, :, -1]
    edges = np.concatenate([np.zeros((B, 1)), knots, np.full((B, 1), model.t_end)], axis=1)
    V /= np.diff(edges, axis=1)[:, None, :]
    X[:, :, 0] = 1.0 - V[:, :, 0]
    X[:, :, 1:K] = V[:, :, :-1] - V[:, :, 1:]
    X[:, :, K] = V[:, :, -1]
    if model.jumps:
        X[:, :, K + 1:] = ramp
    return X


def prior_precision(model, knots):
    """Gaussian prior of the linear coordinates: ``-0.5 b^T Q b + h^T b``.

    Returns
    -------
    Q : numpy.ndarray, shape (B, P, P)
    h : numpy.ndarray, shape (B, P)
    """
    B, K = knots.shape[0], model.K
    P = linear_index(model).size
    Q = np.zeros((B, P, P))
    h = np.zeros((B, P))
    Q[:, 0, 0] = 1.0 / model.level_sd**2
    h[:, 0] = model.level_centre / model.level_sd**2
    if model.flat:
        step = 1.0 / model.jump_sd**2  # each jump between segment levels
        for j in range(1, K):
            _add_difference(Q, j, np.full(B, step))
        return Q, h
    edges = np.concatenate([np.zeros((B, 1)), knots, np.full((B, 1), model.t_end)], axis=1)
    gaps = np.diff(edges, axis=1)
    for j in range(1, K + 1):  # rate j = (eta_j - eta_{j-1}) / gap_j
        _add_difference(Q, j, 1.0 / (model.rate_sd * gaps[:, j - 1]) ** 2)
    for j in range(K - 1 if model.jumps else 0):
        Q[:, K + 1 + j, K + 1 + j] += 1.0 / model.jump_sd**2
    return Q, h


def _add_difference(Q, j, weight):
    """Add ``weight (b_j - b_{j-1})^2`` to the quadratic form."""
    Q[:, j, j] += weight
    Q[:, j - 1, j - 1] += weight
    Q[:, j, j - 1] -= weight
    Q[:, j - 1, j] -= weight


@dataclass(frozen=True)
class Binned:
    """The observed counts summed in runs of neighbouring intervals.

    The conditional mode is only a guide for where the levels go when a knot
    moves (any deterministic function keeps the move exact), so it is computed
    on at most :data:`MAX_BINS` bins: the log trend taken at the bin's mean
    interval start, the counts and the offsets' exponentials summed.

    Attributes
    ----------
    t : numpy.ndarray, shape (nb,)
    y : numpy.ndarray, shape (nb,)
    size : numpy.ndarray, shape (nb,)
        Intervals per bin.
    starts : numpy.ndarray of int, shape (nb,)
        Position in the observed values where each bin starts.
    """

    t: np.ndarray
    y: np.ndarray
    size: np.ndarray
    starts: np.ndarray

    @classmethod
    def of(cls, model, max_bins=None):
        max_bins = MAX_BINS if max_bins is None else max_bins
        n_obs = model.obs_index.size
        nb = min(n_obs, max_bins)
        starts = np.array([g[0] for g in np.array_split(np.arange(n_obs), nb)])
        size = np.diff(np.append(starts, n_obs)).astype(float)
        t = np.add.reduceat(model.t[model.obs_index], starts) / size
        y = np.add.reduceat(model.y_obs, starts)
        return cls(t, y, size, starts)

    def offsets(self, offset):
        """Per-bin offsets (B, nb) from per-interval ones (B, n_obs): log of the summed exp."""
        top = offset.max(axis=1, keepdims=True)
        return top + np.log(np.add.reduceat(np.exp(offset - top), self.starts, axis=1))


def conditional_mode(model, knots, offset, phi=None, steps=2, binned=None):
    """Posterior mode and curvature of the level coordinates given knots, offsets and dispersion.

    Starts from weighted least squares on ``log(y + 0.5)`` and takes
    ``steps`` Fisher-scoring steps of the Poisson (or negative-binomial with
    dispersion ``phi``) log-linear model with the Gaussian prior. Every step
    is a deterministic function of the inputs.

    Parameters
    ----------
    model : TrendModel
    knots : numpy.ndarray, shape (B, K-1)
    offset : numpy.ndarray, shape (B, n_obs), or (B, nb) with ``binned``
        Added to the log trend on observed intervals (day-of-week effect and
        log completeness).
    phi : numpy.ndarray, shape (B,), optional
        Negative-binomial dispersion; Poisson when None.
    steps : int
    binned : Binned, optional
        Work on bins of intervals (``offset`` then per bin, from
        :meth:`Binned.offsets`); a sum of ``b`` negative-binomial counts is
        taken as negative binomial with dispersion ``b phi``.

    Returns
    -------
    mode : numpy.ndarray, shape (B, P)
    chol : numpy.ndarray, shape (B, P, P)
        Lower Cholesky factor ``C`` of the Fisher information plus prior
        precision (of the last scoring step): ``C C^T`` approximates the
        conditional posterior precision, so ``C^T (b - mode)`` is about
        standard normal.
    """
    B = knots.shape[0]
    P = linear_index(model).size
    n_rows = model.obs_index.size if binned is None else binned.y.size
    chunk = max(1, CHUNK_ELEMENTS // (P * n_rows))
    if B > chunk:
        parts = [
            conditional_mode(model, knots[i:i + chunk], offset[i:i + chunk],
                             None if phi is None else phi[i:i + chunk], steps, binned)
            for i in range(0, B, chunk)
        ]
        return np.concatenate([a for a, _ in parts]), np.concatenate([c for _, c in parts])
    if binned is None:
        X = design(model, knots)
        y, size = model.y_obs, 1.0
    else:
        X = design(model, knots, t=binned.t)
        y, size = binned.y, binned.size
    Xt = np.ascontiguousarray(X.transpose(0, 2, 1))
    Q, h = prior_precision(model, knots)
    eye = 1e-9 * np.eye(P)
    # weighted least squares on log(y + 0.5), the prior as a ridge
    w = y + 0.5
    info = np.matmul(Xt, X * w[None, :, None]) + Q + eye
    rhs = np.matmul(Xt, (w * (np.log(y + 0.5)[None, :] - offset))[:, :, None])[:, :, 0] + h
    beta = np.linalg.solve(info, rhs[:, :, None])[:, :, 0]
    for _ in range(steps):
        eta = np.matmul(X, beta[:, :, None])[:, :, 0] + offset
        mu = np.exp(np.minimum(eta, 700.0))
        if phi is None:
            weight, score = mu, y - mu
        else:
            ph = phi[:, None] * size
            weight = mu * ph / (ph + mu)
            score = ph * (y - mu) / (ph + mu)
        grad = np.matmul(Xt, score[:, :, None])[:, :, 0] - np.matmul(Q, beta[:, :, None])[:, :, 0] + h
        info = np.matmul(Xt, X * weight[:, :, None]) + Q + eye
        delta = np.linalg.solve(info, grad[:, :, None])[:, :, 0]
        big = np.abs(delta).max(axis=1, keepdims=True)
        delta *= np.minimum(1.0, MAX_STEP / np.maximum(big, 1e-300))
        beta = np.where(np.isfinite(delta), beta + delta, beta)
    return beta, _safe_cholesky(info)


def _safe_cholesky(A):
    """Batched lower Cholesky; rows that are not positive definite get a scaled identity."""
    ok = np.all(np.isfinite(A), axis=(1, 2))
    A = np.where(ok[:, None, None], A, np.eye(A.shape[1]))
    try:
        return np.linalg.cholesky(A)
    except np.linalg.LinAlgError:
        out = np.empty_like(A)
        for i in range(A.shape[0]):
            try:
                out[i] = np.linalg.cholesky(A[i])
            except np.linalg.LinAlgError:
                out[i] = np.eye(A.shape[1]) * np.sqrt(max(float(np.abs(np.diag(A[i])).max()), 1e-12))
        return out


def offsets(model, theta):
    """Day-of-week and completeness offsets on observed intervals, (B, n_obs)."""
    B = theta.shape[0]
    off = np.broadcast_to(model.log_completeness[model.obs_index], (B, model.obs_index.size)).copy()
    if model.weekday:
        off += model.weekday7(theta)[:, model.dow[model.obs_index]]
    return off


def dispersion(model, theta):
    """Negative-binomial phi of each row, or None for Poisson."""
    if not model.negbin:
        return None
    return model.constrain(theta)["dispersion"]
