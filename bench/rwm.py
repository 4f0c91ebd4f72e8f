"""A random-walk Metropolis baseline as a careful practitioner would run it.

What the engine benchmark compares Bendline against (bench/engine.py): the
same posterior (the reference problem), the same starting help (Bendline's
start search), and the same convergence criterion (max rank-normalised split
R-hat < 1.01, min bulk and tail ESS >= 400 over the same reported
quantities, computed by the same functions,
``bendline.inference.snapshots.diagnose``), with:

* a lean log density for ONE parameter vector (:class:`LeanLogDensity`):
  plain numpy on a 365-value series and ``math`` for the scalars, no
  batching overhead; it equals ``TrendModel.log_density`` to rounding
  (checked by :func:`check_lean`);
* 4 chains, each in its own process (:func:`run_baseline`);
* an adaptive pilot of 20,000 steps per chain that learns a diagonal
  proposal: ``scale_i = f * 2.38 / sqrt(d) * sd_i`` with ``sd_i`` the
  posterior standard deviations estimated from the second half of the pilot
  so far (the 2.38/sqrt(d) rule of Gelman, Roberts & Gilks 1996, "Efficient
  Metropolis jumping rules", Bayesian Statistics 5, 599-607; Roberts &
  Rosenthal 2001, "Optimal scaling for various Metropolis-Hastings
  algorithms", Statistical Science 16, 351-367), re-estimated every 1,000
  steps, with a global factor ``f`` nudged toward the 0.234 acceptance rate
  those papers derive (a diminishing adaptation as in Roberts & Rosenthal
  2009, "Examples of adaptive MCMC", J. Comput. Graph. Stat. 18, 349-367).
  At the end of the pilot the four chains' estimates are pooled (mean of the
  within-chain variances, geometric mean of the factors) and the proposal is
  frozen; the pilot's draws are discarded as warm-up;
* the criterion checked every 2,000 steps per chain. Every 10th state is
  kept (autocorrelation times here are hundreds of steps, so this loses
  almost no ESS; it keeps the checks cheap); like Bendline's own check, the
  first pass uses at most 1,000 kept draws per chain and a pass is confirmed
  on all kept draws. The workers go on with the next 2,000 steps while the
  parent checks.
"""

from __future__ import annotations

import math
import multiprocessing as mp
import time

import numpy as np

PILOT_STEPS = 20_000
PILOT_STAGE = 1_000
CHECK_EVERY = 2_000
THIN = 10
CHAINS = 4
TARGET_ACCEPT = 0.234
DIAGNOSTIC_DRAWS = 1_000  # as bendline.inference.snapshots.DIAGNOSTIC_DRAWS


class LeanLogDensity:
    """The trend model's log posterior for one parameter vector, lean.

    Same value as :meth:`bendline.inference.model.TrendModel.log_density`
    (up to floating-point rounding) for the options the reference problem
    uses: continuous trend, uniform change-date prior, optional weekday
    effect, Poisson or negative binomial, optional completeness.

    Parameters
    ----------
    model : bendline.inference.model.TrendModel
    """

    def __init__(self, model):
        if model.flat or model.jumps or model.knot_centre is not None:
            raise ValueError("the lean density covers continuous trends with uniform change-date priors only")
        from scipy.special import gammaln

        from bendline.inference.model_outputs import LOG_C_FLOOR

        self._gammaln = gammaln
        self.K = model.K
        self.dim = model.dim
        self.m = float(model.min_segment)
        self.S = float(model.slack)
        self.n = model.n
        self.tmid = model.t + 0.5
        self.all_obs = bool(model.mask.all())
        self.obs = model.obs_index
        self.y = model.y_obs.astype(float)
        self.y_unique = model._y_unique.astype(float)
        self.y_counts = model._y_counts.astype(float)
        self.n_obs = float(self.y.size)
        self.y_sum = float(model._y_sum)
        self.const = float(model._const)
        self.log_completeness = model.log_completeness.copy() if model.log_completeness.any() else None
        self.weekday = model.weekday
        self.dow = model.dow
        self.negbin = model.negbin
        self.level_centre = float(model.level_centre)
        self.level_sd = float(model.level_sd)
        self.rate_sd = float(model.rate_sd)
        self.weekday_sd = float(model.weekday_sd)
        self.c_scale = float(model.c_scale)
        self.log_c_floor = float(LOG_C_FLOOR)
        K = self.K
        self.i_trend = K - 1
        self.i_weekday = 2 * K
        self.i_logc = self.dim - 1

    def __call__(self, th):
        """Log density (up to the model's constant) of one vector ``th`` (dim,); ``-inf`` off the support."""
        gammaln = self._gammaln
        K = self.K
        # knot gaps: softmax of (z, 0) onto the slack above the minimum segments
        z = [float(v) for v in th[: K - 1]]
        zmax = max(z + [0.0])
        e = [math.exp(v - zmax) for v in z] + [math.exp(-zmax)]
        tot = sum(e)
        p = [v / tot for v in e]
        if min(p) <= 0.0:
            return -math.inf
        gaps = [self.m + self.S * v for v in p]
        eta = [float(v) for v in th[self.i_trend: self.i_trend + K + 1]]
        r = [(eta[j + 1] - eta[j]) / gaps[j] for j in range(K)]
        logmu = self.tmid * r[0]
        logmu += eta[0]
        tau = 0.0
        n = self.n
        tmid = self.tmid
        for j in range(K - 1):
            tau += gaps[j]
            b = r[j + 1] - r[j]
            k = int(tau)  # the interval holding knot j: its mean hinge is (k + 1 - tau)^2 / 2
            if k < n:
                logmu[k] += 0.5 * b * (k + 1 - tau) ** 2
                if k + 1 < n:
                    logmu[k + 1:] += b * (tmid[k + 1:] - tau)
        lp = sum(math.log(v) for v in p)  # uniform ordered knots (Jacobian of z -> p)
        lp -= 0.5 * ((eta[0] - self.level_centre) / self.level_sd) ** 2
        lp -= 0.5 * sum((v / self.rate_sd) ** 2 for v in r) + sum(math.log(g) for g in gaps)
        if self.weekday:
            w = th[self.i_weekday: self.i_weekday + 6]
            w7 = np.append(w, -w.sum())
            logmu += w7[self.dow]
            lp -= 0.5 * float(w7 @ w7) / self.weekday_sd**2
        if self.log_completeness is not None:
            logmu += self.log_completeness
        if not self.all_obs:
            logmu = logmu[self.obs]
        mu = np.exp(logmu)
        y = self.y
        if self.negbin:
            log_c = float(th[self.i_logc])
            if log_c > 50.0:
                return -math.inf
            phi = math.exp(-2.0 * max(log_c, self.log_c_floor))
            ll = (float(gammaln(self.y_unique + phi) @ self.y_counts) - self.n_obs * math.lgamma(phi)
                  - self.y_sum * math.log(phi) + float(logmu @ y)
                  - float((y + phi) @ np.log1p(mu / phi)) - self.const)
            lp += log_c - 0.5 * (math.exp(log_c) / self.c_scale) ** 2
        else:
            ll = float(logmu @ y) - float(mu.sum()) - self.const
        out = ll + lp
        return out if math.isfinite(out) else -math.inf


def check_lean(model, lean, points):
    """Largest |lean - TrendModel.log_density| over the rows of ``points`` (finite rows only), and rows compared."""
    ref = model.log_density(points)
    mine = np.array([lean(x) for x in points])
    ok = np.isfinite(ref)
    same_support = bool(np.all(np.isfinite(mine) == ok))
    return float(np.max(np.abs(ref[ok] - mine[ok]))), int(ok.sum()), same_support


def time_lean(lean, x, calls=2000):
    """Seconds per call of the lean density at ``x`` (best of three runs of ``calls``)."""
    best = math.inf
    for _ in range(3):
        t0 = time.perf_counter()
        for _ in range(calls):
            lean(x)
        best = min(best, (time.perf_counter() - t0) / calls)
    return best


def _steps(f, rng, x, lp, scale, n, thin, keep_all=False):
    """n random-walk Metropolis steps; returns x, lp, accepted count, kept states."""
    D = x.size
    noise = rng.standard_normal((n, D))
    noise = noise * scale if scale.ndim == 1 else noise @ scale.T
    log_u = np.log(rng.random(n))
    kept = np.empty((n if keep_all else n // thin, D))
    acc = 0
    for i in range(n):
        prop = x + noise[i]
        lpp = f(prop)
        if lpp - lp > log_u[i]:  # -inf proposals never pass
            x, lp = prop, lpp
            acc += 1
        if keep_all:
            kept[i] = x
        elif (i + 1) % thin == 0:
            kept[(i + 1) // thin - 1] = x
    return x, lp, acc, kept


def _proposal(cov, factor, dense):
    """Proposal scale: f * 2.38 / sqrt(d) times the sds (diagonal) or a Cholesky factor of cov (dense)."""
    D = cov.shape[0]
    rule = factor * 2.38 / math.sqrt(D)
    if not dense:
        return rule * np.sqrt(np.maximum(np.diag(cov), 1e-16))
    return rule * np.linalg.cholesky(cov + 1e-10 * np.eye(D))


def _chain(conn, lean, x0, scale0, seed, dense):
    """One chain in its own process: answers 'pilot' and 'run' requests on a pipe."""
    np.seterr(all="ignore")
    rng = np.random.default_rng(seed)
    x = np.array(x0, dtype=float)
    lp = lean(x)
    D = x.size
    scale = np.array(scale0, dtype=float)
    while True:
        msg = conn.recv()
        if msg[0] == "stop":
            return
        if msg[0] == "pilot":
            t0 = time.perf_counter()
            n_stages = msg[1] // PILOT_STAGE
            states = np.empty((n_stages * PILOT_STAGE, D))
            log_f = 0.0
            acc_total = 0
            for s in range(n_stages):
                x, lp, acc, kept = _steps(lean, rng, x, lp, scale, PILOT_STAGE, 1, keep_all=True)
                states[s * PILOT_STAGE:(s + 1) * PILOT_STAGE] = kept
                acc_total += acc
                done = (s + 1) * PILOT_STAGE
                log_f += (acc / PILOT_STAGE - TARGET_ACCEPT) * 2.0 / math.sqrt(s + 1)
                scale = _proposal(np.cov(states[done // 2: done].T), math.exp(log_f), dense)
            half = states[len(states) // 2:]
            conn.send({"cov": np.cov(half.T), "log_factor": log_f, "accept": acc_total / len(states),
                       "seconds": time.perf_counter() - t0, "steps": len(states)})
        elif msg[0] == "scale":
            scale = np.array(msg[1], dtype=float)
        elif msg[0] == "run":
            t0 = time.perf_counter()
            x, lp, acc, kept = _steps(lean, rng, x, lp, scale, msg[1], THIN)
            conn.send({"kept": kept, "accepted": acc, "seconds": time.perf_counter() - t0})


def _thin_to(values, n):
    """At most n draws per chain, evenly spaced (as Bendline's first-pass check)."""
    N = values.shape[1]
    if N <= n:
        return values
    return values[:, np.linspace(0, N - 1, n).round().astype(int)]


def run_baseline(series, spec, seed=12, budget_seconds=300.0, chains=CHAINS, pilot_steps=PILOT_STEPS,
                 proposal="diag"):
    """The practitioner's random-walk Metropolis on one series; time from the start search to the criterion.

    Returns
    -------
    dict
        converged, seconds (wall, start search + processes + pilot + sampling
        to the check that passed), steps_per_chain (pilot + sampling),
        sampling_steps_per_chain, min_ess, rhat_max, accept (sampling),
        pilot_accept, us_per_step (wall per step per chain in the workers,
        4 processes sharing the machine's cores), lean_us_per_call (the lean
        density alone, one process), lean_max_abs_diff (against
        TrendModel.log_density at the starting points), pilot_seconds,
        check_seconds (parent time spent in diagnostics).
    """
    from bendline.inference.init import find_starts
    from bendline.inference.model import TrendModel
    from bendline.inference.snapshots import diagnose
    from bendline.inference.summaries import reported_quantities

    np.seterr(all="ignore")
    model = TrendModel(series, spec)
    lean = LeanLogDensity(model)
    rng = np.random.default_rng(seed)
    t0 = time.perf_counter()
    modes, _lp0, chol = find_starts(model, rng)  # the same starting help as Bendline's
    D = model.dim
    starts = modes[0] + rng.standard_normal((chains, D)) @ chol.T
    scale0 = np.sqrt(np.einsum("ij,ij->i", chol, chol)) * 2.38 / math.sqrt(D)
    dense = {"diag": False, "dense": True}[proposal]
    ctx = mp.get_context("fork")
    pipes, procs = [], []
    child_seeds = np.random.SeedSequence(seed).spawn(chains)
    for c in range(chains):
        a, b = ctx.Pipe()
        proc = ctx.Process(target=_chain, args=(b, lean, starts[c], scale0, child_seeds[c], dense), daemon=True)
        proc.start()
        pipes.append(a)
        procs.append(proc)
    try:
        for a in pipes:
            a.send(("pilot", pilot_steps))
        pilots = [a.recv() for a in pipes]
        t_pilot = time.perf_counter() - t0
        cov = np.mean([p["cov"] for p in pilots], axis=0)
        factor = math.exp(np.mean([p["log_factor"] for p in pilots]))
        scale = _proposal(cov, factor, dense)
        for a in pipes:
            a.send(("scale", scale))
            a.send(("run", CHECK_EVERY))
        blocks = []
        steps = 0
        accepted = 0
        loop_seconds = 0.0
        check_seconds = 0.0
        converged = False
        diag = None
        while True:
            replies = [a.recv() for a in pipes]
            steps += CHECK_EVERY
            elapsed = time.perf_counter() - t0
            if elapsed < budget_seconds:
                for a in pipes:  # the workers go on while the parent checks
                    a.send(("run", CHECK_EVERY))
            accepted += sum(r["accepted"] for r in replies)
            loop_seconds += sum(r["seconds"] for r in replies)
            tc = time.perf_counter()
            last = np.stack([r["kept"] for r in replies])
            names, block_values = reported_quantities(model, last)
            blocks.append(block_values)
            values = np.concatenate(blocks, axis=1)
            diag = diagnose(names, _thin_to(values, DIAGNOSTIC_DRAWS))
            if diag["converged"] and values.shape[1] > DIAGNOSTIC_DRAWS:
                diag = diagnose(names, values)
            check_seconds += time.perf_counter() - tc
            if diag["converged"]:
                converged = True
                break
            if elapsed >= budget_seconds:
                break
        seconds = time.perf_counter() - t0
    finally:
        for a in pipes:
            try:
                a.send(("stop",))
            except (BrokenPipeError, OSError):
                pass
        for proc in procs:
            proc.join(timeout=5)
            if proc.is_alive():
                proc.terminate()
    # untimed: the lean density against the model at the starts, the last states and wider points
    probe = np.random.default_rng(seed + 1000)
    wide = modes[0] + 3.0 * probe.standard_normal((8, D)) @ chol.T
    diff, compared, same_support = check_lean(model, lean, np.concatenate([starts, last[:, -1], wide]))
    us = time_lean(lean, last[0, -1]) * 1e6
    ess = min(diag["ess_bulk_min"] or 0.0, diag["ess_tail_min"] or 0.0)
    return {
        "proposal": proposal, "converged": converged, "seconds": seconds, "min_ess": ess, "min_ess_per_s": ess / seconds,
        "rhat_max": diag["rhat_max"], "chains": chains, "steps_per_chain": pilot_steps + steps,
        "sampling_steps_per_chain": steps, "draws_per_chain": steps, "accept": accepted / (chains * steps),
        "pilot_accept": float(np.mean([p["accept"] for p in pilots])), "pilot_seconds": t_pilot,
        "proposal_factor": factor, "us_per_step": loop_seconds / (chains * steps) * 1e6,
        "lean_us_per_call": us, "lean_max_abs_diff": diff, "lean_points_compared": compared,
        "lean_same_support": same_support, "check_seconds": check_seconds,
    }
