"""A move that relocates one change date anywhere in the series, levels and all.

Hamiltonian steps move a change date only locally. On real series the
change-date posterior often has separated modes (two plausible years for a
change, a spare knot idling in one straight stretch or another), and the
levels that fit one position are far from those that fit the other, so a
chain that moves a knot with its levels held fixed lands in a poor region
and stays where it started. This move carries the levels along, and lets a
knot pass its neighbours (the knots are an unordered set; the sampler's
coordinates hold them sorted).

For every chain at once:

1. Pick one of the K-1 change dates uniformly at random and a lattice
   spacing ``h`` (independent of the state), and lay the lattice
   ``tau + k h`` across the date's whole admissible range ``[m, n - m]``
   (``m`` the minimum segment length): every point of the orbit that could be
   feasible is a candidate, so a date can jump from one end of the series to
   the other in one move. (Until 2026-12-03 the move laid a local window of
   16 points around the current position instead; measured, it moved the
   dates a third as far per millisecond.)
2. For each lattice point, replace the chosen date by it, sort, and carry
   the level coordinates ``b`` (levels and jumps) along: with ``D(knots)``
   and ``C(knots)`` the conditional posterior mode of the levels given all
   knots, the day-of-week effects and the dispersion, and the Cholesky factor
   of the conditional precision there
   (:func:`inference.conditional.conditional_mode`), the candidate's levels
   are ``D' + C'^-T C^T (b - D)``: the chain's standardised deviation from
   its conditional mode is kept, the mode and the scale move with the knots.
   Points that break the minimum segment length are not candidates.
3. Pick one candidate with probability proportional to the posterior density
   in knot coordinates (the sampler's density over the knot logits divided by
   the Jacobian of the sorted knot positions in the logits,
   :func:`knot_log_density`) times the map's Jacobian ``det C / det C'``.

The maps ``T_m`` (move the chosen date by ``m h``, carry the levels as
above) compose as ``T_m T_k = T_{m+k}``; ``D`` and ``C`` depend only on what
the move leaves unchanged, so every member of the lattice sees the same
candidates: the lattice is the same set of feasible points from any of its
members (it is anchored at the current point's index
``floor((tau - m) / h) + 1`` and reaches past both ends; the moved date is
picked with probability 1/(K-1) from either end). Drawing a member in
proportion to the density times the Jacobian is then the generalised Gibbs
step of Liu & Sabatti (2000, "Generalised Gibbs sampler and multigrid Monte
Carlo for Bayesian computation", Biometrika 87(2)) on a discrete group with
counting measure, and leaves the posterior invariant. The tests check the
group property and the Jacobian numerically (tests/inference/test_relocate.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .conditional import Binned, conditional_mode, dispersion, linear_index, offsets, z_from_knots

#: Fisher-scoring steps of the conditional mode that carries the levels (any
#: deterministic guide keeps the move exact; a better one only raises
#: acceptance), chosen with the bin count (conditional.MAX_BINS) by expected
#: squared jump of the change dates per millisecond of the move, measured
#: from posterior draws of daily_admissions.csv with K = 4 (bench/relocation.py):
#: 32 bins and 1 step moved them as far as 64 and 2, at 60% of the cost.
SCORING_STEPS = 1
#: Lattice points across a change date's admissible range, and the random
#: stretch of their spacing. Measured the same way: 6 to 12 points moved the
#: dates 280-320 days^2/ms against 100 for the earlier local windows of 16
#: points (and 226 for half and half); whole fits of daily_admissions.csv
#: converged in about 800 draws instead of 2,300 (K = 4) and in 800-1,600
#: instead of reaching the 5,000-draw cap (K = 6). 10 points did best on
#: whole K = 4 fits (3 seeds); 8 and 12 moved as far per millisecond.
RANGE_POINTS = 10
RANGE_JITTER = (0.7, 1.4)


@dataclass(frozen=True)
class RelocateInfo:
    """What one move did, per chain."""

    moved_days: np.ndarray  # (B,) distance the chosen knot moved, in days
    points: int  # lattice points per chain


def move(rng, model, theta, lp, binned=None):
    """Relocate one randomly chosen change date of every chain (see the module text).

    Parameters
    ----------
    rng : numpy.random.Generator
    model : TrendModel
    theta : numpy.ndarray, shape (B, dim)
    lp : numpy.ndarray, shape (B,)
        Exact log density of ``theta``.
    binned : Binned, optional
        The model's binned counts (made here when not given).

    Returns
    -------
    theta, lp, RelocateInfo
        New positions and their exact log densities (new arrays).
    """
    B = theta.shape[0]
    j = rng.integers(0, model.K - 1, size=B)
    _, _, tau = model.knot_layout(theta)
    h, s, size = lattice(rng, model, tau[np.arange(B), j])
    cand, member, log_jac = orbit(model, theta, j, h, s, size, binned)
    flat = cand.reshape(B * size, -1)
    # the density only where it can be drawn: the lattice is sized for the
    # finest spacing of all chains and reaches past both ends, so about
    # 40% of its points are padding (measured on daily_admissions.csv, K = 4)
    feasible = member.ravel()
    cand_lp = np.full(B * size, -np.inf)
    cand_lp[feasible] = model.log_density(flat[feasible])
    log_w = knot_log_density(model, flat, cand_lp) + log_jac.ravel()  # times the map's Jacobian
    log_w = np.where(feasible & np.isfinite(log_w), log_w, -np.inf).reshape(B, size)
    pick = np.argmax(log_w + rng.gumbel(size=(B, size)), axis=1)  # Gumbel-max draw
    ok = np.isfinite(log_w[np.arange(B), pick])
    chosen = np.arange(B) * size + pick
    new_theta = np.where(ok[:, None], flat[chosen], theta)
    new_lp = np.where(ok, cand_lp[chosen], lp)
    dist = np.where(ok, np.abs(pick - s) * h, 0.0) * model.interval_days
    return new_theta, new_lp, RelocateInfo(dist, size)


def lattice(rng, model, x):
    """Spacing, index of the current point and lattice size of one move, for every chain.

    Each chain's lattice spans the whole admissible range of a change date
    (``[m, n - m]``) with about :data:`RANGE_POINTS` points, aligned so that
    the current point ``x`` sits at index ``floor((x - m) / h) + 1``: from any
    other member ``x + k h`` the same positions come out, shifted by ``k``,
    so the feasible candidates are the same set. The spacings and the size
    depend only on the random stream, never on the state.

    Returns
    -------
    h : numpy.ndarray, shape (B,)
    s : numpy.ndarray of int, shape (B,)
    size : int
        Lattice points per chain (the same for all).
    """
    span = max(model.t_end - 2.0 * model.min_segment, 1e-9)
    h = span / RANGE_POINTS * np.exp(rng.uniform(*np.log(RANGE_JITTER), size=x.shape[0]))
    size = whole_range_size(model, h.min())
    return h, whole_range_index(model, x, h), size


def whole_range_index(model, x, h):
    """Index of position ``x`` in its whole-range lattice of spacing ``h``.

    The lattice's first point ``x - s h`` lies below the admissible range
    (in ``[m - h, m)``), so from any member ``x + k h`` the index is ``s + k``,
    and should rounding put it one off, the points that shift in or out are
    outside the range either way.
    """
    return np.floor((x - model.min_segment) / h).astype(int) + 1


def whole_range_size(model, h):
    """Points in a whole-range lattice of spacing ``h``: past both ends, with one to spare for rounding."""
    span = max(model.t_end - 2.0 * model.min_segment, 1e-9)
    return int(np.ceil(span / h)) + 3


def knot_log_density(model, theta, lp=None):
    """Log posterior density in knot coordinates (sorted knot positions, the rest as is).

    The sampler's coordinates are knot-gap logits ``z``; the knot positions
    ``tau`` are a smooth map of them with ``|d tau / d z| = S^(K-1) prod_k p_k``
    (the cumulative sum of the gaps, times the additive-logistic Jacobian;
    ``S`` the slack, ``p`` the gap fractions). Up to a constant, the density
    over ``tau`` is the sampler's minus ``sum_k log p_k``.

    Parameters
    ----------
    model : TrendModel
    theta : numpy.ndarray, shape (B, dim)
    lp : numpy.ndarray, shape (B,), optional
        ``model.log_density(theta)`` when already known.
    """
    lp = model.log_density(theta) if lp is None else lp
    p, _, _ = model.knot_layout(theta)
    with np.errstate(divide="ignore"):
        return lp - np.log(p).sum(axis=1)


def orbit(model, theta, j, h, s, window, binned=None):
    """The candidates of one move: a window of the orbit of each chain's point.

    Parameters
    ----------
    model : TrendModel
    theta : numpy.ndarray, shape (B, dim)
    j : numpy.ndarray of int, shape (B,)
        Which change date moves (rank in the chain's sorted dates, 0-based).
    h : numpy.ndarray, shape (B,)
        Lattice spacing, in intervals.
    s : numpy.ndarray of int, shape (B,)
        Index of the current point in the window.
    window : int
    binned : Binned, optional

    Returns
    -------
    cand : numpy.ndarray, shape (B, window, dim)
        Candidate positions; column ``s`` is the current point.
    member : numpy.ndarray of bool, shape (B, window)
        Feasible candidates (the others break the minimum segment length or
        leave the series).
    log_jac : numpy.ndarray, shape (B, window)
        Log Jacobian of the map to each candidate, up to a constant per chain.
    """
    B, K, m = theta.shape[0], model.K, model.min_segment
    _, _, tau = model.knot_layout(theta)
    rows = np.arange(B)
    cur = tau[rows, j]
    pos = cur[:, None] + (np.arange(window)[None, :] - s[:, None]) * h[:, None]  # (B, window)
    knots = np.repeat(tau, window, axis=0).reshape(B, window, K - 1)
    knots[rows[:, None], np.arange(window)[None, :], j[:, None]] = pos
    knots = np.sort(knots, axis=2)
    edges = np.concatenate([np.zeros((B, window, 1)), knots, np.full((B, window, 1), model.t_end)], axis=2)
    member = np.all(np.diff(edges, axis=2) > m, axis=2)
    member[rows, s] = True  # the current point, whatever rounding says
    knots[~member] = tau[np.nonzero(~member)[0]]  # padding: any feasible point
    knots[rows, s] = tau
    knots = knots.reshape(B * window, K - 1)
    base = np.repeat(theta, window, axis=0)
    binned = Binned.of(model) if binned is None else binned
    # the conditional mode only at feasible points; padding takes the current point's
    feasible = member.ravel()
    chain_of = np.repeat(rows, window)[feasible]
    off = binned.offsets(offsets(model, theta))[chain_of]  # the move keeps them
    phi = dispersion(model, theta)
    phi = None if phi is None else phi[chain_of]
    mode_f, chol_f = conditional_mode(model, knots[feasible], off, phi, steps=SCORING_STEPS, binned=binned)
    P = mode_f.shape[1]
    mode = np.empty((B * window, P))
    chol = np.empty((B * window, P, P))
    mode[feasible], chol[feasible] = mode_f, chol_f
    current = np.repeat(rows * window + s, window)[~feasible]
    mode[~feasible], chol[~feasible] = mode[current], chol[current]
    mode = mode.reshape(B, window, P)
    chol = chol.reshape(B, window, P, P)
    idx = linear_index(model)
    # the chain's standardised deviation from its conditional mode, kept by the move
    u = np.matmul(chol[rows, s].transpose(0, 2, 1), (theta[:, idx] - mode[rows, s])[:, :, None])
    dev = np.linalg.solve(chol.transpose(0, 1, 3, 2), np.broadcast_to(u[:, None], (B, window, P, 1)))[..., 0]
    cand = base.copy()
    cand[:, model.slices["z"]] = z_from_knots(model, knots)
    cand[:, idx] = (mode + dev).reshape(B * window, P)
    cand = cand.reshape(B, window, -1)
    cand[rows, s] = theta  # exactly the current point
    # log |det| of the map from the current point to each candidate, up to a
    # constant per chain: -log det C(candidate)
    log_jac = -np.log(np.diagonal(chol, axis1=2, axis2=3)).sum(axis=2)
    return cand, member, log_jac
