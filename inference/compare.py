"""How many segments do the data support? PSIS-LOO over K = 1..6.

Each K is fitted with the same options (tentative change dates dropped: they
belong to one K), then scored by its expected log pointwise predictive
density estimated by Pareto-smoothed importance-sampling leave-one-out
cross-validation (Vehtari, Gelman & Gabry 2017, "Practical Bayesian model
evaluation using leave-one-out cross-validation and WAIC", Statistics and
Computing). Weights are stacking weights (Yao, Vehtari, Simpson & Gelman
2018). Leaving one value out of a time series judges how well a model
interpolates, not how it forecasts; that is what the segment count is about.

The recommendation is the smallest K whose elpd is within 4 of the best or
within two standard errors of the paired difference: Sivula, Magnusson &
Vehtari (2020, "Uncertainty in Bayesian leave-one-out cross-validation based
model comparison", arXiv:2008.10296) call differences under 4 small; the
two-standard-error allowance is common practice, no source.

:func:`segment_fit` fits one K and is picklable, so the app can hand each K
to a worker process or a Celery task; :func:`support_from_fits` combines them.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from .driver import run
from .errors import InputError
from .loo import loo, relative_eff, stacking_weights
from .model import TrendModel
from .series import Series
from .sinks import MemorySink
from .spec import spec_from_options
from .summaries import reported_quantities

SEGMENT_RANGE = tuple(range(1, 7))
#: Draws used for the PSIS-LOO estimate of each fit.
LOO_DRAWS = 4000


def _options_for(options, k):
    out = dict(options)
    out["segments"] = k
    out.pop("changepoint_priors", None)
    return out


def segment_fit(series_dict, options, k):
    """Fit K = ``k`` segments and return its PSIS-LOO summary.

    Parameters
    ----------
    series_dict : dict
        ``Series.to_dict()`` (plain data, so this runs in another process).
    options : dict
        Fit options; ``segments`` and ``changepoint_priors`` are replaced.
    k : int

    Returns
    -------
    dict
        ``segments``, ``feasible`` and, when feasible, ``elpd_loo``, ``se``,
        ``p_loo``, ``n_bad_k``, ``converged``, ``pointwise`` (list of floats).
    """
    series = Series.from_dict(series_dict)
    opts = _options_for(options, k)
    try:
        model_spec, settings = spec_from_options(opts)
        model = TrendModel(series, model_spec)
    except InputError as exc:
        return {"segments": k, "feasible": False, "reason": exc.detail}
    sink = MemorySink()
    final = None
    for final in run(model, settings, sink=sink):
        pass
    pos, _ = sink.read()
    return dict(loo_summary(model, pos, final), segments=k)


def loo_summary(model, positions, final=None):
    """PSIS-LOO of one fit from its draws.

    Parameters
    ----------
    model : TrendModel
    positions : numpy.ndarray, shape (chains, draws, dim)
    final : dict, optional
        The run's final snapshot (for its convergence verdict).

    Returns
    -------
    dict
        ``segments``, ``feasible``, ``elpd_loo``, ``se``, ``p_loo``,
        ``n_bad_k``, ``converged``, ``pointwise`` (list of floats).
    """
    C, N, D = positions.shape
    keep = np.arange(0, N, max(1, math.ceil(N * C / LOO_DRAWS)))
    sub = positions[:, keep]
    ll = model.pointwise_log_lik(sub.reshape(-1, D)).reshape(C, keep.size, -1)
    _, values = reported_quantities(model, sub)
    res = loo(ll, reff=relative_eff(values))
    q = model.constrain(sub.reshape(-1, D))
    edges = np.arange(model.n + 1, dtype=float) * model.interval_days  # one bin per interval, in days
    change = np.zeros(model.n)
    for j in range(model.K - 1):
        change += np.histogram(q["knot_days"][:, j], bins=edges)[0]
    return {
        "segments": model.K,
        "feasible": True,
        "elpd_loo": float(res["elpd_loo"]),
        "se": float(res["se"]),
        "p_loo": float(res["p_loo"]),
        "n_bad_k": int(res["n_bad_k"]),
        "converged": bool(((final or {}).get("diagnostics") or {}).get("converged", False)),
        "pointwise": [float(v) for v in res["elpd_pointwise"]],
        "change_days": [float(v) for v in change / max(q["knot_days"].shape[0], 1)],
        "interval_days": int(model.interval_days),
    }


def support_from_fits(fits):
    """Combine per-K summaries into the result's ``segment_support`` list.

    Only members whose chains converged are scored against each other: an
    unconverged fit's PSIS-LOO estimate is not reliable, so it gets no
    stacking weight (``weight: null``), no difference from the best and is
    never recommended; it is listed with ``converged: false`` and a note.

    Parameters
    ----------
    fits : list of dict
        From :func:`segment_fit`.

    Returns
    -------
    list of dict
        One per K in order: ``segments``, ``score`` (elpd_loo), ``se``,
        ``p_loo``, ``elpd_diff`` and ``se_diff`` (against the best converged
        member), ``weight`` (stacking, over the converged members),
        ``n_bad_k``, ``converged``, ``recommended``; infeasible K carry
        ``feasible: false`` and the reason.
    """
    fits = sorted(fits, key=lambda f: f["segments"])
    ok = [f for f in fits if f.get("feasible")]
    if not ok:
        raise InputError("no segment count from 1 to 6 fits this series", column="segments")
    scored = [f for f in ok if f.get("converged")]
    by_k = {}
    if scored:
        P = np.column_stack([f["pointwise"] for f in scored])  # (n_obs, K)
        w = stacking_weights(P) if len(scored) > 1 else np.ones(1)
        elpd = np.array([f["elpd_loo"] for f in scored])
        best = int(np.argmax(elpd))
        diffs = elpd[best] - elpd
        se_diff = np.array([
            0.0 if j == best else float(np.sqrt(P.shape[0] * np.var(P[:, best] - P[:, j])))
            for j in range(len(scored))
        ])
        close = (diffs < 4.0) | (diffs < 2.0 * se_diff)
        recommended = int(np.flatnonzero(close)[0])
        for j, f in enumerate(scored):
            by_k[f["segments"]] = {"elpd_diff": round(float(diffs[j]), 3), "se_diff": round(float(se_diff[j]), 3),
                                   "weight": round(float(w[j]), 4), "recommended": j == recommended}
    out = []
    for f in fits:
        if not f.get("feasible"):
            out.append({"segments": f["segments"], "feasible": False, "reason": f.get("reason"),
                        "score": None, "weight": 0.0, "recommended": False})
            continue
        row = {
            "segments": f["segments"],
            "feasible": True,
            "score": round(f["elpd_loo"], 3),
            "se": round(f["se"], 3),
            "p_loo": round(f["p_loo"], 3),
            "elpd_diff": None, "se_diff": None, "weight": None, "recommended": False,
            "n_bad_k": f["n_bad_k"],
            "converged": f["converged"],
            "method": "PSIS-LOO elpd; stacking weights over the converged fits",
        }
        if f["segments"] in by_k:
            row.update(by_k[f["segments"]])
        else:
            row["note"] = "did not converge: its score is not used for weights or advice"
        out.append(row)
    return out


def change_probability(fits, support):
    """P(a change date falls in each interval), averaged over K with the stacking weights.

    Parameters
    ----------
    fits : list of dict
        From :func:`segment_fit` (each with ``change_days``).
    support : list of dict
        From :func:`support_from_fits` (its weights).

    Returns
    -------
    dict or None
        ``edges_day`` (bin edges in days, one bin per interval),
        ``probability`` (per bin; the expected number of change dates in it,
        which is a probability when bins are narrower than the minimum
        segment) and ``weights`` ({K: weight}); None without a weighted member.
    """
    weights = {s["segments"]: s["weight"] for s in support if s.get("weight")}
    rows = [f for f in fits if f.get("feasible") and f["segments"] in weights and f.get("change_days") is not None]
    if not rows:
        return None
    total = sum(weights[f["segments"]] for f in rows)
    prob = sum(weights[f["segments"]] * np.asarray(f["change_days"]) for f in rows) / total
    step = rows[0].get("interval_days", 1)
    return {
        "edges_day": [float(i * step) for i in range(prob.size + 1)],
        "probability": [round(float(v), 5) for v in prob],
        "weights": {str(f["segments"]): weights[f["segments"]] for f in rows},
    }


def compare_segments(series, options, *, ks=SEGMENT_RANGE, workers=None, log=None):
    """Fit every K in ``ks`` (in parallel processes): (support list, averaged change probability).

    Parameters
    ----------
    series : Series
    options : dict
    ks : sequence of int
    workers : int, optional
        Processes; default one per core, at most one per K.
    log : file-like, optional
        Gets one line per finished K.
    """
    data = series.to_dict()
    fits = []
    workers = workers or min(len(ks), _cores())
    if workers <= 1:
        for k in ks:
            fits.append(segment_fit(data, options, k))
            _say(log, fits[-1])
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            futures = [pool.submit(segment_fit, data, options, k) for k in ks]
            for fut in futures:
                fits.append(fut.result())
                _say(log, fits[-1])
    support = support_from_fits(fits)
    return support, change_probability(fits, support)


def _cores():
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1)


def _say(log, fit):
    if log is None:
        return
    if fit.get("feasible"):
        note = "" if fit.get("converged") else "; did not converge, not scored"
        log.write(f"  K = {fit['segments']}: elpd_loo {fit['elpd_loo']:.1f} (se {fit['se']:.1f}){note}\n")
    else:
        log.write(f"  K = {fit['segments']}: not fitted ({fit['reason']})\n")
    log.flush()
