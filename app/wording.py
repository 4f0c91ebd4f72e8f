"""Run status in words: the banner and the progress line.

Numbers, the headline figures and the summary sentence come from
:mod:`inference.wording` (re-exported here), so a number reads the same in
every view and in the JSON result's ``summary_text``. The banner follows the
engine's one verdict (``diagnostics.reportable`` and its warnings).
"""

from __future__ import annotations

import numpy as np

from bendline.inference.wording import (  # noqa: F401  (the formatters every view uses)
    DIRECTION_WORDS,
    INTERVAL,
    NOT_REPORTABLE,
    PROVISIONAL,
    REPORTABLE,
    verdict_of,
    change_date_text,
    direction_of,
    fmt_date,
    fmt_date_range,
    fmt_days,
    fmt_pct,
    fmt_prob,
    fmt_rhat,
    growth_block,
    headline_stats,
    rate_text,
    summary_sentence,
    time_text,
    unit_of,
)
from bendline.inference.direction import pct


def pct_per_day(r):
    """Percent change per day of a continuous rate r per day."""
    return pct(r, 1.0)


def status_line(record, snapshot):
    """(css class, sentence) for the banner above the results.

    A finished run's banner follows the engine's verdict: "Reportable" only
    when ``diagnostics.reportable`` holds; otherwise "Not reportable" with the
    first reason (every warning is listed beside the numbers).
    """
    if not record:
        return "", ""
    st = record["status"]
    diag = (snapshot or {}).get("diagnostics") or {}
    rh, ess = diag.get("rhat_max"), _min_ess(diag)
    numbers = (f"max R-hat {fmt_rhat(rh)}, min ESS {ess:,.0f}" if rh is not None and ess is not None else "")
    if st == "queued":
        return "provisional", "Waiting in the queue for a worker; the panels fill in once it starts."
    if st == "running":
        phase = (snapshot or {}).get("phase", "init")
        what = {"init": "finding starting points", "warmup": "warming up",
                "sampling": f"sampling, {(snapshot or {}).get('draws_per_chain', 0)} draws per chain"}.get(phase, phase)
        tail = f" ({numbers})" if numbers else ""
        return "provisional", (f"{PROVISIONAL}: the fit is still running ({what}); the numbers will change "
                               f"and are not yet converged{tail}.")
    if st == "failed":
        return "bad", f"The fit failed: {record.get('reason') or 'no reason was recorded'}."
    if st not in ("converged", "unconverged", "stopped"):
        return "", st
    ok, reasons = verdict_of(diag)
    how = "Stopped by request; " if st == "stopped" else ""
    if ok:
        notes = [w["message"] for w in diag.get("warnings") or [] if not w.get("blocking")]
        tail = (" Note: " + " ".join(notes)) if notes else ""
        return "final", (f"{REPORTABLE}: {how.lower() or ''}converged ({numbers}; criterion: R-hat below 1.01 and "
                         f"ESS at least 400). Report with the cautions below.{tail}")
    if not reasons:
        reasons = [f"the chains have not converged ({numbers or 'no draws kept'})"]
    more = f" ({len(reasons) - 1} more reason{'s' if len(reasons) > 2 else ''} below)" if len(reasons) > 1 else ""
    return "bad", f"{how}{NOT_REPORTABLE}. {reasons[0]}{more}"


def progress_line(record, snapshot):
    """One line of progress for the controls panel."""
    if not record:
        return ""
    st = record["status"]
    if st == "queued":
        return "Queued: waiting for a worker."
    if snapshot is None:
        return "Starting…"
    t = snapshot.get("elapsed_seconds", 0.0)
    phase = snapshot.get("phase")
    diag = snapshot.get("diagnostics") or {}
    if phase == "init":
        return f"Finding starting points · {t:.1f} s"
    if phase == "warmup":
        return f"Warm-up {snapshot['iteration']}/{snapshot['warmup_iterations']} · {t:.1f} s"
    bits = [f"{snapshot.get('draws_per_chain', 0)} draws per chain × {snapshot.get('chains')} chains", f"{t:.1f} s"]
    if diag.get("rhat_max") is not None:
        bits.append(f"max R-hat {fmt_rhat(diag['rhat_max'])}")
    ess = _min_ess(diag)
    if ess is not None:
        bits.append(f"min ESS {ess:,.0f}")
    head = "Sampling" if phase == "sampling" else {"converged": "Converged", "unconverged": "Not converged",
                                                   "stopped": "Stopped", "failed": "Failed"}.get(st, "Done")
    return f"{head}: " + " · ".join(bits)


def _min_ess(diag):
    b, t = diag.get("ess_bulk_min"), diag.get("ess_tail_min")
    if b is None or t is None:
        return None
    return float(np.minimum(b, t))
