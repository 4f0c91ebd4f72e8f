"""Lock-step Hamiltonian Monte Carlo for many chains, as pure functions.

All chains advance together: one batched gradient call per leapfrog step for
all of them, with a shared step size and number of steps per iteration
(jittered from one iteration to the next). A dense linear preconditioner
``L`` (``L L^T`` approximates the posterior covariance) plays the role of the
inverse mass matrix: momenta live in whitened coordinates, positions move by
``eps * L p``.

The kernel is ``step(rng, state, target, params) -> (state, info)``; the
warm-up pieces (:class:`DualAveraging`, :class:`ChEES`, covariance
estimation) are small objects with ``update`` and ``final`` methods whose state
is plain data. The driver loop lives in :mod:`inference.driver`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: An energy error above this marks a divergent transition (Stan uses 1000).
DIVERGENCE_THRESHOLD = 1000.0


@dataclass(frozen=True)
class Target:
    """What the kernel needs from a model.

    Attributes
    ----------
    log_density : callable
        (B, D) -> (B,), exact.
    grad : callable
        (B, D) -> (B, D); may be an approximation (deterministic in the
        position), the accept step uses ``log_density``.
    """

    log_density: object
    grad: object


@dataclass(frozen=True)
class State:
    """Positions of all chains with their log density and gradient."""

    position: np.ndarray  # (B, D)
    log_density: np.ndarray  # (B,)
    grad: np.ndarray  # (B, D)


@dataclass(frozen=True)
class Params:
    """Tuning of one HMC iteration.

    Attributes
    ----------
    step_size : float
        Leapfrog step in whitened units.
    n_steps : int
        Leapfrog steps this iteration.
    chol : numpy.ndarray, shape (D, D)
        Lower-triangular preconditioner L.
    """

    step_size: float
    n_steps: int
    chol: np.ndarray


@dataclass(frozen=True)
class Info:
    """Diagnostics of one iteration, per chain."""

    accept_prob: np.ndarray  # (B,)
    accepted: np.ndarray  # (B,) bool
    divergent: np.ndarray  # (B,) bool
    proposal: np.ndarray  # (B, D) end of the trajectory
    end_momentum: np.ndarray  # (B, D) whitened momentum at the end
    n_grad: int


def init_state(target, position):
    """Evaluate log density and gradient at the starting positions."""
    position = np.asarray(position, dtype=float)
    return State(position, target.log_density(position), target.grad(position))


def step(rng, state, target, params):
    """One HMC transition for every chain (Neal 2011, "MCMC using Hamiltonian dynamics").

    Parameters
    ----------
    rng : numpy.random.Generator
    state : State
    target : Target
    params : Params

    Returns
    -------
    (State, Info)
    """
    B, D = state.position.shape
    L = params.chol
    eps = params.step_size
    p0 = rng.standard_normal((B, D))
    q = state.position
    g = state.grad
    p = p0 + 0.5 * eps * (g @ L)  # L^T grad, row-wise
    for i in range(params.n_steps):
        q = q + eps * (p @ L.T)
        g = target.grad(q)
        if i < params.n_steps - 1:
            p = p + eps * (g @ L)
    p = p + 0.5 * eps * (g @ L)
    lp_new = target.log_density(q)
    h0 = -state.log_density + 0.5 * np.einsum("bd,bd->b", p0, p0)
    h1 = -lp_new + 0.5 * np.einsum("bd,bd->b", p, p)
    with np.errstate(invalid="ignore", over="ignore"):
        delta = h0 - h1
    delta = np.where(np.isfinite(delta), delta, -np.inf)
    accept_prob = np.exp(np.minimum(delta, 0.0))
    accepted = rng.random(B) < accept_prob
    divergent = -delta > DIVERGENCE_THRESHOLD
    new_q = np.where(accepted[:, None], q, state.position)
    new_lp = np.where(accepted, lp_new, state.log_density)
    new_g = np.where(accepted[:, None], g, state.grad)
    info = Info(accept_prob, accepted, divergent, q, p, params.n_steps)
    return State(new_q, new_lp, new_g), info


class DualAveraging:
    """Step-size adaptation by dual averaging (Hoffman & Gelman 2014, sec. 3.2).

    Drives the mean acceptance probability over all chains to ``target``.
    Constants gamma = 0.05, t0 = 10, kappa = 0.75 as in that paper.
    """

    def __init__(self, step_size, target=0.8, gamma=0.05, t0=10.0, kappa=0.75):
        self.mu = math.log(10.0 * step_size)
        self.target = target
        self.gamma = gamma
        self.t0 = t0
        self.kappa = kappa
        self.count = 0
        self.h_bar = 0.0
        self.log_step = math.log(step_size)
        self.log_step_bar = 0.0

    def update(self, accept_prob):
        """Feed one iteration's acceptance probabilities; returns the next step size."""
        a = float(np.mean(accept_prob))
        self.count += 1
        m = self.count
        w = 1.0 / (m + self.t0)
        self.h_bar = (1 - w) * self.h_bar + w * (self.target - a)
        self.log_step = self.mu - math.sqrt(m) / self.gamma * self.h_bar
        eta = m ** (-self.kappa)
        self.log_step_bar = eta * self.log_step + (1 - eta) * self.log_step_bar
        return math.exp(self.log_step)

    def final(self):
        """The averaged step size to use after warm-up."""
        return math.exp(self.log_step_bar)


class ChEES:
    """Trajectory-length adaptation by the ChEES criterion.

    Hoffman, Radul & Sountsov (2021), "An adaptive MCMC scheme for setting
    trajectory lengths in Hamiltonian Monte Carlo" (AISTATS): maximise the
    expected change in the squared distance of each chain from the
    cross-chain mean, ``(|x' - mean'|^2 - |x - mean|^2)^2 / 4``, by Adam on
    ``log T``; the trajectory used in one iteration is ``u T`` with ``u``
    uniform on (0, 1]. Distances are in whitened coordinates.

    The Adam settings (learning rate 0.025, beta1 = 0, beta2 = 0.95) and the
    final average of log T over the last iterations follow that paper as we
    recall it (from memory, not checked against the text). The length is kept
    at least ``min_length`` (one posterior sd in whitened units): where chains
    sit in different modes the cross-chain criterion is dominated by the
    distance between modes and drove T to a single leapfrog step (measured
    on daily_admissions.csv with K = 6; common practice, no source).
    """

    def __init__(self, trajectory_length, max_length, lr=0.025, beta2=0.95, min_length=1.0):
        self.log_T = math.log(trajectory_length)
        self.max_log_T = math.log(max_length)
        self.min_log_T = math.log(min_length)
        self.lr = lr
        self.beta2 = beta2
        self.v = 0.0
        self.count = 0
        self.avg = None

    @property
    def length(self):
        return math.exp(self.log_T)

    def update(self, x_old, x_new, p_new, accept_prob, u):
        """Feed one iteration (whitened positions before/after, end momenta).

        Parameters
        ----------
        x_old, x_new, p_new : numpy.ndarray, shape (B, D)
        accept_prob : numpy.ndarray, shape (B,)
        u : float
            The jitter fraction used this iteration.
        """
        w = np.where(np.isfinite(accept_prob), accept_prob, 0.0)
        if w.sum() <= 1e-12:
            # nothing accepted: shorten, the trajectory is too long or too rough
            self.log_T = max(self.log_T - 0.1, self.min_log_T)
            return self.length
        c_old = x_old - x_old.mean(axis=0)
        c_new = x_new - np.average(x_new, axis=0, weights=w)
        diff = (c_new**2).sum(axis=1) - (c_old**2).sum(axis=1)
        g_chain = diff * (c_new * p_new).sum(axis=1) * u * self.length
        g = float(np.sum(w * g_chain) / np.sum(w))
        if not math.isfinite(g):
            return self.length
        self.count += 1
        self.v = self.beta2 * self.v + (1 - self.beta2) * g * g
        v_hat = self.v / (1 - self.beta2**self.count)
        self.log_T += self.lr * g / (math.sqrt(v_hat) + 1e-12)
        self.log_T = min(max(self.log_T, self.min_log_T), self.max_log_T)
        return self.length

    def average(self, weight=0.1):
        """Track an exponential average of log T (call in the last window)."""
        self.avg = self.log_T if self.avg is None else (1 - weight) * self.avg + weight * self.log_T

    def final(self):
        return math.exp(self.log_T if self.avg is None else self.avg)


def covariance_chol(samples, ridge=1e-3):
    """Regularised Cholesky factor of the covariance of pooled samples.

    Shrinks toward a scaled identity as Stan does for its metric,
    ``n/(n+5) S + 1e-3 * 5/(n+5) I`` (Stan Reference Manual, "HMC
    algorithm parameters"), with the identity scaled by the mean variance.

    Parameters
    ----------
    samples : numpy.ndarray, shape (N, D)

    Returns
    -------
    numpy.ndarray, shape (D, D), lower triangular
    """
    samples = np.asarray(samples, dtype=float)
    N, D = samples.shape
    S = np.cov(samples, rowvar=False).reshape(D, D)
    scale = float(np.mean(np.diag(S))) if np.all(np.isfinite(S)) else 1.0
    S = (N / (N + 5.0)) * S + (5.0 / (N + 5.0)) * ridge * max(scale, 1e-12) * np.eye(D)
    return safe_cholesky(S)


def fisher_chol(grads, ridge=1e-3):
    """Cholesky factor of the inverse of the scores' second moment, ``E[g g^T]^{-1}``.

    Under the target, the mean outer product of the log density's gradient
    equals the mean negative Hessian (the information identity), so its
    inverse is a preconditioner from the local curvature rather than from
    the spread of the positions. Where chains sit in different modes (a spare
    change date here in one chain, there in another) the spread of the
    positions overstates the scale of every direction that is tight within a
    mode, and a metric from it forces tiny steps; the curvature does not
    (Titsias 2023, "Optimal preconditioning and Fisher adaptive Langevin
    sampling", NeurIPS, uses the same score outer product).

    Parameters
    ----------
    grads : numpy.ndarray, shape (N, D)
        Gradients of the log density at pooled positions.
    ridge : float
        Shrinkage toward a scaled identity, as in :func:`covariance_chol`.

    Returns
    -------
    numpy.ndarray, shape (D, D), lower triangular
    """
    g = np.asarray(grads, dtype=float)
    g = g[np.all(np.isfinite(g), axis=1)]
    N, D = g.shape
    if N < 2:
        return np.eye(D)
    F = g.T @ g / N
    scale = float(np.mean(np.diag(F)))
    F = (N / (N + 5.0)) * F + (5.0 / (N + 5.0)) * ridge * max(scale, 1e-12) * np.eye(D)
    w, V = np.linalg.eigh(0.5 * (F + F.T))
    w = np.maximum(w, max(float(w.max()) * 1e-10, 1e-300))
    return safe_cholesky((V / w) @ V.T)


def safe_cholesky(S):
    """Cholesky factor of a symmetric matrix, flooring eigenvalues if needed."""
    S = 0.5 * (S + S.T)
    try:
        return np.linalg.cholesky(S)
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(S)
        floor = max(float(w.max()) * 1e-8, 1e-12)
        w = np.maximum(w, floor)
        return np.linalg.cholesky((V * w) @ V.T)
