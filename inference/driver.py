"""The sampling run as a generator of JSON-safe snapshots.

``run(model, settings)`` yields a snapshot (a small dictionary with a schema
version) every ``settings.snapshot_every`` iterations, through the phases
``init`` (mode search), ``warmup`` (adaptation) and ``sampling``, and ends
with one whose phase is ``done``. Raw draws go to the sink; the snapshots
carry only summaries. Every consumer (CLI, tests, local worker, Celery
worker) drains the same generator. The stages are separate functions:
:func:`start`, the generators :func:`warmup` and :func:`sample`, sharing a
:class:`Run` (model, settings, random streams, counters, time budget) and
passing the sampler's state and its :class:`Tuning` between them. The time
budget counts the whole fit, from the start search on.

The warm-up schedule is plain data
(:func:`inference.schedule.warmup_schedule`): a fast window for the step
size, slow windows of doubling length at whose ends the dense
preconditioner is re-estimated from all chains pooled (from the positions'
covariance, or from the scores where relocations have shown separated
change-date modes: :func:`inference.schedule.metric_kind`), and a final
fast window. At each slow window's end, chains far below the others
are restarted from copies of good chains (warm-up only); after warm-up any
chain still far below is dropped from the run and the drop is reported.

Randomness: one seed; the chains' stream and the summaries' stream are
independent children of it, so snapshots (whose number depends on timing)
never change the draws.
"""

from __future__ import annotations

import ctypes
import math
import time
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import solve_triangular

from .conditional import Binned
from .hmc import ChEES, DualAveraging, Params, State, Target, covariance_chol, fisher_chol, init_state, step
from .init import find_starts
from .relocate import move as relocate_move
from .schedule import (MAX_STEP_SHRINKS, RELOCATE_WARMUP, STEP_SHRINK, default_warmup, metric_kind,
                       next_check_gap, relocate_every, too_many_divergences, warmup_schedule)
from .sinks import MemorySink
from .snapshots import Progress

#: A chain whose mean log density is this far below the median chain's (or
#: six times the typical within-chain sd, whichever is larger) is stuck in a
#: trap mode (common practice, no source: a mode 20 log-units down carries
#: about e^-20 of the mass).
STUCK_GAP = 20.0
#: Halvings of a start's jitter before it falls back to its mode (:func:`_spread_starts`).
START_HALVINGS = 8
MAX_LEAPFROG = 256
#: Mean acceptance the step size is tuned to: the usual 0.8 (Stan's default;
#: Hoffman & Gelman 2014 discuss the trade-off). It was 0.9 for a while
#: because a step tuned to 0.8 diverged where a spare change date nears a
#: series end; since sampling shrinks the step when divergences appear
#: (:data:`inference.schedule.STEP_SHRINK`), only the fits that need a
#: smaller step pay for one. Measured (one sitting, medians of 3-5 seeds):
#: gradient calls to the criterion -29% on the reference problem, -43% and
#: -53% on daily_admissions.csv K = 4 and 6; forty invented regions 45 s
#: against 57 s, all converged; the one region whose spare date reaches the
#: series end shrank its step once or twice instead.
TARGET_ACCEPT = 0.8


def reserve_heap():
    """Keep freed heap memory in the process between gradient calls.

    glibc returns freed memory to the system after each batch of large
    temporaries and maps it again on the next call; the page faults cost
    about as much as the arithmetic of one gradient (measured here: 64-chain
    gradient 3.6 ms before, 1.1 ms after). Raising the trim and mmap
    thresholds keeps that memory mapped for reuse. No effect off glibc.
    """
    try:
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt(-1, 256 << 20)  # M_TRIM_THRESHOLD
        libc.mallopt(-3, 32 << 20)  # M_MMAP_THRESHOLD
    except (OSError, AttributeError):
        pass


@dataclass
class Run:
    """What every stage of one run shares: the model, settings, streams, counters, budget.

    Built once by :func:`run`; the stages read it and record their timings
    in it. It holds no sampler state: that passes between the stages as
    :class:`hmc.State` and :class:`Tuning`.
    """

    model: object
    settings: object
    sink: object
    should_stop: object
    clock: object
    t0: float
    rng: np.random.Generator  # the chains' stream
    rng_init: np.random.Generator  # the start search's stream
    progress: Progress
    target: Target
    binned: Binned
    warmup: int
    timings: dict = field(default_factory=dict)

    def over_budget(self):
        """True once the whole fit (start search included) has used its time budget."""
        return self.clock() - self.t0 > self.settings.max_seconds


@dataclass(frozen=True)
class Tuning:
    """The sampler's settings at the end of warm-up: plain data."""

    step_size: float
    trajectory_length: float
    chol: np.ndarray
    relocate_every: int


def run(model, settings, *, sink=None, should_stop=None, clock=time.monotonic):
    """Fit the model, yielding snapshots.

    Parameters
    ----------
    model : TrendModel
    settings : RunSettings
    sink : object, optional
        Draw store with ``reset(chains, names)`` and ``append(pos, lp)``;
        a :class:`MemorySink` when None.
    should_stop : callable, optional
        Called every iteration; returning True ends the run (status
        ``stopped``), keeping what was drawn.
    clock : callable
        Monotonic seconds (tests may pass a fake).

    Yields
    ------
    dict
        Snapshots; the last has ``phase == "done"``, a ``status`` of
        ``converged``, ``stopped`` or ``unconverged``, and ``ended_by``:
        ``criterion``, ``stop request``, ``draw limit`` or ``time budget``.
    """
    reserve_heap()
    seeds = np.random.SeedSequence(settings.seed).spawn(3)
    t0 = clock()
    W = settings.warmup or default_warmup(model)
    ctx = Run(model=model, settings=settings, sink=MemorySink() if sink is None else sink,
              should_stop=should_stop or (lambda: False), clock=clock, t0=t0,
              rng=np.random.default_rng(seeds[0]), rng_init=np.random.default_rng(seeds[1]),
              progress=Progress(model, settings, t0, clock, np.random.default_rng(seeds[2])),
              target=Target(model.log_density, model.grad), binned=Binned.of(model), warmup=W)
    yield ctx.progress.snapshot("init", 0, W)
    state, chol = start(ctx)
    if state is None:  # the time budget ran out in the start search
        yield _final(ctx, "unconverged", "time budget", 0, None)
        return
    yield ctx.progress.snapshot("warmup", 0, W, positions=state.position)  # a first band at once
    state, tuning, ended_by = yield from warmup(ctx, state, chol)
    yield from sample(ctx, state, tuning, ended_by)


def start(ctx):
    """The chains' starting points: (state, preconditioner), or (None, None) past the budget."""
    model, C = ctx.model, ctx.settings.chains
    modes, mode_lp, chol = find_starts(model, ctx.rng_init, deadline=ctx.t0 + ctx.settings.max_seconds,
                                       clock=ctx.clock)
    ctx.timings["init_seconds"] = ctx.clock() - ctx.t0
    if ctx.over_budget():
        return None, None
    keep = mode_lp >= mode_lp[0] - STUCK_GAP
    good, good_lp = modes[keep], mode_lp[keep]
    base, base_lp = good[np.arange(C) % good.shape[0]], good_lp[np.arange(C) % good.shape[0]]
    state = init_state(ctx.target, _spread_starts(ctx, base, base_lp, chol))
    ctx.progress.mode_lp = float(mode_lp[0])
    return state, chol


def _spread_starts(ctx, base, base_lp, chol):
    """Starts scattered around the modes by the Laplace spread, none far below its mode.

    Over-dispersed starts are what let R-hat see a chain that has not found
    its way (Gelman & Rubin 1992). The Laplace factor is a poor guide along
    flat directions (a spare change date in a straight stretch): there its
    floored curvature gives a spread of many series lengths, and a start
    drawn at full scale can land thousands of log-units down, where the
    chain drifts to a near-zero dispersion and crawls back over hundreds of
    iterations (measured on daily_admissions.csv with K = 4). So each start's
    jitter is halved until its log density is within ``START_GAP`` of its
    mode's (at most ``START_HALVINGS`` times; then the mode itself).
    """
    C, D = base.shape
    noise = ctx.rng_init.standard_normal((C, D)) @ chol.T
    gap = max(STUCK_GAP, float(D))
    starts = base + noise
    scale = np.ones(C)
    for _ in range(START_HALVINGS):
        lp = ctx.model.log_density(starts)
        far = ~(np.isfinite(lp) & (lp >= base_lp - gap))
        if not far.any():
            return starts
        scale[far] *= 0.5
        starts[far] = base[far] + scale[far, None] * noise[far]
    lp = ctx.model.log_density(starts)
    far = ~(np.isfinite(lp) & (lp >= base_lp - gap))
    starts[far] = base[far]
    return starts


def warmup(ctx, state, chol):
    """Adapt step size, trajectory length and preconditioner; a generator of snapshots.

    Returns (through ``yield from``) the chains' state, the :class:`Tuning`
    and why sampling should not start (None, ``stop request`` or ``time
    budget``). Chains still stuck far below the others at the end are
    dropped here.
    """
    model, rng, target, progress, W = ctx.model, ctx.rng, ctx.target, ctx.progress, ctx.warmup
    eps = _initial_step_size(rng, state, target, chol)
    da = DualAveraging(eps, target=TARGET_ACCEPT)
    chees = ChEES(trajectory_length=1.0, max_length=MAX_LEAPFROG * eps)
    it, restarted, ended_by = 0, 0, None
    late = None  # relocation counters at the middle of warm-up
    last_yield = ctx.clock()
    win_lp = []
    for kind, length in warmup_schedule(W):
        win_lp, win_grad, win_pos = [], [], []
        last_window = kind == "fast" and it + length >= W
        for _ in range(length):
            u = 1.0 - rng.random()
            n_steps = int(min(MAX_LEAPFROG, max(1, math.ceil(u * chees.length / eps))))
            x_old = _whiten(chol, state.position)
            state, info = step(rng, state, target, Params(eps, n_steps, chol))
            it += 1
            if model.K > 1 and it % RELOCATE_WARMUP == 0:
                if 2 * it > W and late is None:  # counted from the second half of warm-up
                    late = (progress.relocated, progress.relocation_slots)
                state = _relocate(ctx, state)
            eps = da.update(info.accept_prob)
            chees.update(x_old, _whiten(chol, info.proposal), info.end_momentum, info.accept_prob, u)
            chees.max_log_T = math.log(MAX_LEAPFROG * eps)
            if last_window:
                chees.average()
            progress.record(info, n_steps)
            win_lp.append(state.log_density)
            win_grad.append(state.grad)
            win_pos.append(state.position)
            if it % ctx.settings.snapshot_every == 0 or (
                ctx.settings.snapshot_seconds and ctx.clock() - last_yield > ctx.settings.snapshot_seconds
            ):
                yield progress.snapshot("warmup", it, W, positions=state.position, eps=eps, T=chees.length)
                last_yield = ctx.clock()
            if ctx.should_stop():
                ended_by = "stop request"
            elif ctx.over_budget():
                ended_by = "time budget"
            if ended_by:
                break
        if ended_by:
            break
        if kind == "slow":
            stuck = _stuck_chains(np.array(win_lp), against="best")
            if np.any(stuck):
                donors = rng.choice(np.flatnonzero(~stuck), size=int(stuck.sum()))
                pos = state.position.copy()
                pos[stuck] = pos[donors]
                state = init_state(target, pos)
                restarted += int(stuck.sum())
            chol = _metric(ctx, np.array(win_pos)[:, ~stuck], np.array(win_grad)[:, ~stuck])
            da = DualAveraging(eps, target=TARGET_ACCEPT)
    eps = da.final() if da.count else eps
    ctx.timings["warmup_seconds"] = ctx.clock() - ctx.t0 - ctx.timings["init_seconds"]
    # chains still stuck after warm-up leave the run
    keep = np.ones(state.position.shape[0], dtype=bool)
    if not ended_by and W > 0:
        keep = ~_stuck_chains(np.array(win_lp) if win_lp else state.log_density[None, :])
    dropped = [int(i) for i in np.flatnonzero(~keep)]
    if dropped:
        state = init_state(target, state.position[keep])
    progress.set_chains(int(keep.sum()), dropped, restarted)
    far_moves, moves = late or (0, 0)
    far_moves, moves = progress.relocated - far_moves, progress.relocation_slots - moves
    return state, Tuning(eps, chees.final(), chol, relocate_every(far_moves, moves)), ended_by


def sample(ctx, state, tuning, ended_by):
    """Draw until the criterion holds and the requested draws are in; a generator of snapshots.

    Convergence is checked at iterations fixed by the draws alone, so the
    draws never depend on timing; only a stop request or the time budget
    (checked every iteration) can end a run at a time-dependent point.
    """
    model, rng, target, progress, settings = ctx.model, ctx.rng, ctx.target, ctx.progress, ctx.settings
    eps, T, chol = tuning.step_size, tuning.trajectory_length, tuning.chol
    W = ctx.warmup
    ctx.sink.reset(state.position.shape[0], model.param_names)
    status = None if ended_by is None else ("stopped" if ended_by == "stop request" else "unconverged")
    block_pos, block_lp = [], []
    n_draws, sweeps = 0, 0
    t_sample = last_yield = ctx.clock()
    max_draws = settings.max_draws or max(20 * settings.draws, 4000)
    next_check = settings.snapshot_every
    diag = traces = None
    diag_at = -1  # draws at the last convergence check
    shrinks = 0  # step-size reductions after divergences

    def flush():
        if block_pos:
            ctx.sink.append(np.stack(block_pos, axis=1), np.stack(block_lp, axis=1))
            block_pos.clear()
            block_lp.clear()

    while status is None:
        for _ in range(settings.thin):  # keep every thin-th iteration
            u = 1.0 - rng.random()
            n_steps = int(min(MAX_LEAPFROG, max(1, math.ceil(u * T / eps))))
            state, info = step(rng, state, target, Params(eps, n_steps, chol))
            progress.record(info, n_steps, sampling=True)
            sweeps += 1
            if model.K > 1 and sweeps % tuning.relocate_every == 0:
                state = _relocate(ctx, state)
            if ctx.should_stop():
                ended_by = "stop request"
            elif ctx.over_budget():
                ended_by = "time budget"
            if ended_by:
                break
        block_pos.append(state.position)
        block_lp.append(state.log_density)
        n_draws += 1
        if ended_by:
            status = "stopped" if ended_by == "stop request" else "unconverged"
        elif n_draws >= max_draws:
            status, ended_by = "unconverged", "draw limit"
        elif n_draws >= next_check and shrinks < MAX_STEP_SHRINKS and too_many_divergences(
                progress.divergent, n_draws * state.position.shape[0]):
            # a smaller step, and sampling starts over with the kernel it makes
            eps *= STEP_SHRINK
            shrinks += 1
            progress.shrink_step(n_draws)
            ctx.warmup = W = W + n_draws
            block_pos.clear()
            block_lp.clear()
            ctx.sink.reset(state.position.shape[0], model.param_names)
            n_draws, next_check, diag, traces, diag_at = 0, settings.snapshot_every, None, None, -1
        elif n_draws >= next_check:
            flush()
            diag, traces = progress.check(ctx.sink.read()[0])
            diag_at = n_draws
            if diag["converged"] and n_draws >= settings.draws:
                status, ended_by = "converged", "criterion"
            else:
                next_check = n_draws + next_check_gap(n_draws, diag, settings)
        if status is None and n_draws and (  # none after a step shrink, before new draws
            (not settings.snapshot_seconds and diag_at == n_draws)
            or (settings.snapshot_seconds and ctx.clock() - last_yield > settings.snapshot_seconds)
        ):
            flush()
            yield progress.snapshot(
                "sampling", W + n_draws, W, positions=ctx.sink.read()[0], eps=eps, T=T,
                diagnostics=diag, traces=traces, diagnostics_at=diag_at,
            )
            last_yield = ctx.clock()
    flush()
    ctx.timings["sampling_seconds"] = ctx.clock() - t_sample
    yield _final(ctx, status, ended_by, n_draws, diag, traces, diag_at, eps, T)


def _final(ctx, status, ended_by, n_draws, diag, traces=None, diag_at=-1, eps=None, T=None):
    """The last snapshot: status, why the run ended, diagnostics on every draw, timings."""
    positions, _ = ctx.sink.read() if n_draws else (np.empty((0, 0, 0)), None)
    if n_draws and diag_at != n_draws and positions.shape[1] >= 4:
        diag, traces = ctx.progress.check(positions)
        diag_at = n_draws
    ctx.timings["total_seconds"] = ctx.clock() - ctx.t0
    final = ctx.progress.snapshot(
        "done", ctx.warmup + n_draws, ctx.warmup, positions=positions if n_draws else None, eps=eps, T=T,
        diagnostics=diag, traces=traces, diagnostics_at=diag_at,
    )
    if status == "unconverged" and diag and diag["converged"] and n_draws >= ctx.settings.draws:
        status = "converged"
    final["status"] = status
    final["ended_by"] = ended_by
    final["timings"] = {k: round(v, 4) for k, v in ctx.timings.items()}
    return final


def _metric(ctx, positions, grads):
    """The preconditioner a slow window ends with (:func:`inference.schedule.metric_kind`).

    ``positions`` and ``grads`` are the window's, shape (iterations, chains, dim).
    """
    kind = metric_kind(ctx.progress.relocated, ctx.progress.relocation_slots)
    ctx.progress.metric = kind
    dim = positions.shape[-1]
    if kind == "fisher":
        return fisher_chol(grads.reshape(-1, dim))
    return covariance_chol(positions.reshape(-1, dim))


def _relocate(ctx, state):
    """A change-date relocation for all chains; the state's gradient is refreshed."""
    theta, lp, info = relocate_move(ctx.rng, ctx.model, state.position, state.log_density, binned=ctx.binned)
    ctx.progress.record_relocation(info)
    return State(theta, lp, ctx.target.grad(theta))


def _whiten(chol, x):
    return solve_triangular(chol, x.T, lower=True).T


def _stuck_chains(lp_window, against="median"):
    """Chains whose mean log density in a window is far below the median (or best) chain's.

    Parameters
    ----------
    lp_window : numpy.ndarray, shape (k, C)
    against : {"median", "best"}
        ``"median"`` (after warm-up, where a chain is dropped): never flags a
        majority, since most chains below the rest is a disagreement to
        report, not a trap. ``"best"`` (in warm-up, where a chain is only
        restarted from a good one): any chain far below the best chain, so a
        majority that started poorly is brought back too.
    """
    lp = np.where(np.isfinite(lp_window), lp_window, -1e300)
    means = lp.mean(axis=0)
    spread = float(np.median(lp.std(axis=0))) if lp.shape[0] > 1 else 0.0
    gap = max(STUCK_GAP, 6.0 * spread)
    if against == "best":
        # the spread of the good chains only: a chain still climbing has a wide one
        good = means >= means.max() - gap
        spread = float(np.median(lp[:, good].std(axis=0))) if lp.shape[0] > 1 else 0.0
        return means < means.max() - max(STUCK_GAP, 6.0 * spread)
    stuck = means < np.median(means) - gap
    if stuck.sum() * 2 > lp.shape[1]:  # never drop a majority; that is non-convergence
        return np.zeros(lp.shape[1], dtype=bool)
    return stuck


def _initial_step_size(rng, state, target, chol):
    """Halve or double a one-step trajectory until acceptance crosses 0.8.

    After Hoffman & Gelman (2014), Algorithm 4, on the mean over chains.
    """
    eps = 0.5
    for _ in range(30):
        _, info = step(rng, state, target, Params(eps, 1, chol))
        a = float(np.mean(info.accept_prob))
        if a < 0.8:
            eps *= 0.5
        elif eps < 4.0:
            eps *= 1.5
            _, info2 = step(rng, state, target, Params(eps, 1, chol))
            if float(np.mean(info2.accept_prob)) < 0.8:
                eps /= 1.5
                break
        else:
            break
        if eps < 1e-6:
            break
    return eps
