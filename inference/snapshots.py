"""Snapshots of a running fit: the small JSON-safe summaries a watcher reads.

:class:`Progress` keeps the run's counters (gradient evaluations, acceptance,
divergences, dropped chains) and builds snapshots from the chains' current
positions (warm-up) or the draws so far (sampling); :func:`diagnose` gives
the convergence verdict on the reported quantities.
"""

from __future__ import annotations

import numpy as np

from . import SCHEMA_VERSION, diagnostics, summaries
from .jsonsafe import num as _num
from .jsonsafe import num_list

RHAT_MAX = 1.01
ESS_MIN = 400
#: Snapshots summarise at most this many draws (the final result uses more).
SNAPSHOT_DRAWS = 250
#: Convergence checks during sampling use at most this many evenly spaced
#: draws per chain (thinning keeps the ESS estimate conservative); the JSON
#: result's diagnostics use every draw.
DIAGNOSTIC_DRAWS = 1000


class Progress:
    """Builds snapshots; keeps the running counters (acceptance, divergences)."""

    def __init__(self, model, settings, t0, clock, rng):
        self.model = model
        self.settings = settings
        self.t0 = t0
        self.clock = clock
        self.rng = rng
        self.n_grad = 0
        self.accept_sum = 0.0
        self.accept_n = 0
        self.divergent = 0
        self.chains = settings.chains
        self.dropped = []
        self.restarted = 0
        self.mode_lp = None
        self.relocations = 0
        self.relocated = 0
        self.relocation_slots = 0
        self.step_shrinks = 0
        self.discarded_draws = 0
        self.metric = None  # the warm-up's last preconditioner: "covariance" or "fisher"
        self.gi = None
        if settings.gi_mean_days is not None:
            self.gi = (settings.gi_mean_days, settings.gi_sd_days)

    def record(self, info, n_steps, sampling=False):
        self.n_grad += n_steps * info.accept_prob.size
        self.accept_sum = 0.95 * self.accept_sum + 0.05 * float(np.mean(info.accept_prob)) if self.accept_n else float(np.mean(info.accept_prob))
        self.accept_n += 1
        if sampling:
            self.divergent += int(info.divergent.sum())

    def shrink_step(self, discarded):
        """Sampling restarts with a smaller step: its divergences so far go with its discarded draws."""
        self.step_shrinks += 1
        self.discarded_draws += int(discarded)
        self.divergent = 0

    def record_relocation(self, info):
        """Count a change-date relocation and how many knots moved far.

        A knot counts as relocated when it moved more than a tenth of the
        series, the distance HMC's local steps rarely cover in one go.
        """
        self.relocations += 1
        far = info.moved_days > 0.1 * self.model.n * self.model.interval_days
        self.relocated += int(far.sum())
        self.relocation_slots += int(far.size)

    def set_chains(self, kept, dropped, restarted):
        self.chains = kept
        self.dropped = dropped
        self.restarted = restarted

    def check(self, positions):
        """Diagnostics (on at most DIAGNOSTIC_DRAWS per chain) and traces of the draws so far.

        Parameters
        ----------
        positions : numpy.ndarray, shape (chains, draws, dim)
        """
        names, values = summaries.reported_quantities(self.model, positions)
        diag = diagnose(names, _thin(values, DIAGNOSTIC_DRAWS))
        if diag["converged"] and values.shape[1] > DIAGNOSTIC_DRAWS:
            # the thinned draws pass: confirm on every draw, as the result will
            # judge them, so a run never stops on a check its result then fails
            diag = diagnose(names, values)
        return diag, _traces(names, values)

    def snapshot(self, phase, iteration, warmup, positions=None, eps=None, T=None,
                 diagnostics=None, traces=None, diagnostics_at=None):
        """A JSON-safe summary of the run so far.

        ``positions`` is (chains, dim) in warm-up (the chains' current
        positions) or (chains, draws, dim) in sampling; ``diagnostics`` come
        from the last :meth:`check` (made at ``diagnostics_at`` draws).
        """
        model = self.model
        snap = {
            "schema_version": SCHEMA_VERSION,
            "phase": phase,
            "iteration": int(iteration),
            "warmup_iterations": int(warmup),
            "elapsed_seconds": round(self.clock() - self.t0, 3),
            "interval_days": int(model.interval_days),
            "series_end": str(model.series.end),
            "chains": int(self.chains),
            "draws_per_chain": int(max(0, iteration - warmup)) if phase in ("sampling", "done") else 0,
            "draws_requested": int(self.settings.draws),
            "sampler": {
                "step_size": _num(eps),
                "trajectory_length": _num(T),
                "accept_rate": _num(self.accept_sum),
                "divergences": int(self.divergent),
                "gradient_evaluations": int(self.n_grad),
                "chains_dropped": list(self.dropped),
                "chains_restarted_in_warmup": int(self.restarted),
                "step_size_reductions": int(self.step_shrinks),
                "draws_discarded_after_divergences": int(self.discarded_draws),
                "relocation_moves": int(self.relocations),
                "far_relocation_rate": _num(self.relocated / self.relocation_slots)
                if self.relocation_slots else None,
                "metric": self.metric,
            },
            "diagnostics": diagnostics,
            "diagnostics_at_draw": diagnostics_at if diagnostics is not None else None,
            "traces": traces,
        }
        if positions is None or not self.settings.snapshot_summaries:
            return snap
        flat = positions if positions.ndim == 2 else positions.reshape(-1, positions.shape[-1])
        if flat.shape[0] > SNAPSHOT_DRAWS:
            idx = np.linspace(0, flat.shape[0] - 1, SNAPSHOT_DRAWS).astype(int)
            flat = flat[idx]
        stats = summaries.predictive_summary(model, flat, self.rng)
        snap["band"] = summaries.band(model, flat, self.rng, stats=stats)
        snap["segments"] = summaries.segments(model, flat, self.gi)
        snap["changepoints"] = summaries.changepoints(model, flat)
        snap["changepoint_histograms"] = summaries.changepoint_histograms(model, flat)
        snap["current"] = summaries.current(model, flat, self.gi)
        snap["projection"] = summaries.projection(model, flat, self.rng, self.settings.horizon)
        snap["weekday"] = summaries.weekday_effects(model, flat)
        snap["checks"] = summaries.checks(model, flat, self.rng, stats=stats)
        return snap


def _thin(values, most):
    """Evenly spaced draws along axis 1, at most ``most``, the last always kept."""
    N = values.shape[1]
    if N <= most:
        return values
    idx = np.unique(np.linspace(N - 1, 0, most).round().astype(int))
    return values[:, idx]


def diagnose(names, values):
    """R-hat, bulk and tail ESS for each reported quantity, and the verdict.

    Parameters
    ----------
    names : list of str
    values : numpy.ndarray, shape (chains, draws, P)
    """
    rh = np.atleast_1d(np.asarray(diagnostics.rhat(values), dtype=float))
    eb = np.atleast_1d(np.asarray(diagnostics.ess_bulk(values), dtype=float))
    et = np.atleast_1d(np.asarray(diagnostics.ess_tail(values), dtype=float))
    rows = [
        {"name": n, "rhat": _num(r), "ess_bulk": _num(b), "ess_tail": _num(t)}
        for n, r, b, t in zip(names, rh, eb, et)
    ]
    rh = np.nan_to_num(rh, nan=np.inf)
    eb = np.nan_to_num(eb, nan=0.0)
    et = np.nan_to_num(et, nan=0.0)
    converged = bool(rh.max() < RHAT_MAX and eb.min() >= ESS_MIN and et.min() >= ESS_MIN)
    return {
        "converged": converged,
        "rhat_max": _num(rh.max()),
        "ess_bulk_min": _num(eb.min()),
        "ess_tail_min": _num(et.min()),
        "parameters": rows,
        "criterion": f"max R-hat < {RHAT_MAX} and min bulk and tail ESS >= {ESS_MIN}",
        "rhat_threshold": RHAT_MAX,
        "ess_threshold": ESS_MIN,
    }


def _traces(names, values, points=150):
    """Thinned traces of each reported quantity, per chain (the last ``points`` kept)."""
    C, N, P = values.shape
    stride = max(1, N // points)
    idx = np.arange(N - 1, -1, -stride)[::-1][-points:]
    sub = np.transpose(values[:, idx], (2, 0, 1))  # (P, C, k)
    flat = num_list(sub, 5)
    k = idx.size
    return {
        "draw": [int(i) + 1 for i in idx],  # 1-based draw numbers after warm-up
        "thin": int(stride),
        "names": list(names),
        "values": [[flat[(p * C + c) * k:(p * C + c + 1) * k] for c in range(C)] for p in range(P)],
    }
