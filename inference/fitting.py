"""One call from a series and options to the JSON result.

The CLI, the batch command and both kinds of worker use this, so a run means
the same thing everywhere: validate the options, drain the sampler's
snapshots (handing each to the caller), then build the result from all the
draws with a result-specific random stream.
"""

from __future__ import annotations

import time

import numpy as np

from .driver import run
from .model import TrendModel
from .result import build_result
from .sinks import MemorySink
from .spec import spec_from_options


def fit_result(series, options, *, sink=None, on_snapshot=None, should_stop=None, segment_support=None,
               change_probability=None, given=None):
    """Fit ``series`` with the flat ``options`` and return the JSON result.

    Parameters
    ----------
    series : Series
    options : dict
        As :func:`inference.spec.spec_from_options` takes them.
    sink : draw store, optional
    on_snapshot : callable, optional
        Receives each snapshot (dict) as it is made.
    should_stop : callable, optional
        Polled every iteration.
    segment_support : list, optional
        A segment-count comparison to include.
    change_probability : dict, optional
        Its change probability averaged over K (:func:`inference.compare.change_probability`).
    given : dict, optional
        The options as the analyst gave them (public names,
        :mod:`inference.options`): the result's ``spec``; ``options`` when
        not given.

    Returns
    -------
    (result, final_snapshot)
    """
    model_spec, settings = spec_from_options(options)
    model = TrendModel(series, model_spec)  # validates against the series first
    sink = MemorySink() if sink is None else sink
    final = None
    for snap in run(model, settings, sink=sink, should_stop=should_stop):
        final = snap
        if on_snapshot is not None:
            on_snapshot(snap)
    positions, _ = sink.read()
    if positions.size == 0:
        return None, final
    rng = np.random.default_rng(np.random.SeedSequence(settings.seed).spawn(4)[3])
    t_result = time.monotonic()
    result = build_result(
        model, settings, final, positions, rng, options=given if given is not None else options,
        segment_support=segment_support,
        change_probability=change_probability,
    )
    # one verdict: the run's status and the final snapshot follow the result's
    # diagnostics on every draw (the run's own checks thin them)
    diag = result["diagnostics"]
    if final["status"] in ("converged", "unconverged"):
        final["status"] = "converged" if diag["converged"] else "unconverged"
    final["diagnostics"] = dict(final.get("diagnostics") or {}, **{
        k: diag[k] for k in ("converged", "reportable", "warnings", "rhat_max", "ess_bulk_min", "ess_tail_min")})
    final["summary_text"] = result["summary_text"]
    result["status"] = final["status"]
    result["ended_by"] = final.get("ended_by")
    timings = dict(result["diagnostics"].get("timings") or {})
    timings["result_seconds"] = round(time.monotonic() - t_result, 4)  # bands, projection, checks
    result["diagnostics"]["timings"] = timings
    return result, final
