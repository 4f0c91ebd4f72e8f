"""One verdict on a fit: may its numbers be reported, and what must be said with them.

``reportable`` is true when the chains converged and no warning invalidates
the numbers. Every view (dashboard, briefing view, HTML report, CSVs, the
command line's exit status and message, the batch summary, the API) reads
this verdict and shows the warnings in words beside the numbers; none
applies a rule of its own.

Warnings, each ``{kind, message, parameter, blocking}``:

``convergence``
    R-hat or ESS short of the criterion (blocking).
``divergences``
    Divergent transitions in more than a small share of the draws: the
    sampler could not follow the posterior everywhere, so the draws may be
    biased (Betancourt 2017, "A conceptual introduction to Hamiltonian Monte
    Carlo", section 6.2) (blocking).
``constraint``
    A change date whose draws pile against the minimum segment length or a
    series end: the setting, not the data, placed it (blocking).
``prior``
    A growth rate held back by its prior: weakening the prior moves the
    estimate by a good part of its own spread, judged by importance
    reweighting of the draws to a prior twice as wide (the power-scaling
    idea of Kallioinen, Paananen, Buerkner & Vehtari 2023, "Detecting and
    diagnosing prior and likelihood sensitivity with power-scaling",
    Statistics and Computing 34) (blocking).
``multimodal``
    A change date with separated modes; the result reports each mode
    (not blocking: the modes are the honest answer).
``data``
    Too little signal: nearly all values
    missing, or too few events for the segments asked (blocking).
``chains``
    Chains stuck far below the others were left out (not blocking).

The thresholds are ours (common practice, no source) unless a source is
named beside them.
"""

from __future__ import annotations

import numpy as np

from .loo import psis_smooth
from .snapshots import ESS_MIN, RHAT_MAX
from .wording import change_date_text, fmt_rhat

#: Divergent transitions above this share of the draws make a fit unreportable.
DIVERGENCE_SHARE = 0.001
#: A change date with more than this share of its draws within half an
#: interval of a limit "piles against" it (a posterior spread evenly over a
#: 20-interval range puts 2.5% there).
PILE_SHARE = 0.10
#: Reweighting to a prior twice as wide moving a rate's mean by more than this
#: many posterior sds marks the prior as binding.
PRIOR_SHIFT_SD = 0.5
#: Importance weights with a Pareto k-hat above this are unreliable (Vehtari,
#: Simpson, Gelman, Yao & Gabry 2024, "Pareto smoothed importance sampling",
#: JMLR 25): the wider prior would move the posterior too far to estimate,
#: which itself means the prior binds.
KHAT_MAX = 0.7
#: ... unless every raw weight is within this factor of their mean: then no
#: draw dominates, the reweighted mean's variance is at most this many times
#: the plain mean's (Kish's effective sample size is at least S / factor),
#: and the shift is measured to a small part of :data:`PRIOR_SHIFT_SD` with
#: the thousands of draws of a fit (about 0.06 sd with 1,000 draws). k-hat
#: fits a tail shape to the largest ratios and can come out high from a
#: small bump in an otherwise bounded tail: measured on an invented region
#: whose rates were a fiftieth of the prior scale, a rare spare-date mode gave
#: k-hat 0.8 with every weight within a factor 1.6 (common practice, no source).
WEIGHT_RATIO_MAX = 4.0
#: Fewer events than this per segment is too little signal.
EVENTS_PER_SEGMENT = 10
#: Fewer observed values than this share of the series is too little signal.
OBSERVED_SHARE = 0.25


def assess(model, positions, diagnostics, sampler, changepoints):
    """The verdict on a finished fit.

    Parameters
    ----------
    model : TrendModel
    positions : numpy.ndarray, shape (chains, draws, dim)
    diagnostics : dict
        From :func:`inference.snapshots.diagnose` on all draws.
    sampler : dict
        The final snapshot's ``sampler`` block (divergences, dropped chains).
    changepoints : list of dict
        From :func:`inference.summaries.changepoints` (for the modes).

    Returns
    -------
    dict
        ``reportable`` (bool) and ``warnings`` (list of dict).
    """
    C, N, D = positions.shape
    flat = positions.reshape(C * N, D)
    q = model.constrain(flat)
    warnings = []
    warnings += data_warnings(model)
    warnings += convergence_warnings(diagnostics)
    warnings += divergence_warnings(sampler, C * N)
    warnings += constraint_warnings(model, q)
    warnings += prior_warnings(model, q)
    warnings += multimodal_warnings(model, changepoints)
    dropped = sampler.get("chains_dropped") or []
    if dropped:
        warnings.append(_warning(
            "chains", f"{len(dropped)} chain{'s were' if len(dropped) > 1 else ' was'} stuck far below the "
            "others after warm-up and left out; the numbers come from the rest.", None, blocking=False))
    reportable = bool(diagnostics.get("converged")) and not any(w["blocking"] for w in warnings)
    return {"reportable": reportable, "warnings": warnings}


def _warning(kind, message, parameter, blocking=True):
    return {"kind": kind, "message": message, "parameter": parameter, "blocking": bool(blocking)}


def data_warnings(model):
    """Too little signal in the values that enter the fit."""
    y = model.y_obs
    out = []
    # a series whose fitted values are all zero never gets here: TrendModel refuses it
    share = model.obs_index.size / model.n
    if share < OBSERVED_SHARE:
        out.append(_warning("data", f"Only {model.obs_index.size} of {model.n} values are observed "
                                    f"({share:.0%}): too few to estimate a trend reliably.", None))
    total = float(y.sum())
    if total < EVENTS_PER_SEGMENT * model.K:
        out.append(_warning("data", f"Only {total:,.0f} events in the values that enter the fit: too few for "
                                    f"{model.K} segment{'s' if model.K > 1 else ''} (at least "
                                    f"{EVENTS_PER_SEGMENT * model.K} are needed); try fewer segments.", None))
    return out


def convergence_warnings(diag):
    if not diag or diag.get("converged"):
        return []
    rh, eb, et = diag.get("rhat_max"), diag.get("ess_bulk_min"), diag.get("ess_tail_min")
    worst = [p["name"] for p in diag.get("parameters", [])
             if (p.get("rhat") is None or p["rhat"] >= RHAT_MAX
                 or min(p.get("ess_bulk") or 0, p.get("ess_tail") or 0) < ESS_MIN)]
    numbers = []
    if rh is not None:
        numbers.append(f"max R-hat {fmt_rhat(rh)}")
    if eb is not None and et is not None:
        numbers.append(f"min ESS {min(eb, et):,.0f}")
    where = f" (worst: {', '.join(worst[:3])})" if worst else ""
    return [_warning(
        "convergence",
        f"The chains did not converge ({', '.join(numbers) or 'no diagnostics'}; the criterion is R-hat "
        f"below {RHAT_MAX} and ESS at least {ESS_MIN}){where}: do not report these numbers. Let it sample "
        "longer, or try fewer segments.", worst[0] if worst else None)]


def divergence_warnings(sampler, draws):
    n = int(sampler.get("divergences") or 0)
    if n == 0 or n <= DIVERGENCE_SHARE * draws:
        return []
    return [_warning(
        "divergences",
        f"{n:,} divergent transitions ({n / draws:.1%} of the draws): the sampler could not follow the "
        "posterior everywhere, so the numbers may be biased. Fewer segments or a longer minimum segment "
        "usually help.", None)]


def constraint_warnings(model, q):
    """Change dates piled against the minimum segment length or a series end."""
    out = []
    if model.K < 2:
        return out
    tau = q["knots"]
    S = tau.shape[0]
    m = model.min_segment
    edges = np.concatenate([np.zeros((S, 1)), tau, np.full((S, 1), model.t_end)], axis=1)
    unit = "day" if model.interval_days == 1 else "week"
    for j in range(model.K - 1):
        below = edges[:, j + 1] - edges[:, j] - m  # room to the previous date (or the start)
        above = edges[:, j + 2] - edges[:, j + 1] - m  # room to the next date (or the end)
        for room, what in ((below, "start" if j == 0 else f"change date {j}"),
                           (above, "end" if j == model.K - 2 else f"change date {j + 2}")):
            share = float(np.mean(room < 0.5))
            if share > PILE_SHARE:
                limit = (f"the series {what}" if what in ("start", "end") else what)
                out.append(_warning(
                    "constraint",
                    f"Change date {j + 1} sits against the minimum segment length of "
                    f"{model.spec.min_segment_days:g} days from {limit} in {share:.0%} of the draws: the "
                    f"setting, not the data, places it. Try a shorter minimum segment (in {unit}s of the "
                    "series) or fewer segments.",
                    f"change date {j + 1}"))
    return out


def prior_warnings(model, q):
    """Growth rates whose estimate the prior holds back."""
    if model.flat:
        return []
    r = q["rates"]  # per interval
    s = model.rate_sd
    # reweight from the prior N(0, s^2) to N(0, (2s)^2): log ratio = (3/8) sum (r/s)^2
    log_ratio = 0.375 * ((r / s) ** 2).sum(axis=1)
    log_w, khat = psis_smooth(log_ratio)
    w = np.exp(log_w)
    raw = np.exp(log_ratio - log_ratio.max())
    unmeasurable = khat > KHAT_MAX and float(raw.max() / raw.mean()) > WEIGHT_RATIO_MAX
    out = []
    pct = model.spec.growth_rate_prior_pct_per_day
    for j in range(model.K):
        x = r[:, j]
        sd = float(x.std())
        if sd == 0:
            continue
        shift = abs(float(np.sum(w * x)) - float(x.mean())) / sd
        if unmeasurable or shift > PRIOR_SHIFT_SD:
            out.append(_warning(
                "prior",
                f"The growth rate of segment {j + 1} is held back by the growth-rate prior ("
                f"rates rarely beyond {pct:g}% per day): with a prior twice as wide its estimate moves by "
                f"{'more than can be measured' if unmeasurable else f'{shift:.1f} of its own spread'}. "
                "Widen the prior if such rates are plausible.",
                f"growth rate {j + 1}"))
    return out


def multimodal_warnings(model, changepoints):
    out = []
    for cp in changepoints or []:
        modes = cp.get("modes") or []
        if len(modes) < 2:
            continue
        out.append(_warning(
            "multimodal",
            f"Change date {cp['index']} has {len(modes)} separate modes: {change_date_text(cp)}. "
            "A single date would describe none of them.",
            f"change date {cp['index']}", blocking=False))
    return out
