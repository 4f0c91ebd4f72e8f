"""The JSON result of a fit: stable keys that scripts and batch jobs read.

Keys follow the project's design (schema version 1); keys may be added, none
renamed without a schema version bump. Built from the final snapshot and all
the draws, never from the UI.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

from . import SCHEMA_VERSION, summaries
from .snapshots import ESS_MIN, RHAT_MAX, diagnose
from .spec import options_from_spec
from .verdict import assess, convergence_warnings
from .wording import summary_sentence

#: Shown with every result, in the app, the briefing view and the reports.
CAUTIONS = (
    "These estimates depend on the model's assumptions (a piecewise-exponential "
    "trend, the chosen observation model and options) and on the quality and "
    "completeness of the data.",
    "They are no substitute for epidemiological judgement: defer to your "
    "agency's own methods and to qualified epidemiologists.",
    "The projection shows what follows if the current trend continues; it is "
    "not a forecast of what will happen.",
)

#: Draws used for bands and projections in the result (quantiles of 4000
#: draws have Monte Carlo error well below the interval widths).
RESULT_DRAWS = 4000


def assumptions(model):
    """The model's assumptions in one line each, for footers and reports."""
    spec = model.spec
    fam = "negative binomial (overdispersed)" if spec.family == "negbin" else "Poisson"
    shape = "flat level (level shifts only)" if model.flat else "exponential growth or decline"
    lines = [
        f"{spec.segments} segment{'s' if spec.segments != 1 else ''} of {shape}, "
        f"each at least {spec.min_segment_days:g} days long",
        f"observation model: {fam}",
        "day-of-week reporting effect: " + ("yes" if model.weekday else "no"),
        "level jumps at change dates: " + ("yes" if model.jumps or model.flat else "no"),
    ]
    if spec.drop_last:
        lines.append(f"last {spec.drop_last} values left out as incomplete")
    elif spec.completeness:
        fr = ", ".join(f"{c:.0%}" for c in spec.completeness)
        lines.append(f"latest values taken as partly reported ({fr}, latest first)")
    else:
        lines.append("all values taken as complete")
    if not model.flat:
        lines.append(f"growth-rate prior: 95% within ±{spec.growth_rate_prior_pct_per_day:g}% per day")
    if spec.changepoint_priors:
        lines.append("change dates: centred on the analyst's tentative dates")
    else:
        lines.append("change dates: uniform over the series")
    return lines


def build_result(model, settings, final, positions, rng, *, options=None, segment_support=None,
                 change_probability=None):
    """Assemble the JSON result.

    Parameters
    ----------
    model : TrendModel
    settings : RunSettings
    final : dict
        The last snapshot of :func:`inference.driver.run`.
    positions : numpy.ndarray, shape (chains, draws, dim)
    rng : numpy.random.Generator
        For predictive draws (seeded by the caller for reproducibility).
    options : dict, optional
        The options as given (CLI flags, API spec); defaults to the full spec.
    segment_support : list of dict, optional
        From :func:`inference.compare.support_from_fits`.
    change_probability : dict, optional
        From :func:`inference.compare.change_probability`: stored beside the
        change-date histograms as ``averaged_over_segments``.

    Returns
    -------
    dict
        JSON-safe.
    """
    series = model.series
    C, N, D = positions.shape
    flat = positions.reshape(C * N, D)
    if flat.shape[0] > RESULT_DRAWS:
        idx = np.linspace(0, flat.shape[0] - 1, RESULT_DRAWS).astype(int)
        flat = flat[idx]
    gi = None
    if settings.gi_mean_days is not None:
        gi = (settings.gi_mean_days, settings.gi_sd_days)
    # diagnostics on every draw (the run's own checks may have thinned them)
    names, values = summaries.reported_quantities(model, positions)
    diag = diagnose(names, values) if N >= 4 else {}
    full_spec = options_from_spec(model.spec, settings)
    for display_only in ("snapshot_every", "snapshot_seconds", "snapshot_summaries"):
        full_spec.pop(display_only, None)  # how progress was shown, not what was fitted
    stats = summaries.predictive_summary(model, flat, rng)
    changepoints = summaries.changepoints(model, flat)
    verdict = assess(model, positions, diag, final["sampler"], changepoints) if N >= 4 else {
        "reportable": False, "warnings": convergence_warnings({"converged": False})}
    result = {
        "schema_version": SCHEMA_VERSION,
        "generated_at": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "status": final.get("status"),
        "series": dict(series.summary(), values=series.to_dict()["values"]),
        "spec": dict(options) if options is not None else full_spec,
        "spec_resolved": full_spec,
        "seed": settings.seed,
        "diagnostics": {
            "converged": bool(diag.get("converged", False)),
            "reportable": verdict["reportable"],
            "warnings": verdict["warnings"],
            "rhat_max": diag.get("rhat_max"),
            "ess_bulk_min": diag.get("ess_bulk_min"),
            "ess_tail_min": diag.get("ess_tail_min"),
            "chains": int(C),
            "draws_per_chain": int(N),
            "seconds": (final.get("timings") or {}).get("total_seconds"),
            "criterion": f"max R-hat < {RHAT_MAX} and min bulk and tail ESS >= {ESS_MIN}",
            "parameters": diag.get("parameters", []),
            "divergences": final["sampler"]["divergences"],
            "chains_dropped": final["sampler"]["chains_dropped"],
            "chains_restarted_in_warmup": final["sampler"]["chains_restarted_in_warmup"],
            "step_size_reductions": final["sampler"].get("step_size_reductions", 0),
            "timings": final.get("timings"),
        },
        "changepoints": changepoints,
        "changepoint_histograms": summaries.changepoint_histograms(model, flat),
        "segments": summaries.segments(model, flat, gi),
        "current": summaries.current(model, flat, gi),
        "band": summaries.band(model, flat, rng, stats=stats),
        "projection": summaries.projection(model, flat, rng, settings.horizon),
        "weekday": summaries.weekday_effects(model, flat),
        "checks": summaries.checks(model, flat, rng, stats=stats),
        "data_quality": {
            "notes": [n.to_dict() for n in series.notes],
            "rows_read": series.rows_read,
            "rows_used": series.rows_used,
        },
        "generation_interval": None if gi is None else {"mean_days": gi[0], "sd_days": gi[1]},
        "assumptions": assumptions(model),
        "defaults_chosen": list(model.defaults_chosen),
        "cautions": list(CAUTIONS),
    }
    result["summary_text"] = summary_sentence(result)
    if segment_support is not None:
        result["segment_support"] = segment_support
    if change_probability is not None:
        result["changepoint_histograms"]["averaged_over_segments"] = change_probability
    return result
