"""Numbers into words: headline figures, status lines and the plain-language summary.

Shared by the dashboard, the briefing view and the reports, so a number reads
the same everywhere. Growth rates arrive as continuous rates per day ``r``;
analysts read them as percent change per day, ``100 (e^r - 1)``.
No statistics are computed here, only formatting of what the engine gave.
"""

from __future__ import annotations

import math

import numpy as np

MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
#: P(growing) between these bounds is reported as an uncertain direction
#: (common practice, no source: a 90% probability either way is the usual
#: bar for saying "growing" or "falling" in a briefing).
UNCERTAIN_LOW, UNCERTAIN_HIGH = 0.1, 0.9
#: |daily change| below this (percent per day) with its interval inside
#: +-FLAT_PCT reads as "about flat" (common practice, no source).
FLAT_PCT = 0.5


def pct_per_day(r):
    """Percent change per day of a continuous rate r per day."""
    return None if r is None else 100.0 * math.expm1(r)


def fmt_pct(p, signed=True, digits=None):
    if p is None:
        return "–"
    if digits is None:
        digits = 1 if abs(p) < 10 else 0
    text = f"{p:+.{digits}f}%" if signed else f"{p:.{digits}f}%"
    return text.replace("-", "−")


def fmt_days(d):
    if d is None:
        return None
    if d >= 100:
        return f"{d:,.0f}"
    return f"{d:.0f}" if d >= 10 else f"{d:.1f}"


def fmt_date(iso, year=True):
    """'2026-03-20' -> '20 Mar 2026' (or '20 Mar')."""
    if not iso:
        return "–"
    y, m, d = iso[:10].split("-")
    return f"{int(d)} {MONTHS[int(m) - 1]}" + (f" {y}" if year else "")


def fmt_date_range(lo, hi):
    """'19 to 25 Jun 2026', '28 May to 3 Jun 2026', with the shortest unambiguous form."""
    if not lo or not hi:
        return "–"
    if lo == hi:
        return fmt_date(lo)
    if lo[:7] == hi[:7]:
        return f"{int(lo[8:10])} to {fmt_date(hi)}"
    if lo[:4] == hi[:4]:
        return f"{fmt_date(lo, year=False)} to {fmt_date(hi)}"
    return f"{fmt_date(lo)} to {fmt_date(hi)}"


def fmt_prob(p):
    if p is None:
        return "–"
    if p > 0.995:
        return "> 99%"
    if p < 0.005:
        return "< 1%"
    return f"{100 * p:.0f}%"


def direction(summary):
    """'growing', 'shrinking', 'flat' or 'uncertain' from a segment / current summary.

    Growing or shrinking needs P(growing) beyond 90% either way; flat needs
    the whole 90% interval within +-0.5% per day; anything else is uncertain.
    """
    g = summary.get("growth_rate_per_day") or {}
    lo, hi = pct_per_day(g.get("q05")), pct_per_day(g.get("q95"))
    p = summary.get("prob_growing")
    if p is None or lo is None:
        return "uncertain"
    if p >= UNCERTAIN_HIGH:
        return "growing"
    if p <= UNCERTAIN_LOW:
        return "shrinking"
    if -FLAT_PCT <= lo and hi <= FLAT_PCT:
        return "flat"
    return "uncertain"


def time_text(kind, t):
    """'doubling every 12 days (9 to 17)' with open bounds as 'more than ...'."""
    if not t:
        return None
    verb = "doubling" if kind == "doubling" else "halving"
    med, lo, hi = fmt_days(t.get("median")), fmt_days(t.get("q05")), fmt_days(t.get("q95"))
    if lo and hi:
        rng = f"{lo} to {hi}"
    elif lo:
        rng = f"{lo} days or more, possibly not {verb} at all"
        return f"{verb} every {med} days ({rng})"
    else:
        rng = f"up to {hi}"
    return f"{verb} every {med} days ({rng})"


def headline_stats(snapshot, gi=None):
    """The headline figures as (label, value, detail) triples.

    Parameters
    ----------
    snapshot : dict
        A snapshot or JSON result (both have ``current``, ``segments``,
        ``changepoints``).
    """
    cur = (snapshot or {}).get("current")
    if not cur:
        return []
    g = cur["growth_rate_per_day"]
    segs = snapshot.get("segments") or []
    last = segs[-1] if segs else {}
    since = last.get("start_date") if len(segs) > 1 else None
    stats = [(
        "Current growth rate",
        f"{fmt_pct(pct_per_day(g['median']))} per day",
        f"90% CrI {fmt_pct(pct_per_day(g['q05']))} to {fmt_pct(pct_per_day(g['q95']))}"
        + (f"; since {fmt_date(since, year=False)}" if since else ""),
    ), (
        "Per week",
        fmt_pct(100 * math.expm1(7 * g["median"]), digits=0),
        f"90% CrI {fmt_pct(100 * math.expm1(7 * g['q05']), digits=0)} to "
        f"{fmt_pct(100 * math.expm1(7 * g['q95']), digits=0)}",
    )]
    d, h = cur.get("doubling_time_days"), cur.get("halving_time_days")
    if d or h:
        t, kind = (d, "Doubling time") if d else (h, "Halving time")
        lo, hi = fmt_days(t.get("q05")), fmt_days(t.get("q95"))
        detail = f"90% CrI {lo or '?'} to {hi or 'no limit'} days" if (lo or hi) else ""
        if (d and not t.get("q95")) or (h and not t.get("q95")):
            detail = f"90% CrI from {lo} days to no {'doubling' if d else 'halving'} at all"
        stats.append((kind, f"{fmt_days(t.get('median'))} days", detail))
    stats.append(("Probability growing", fmt_prob(cur.get("prob_growing")),
                  {"growing": "counts are growing", "shrinking": "counts are falling",
                   "flat": "about flat", "uncertain": "direction uncertain"}[direction(cur)]))
    cps = snapshot.get("changepoints") or []
    if cps:
        c = cps[-1]
        stats.append(("Latest change date", fmt_date(c["median_date"]),
                      f"90% CrI {fmt_date_range(c['q05_date'], c['q95_date'])}"))
    R = cur.get("reproduction_number")
    if R:
        stats.append(("Reproduction number", f"{R['median']:.2f}",
                      f"90% CrI {R['q05']:.2f} to {R['q95']:.2f}; depends on the generation interval"))
    return stats


def status_line(record, snapshot):
    """(css class, sentence) for the banner above the results."""
    if not record:
        return "", ""
    st = record["status"]
    diag = (snapshot or {}).get("diagnostics") or {}
    rh, ess = diag.get("rhat_max"), _min_ess(diag)
    numbers = (f"max R-hat {rh:.3f}, min ESS {ess:,.0f}" if rh is not None and ess is not None else "")
    if st == "queued":
        return "provisional", "Waiting in the queue for a worker; the panels fill in once it starts."
    if st == "running":
        phase = (snapshot or {}).get("phase", "init")
        what = {"init": "finding starting points", "warmup": "warming up",
                "sampling": f"sampling, {(snapshot or {}).get('draws_per_chain', 0)} draws per chain"}.get(phase, phase)
        tail = f" ({numbers})" if numbers else ""
        return "provisional", (f"Provisional: the fit is still running ({what}); the numbers will change "
                               f"and are not yet converged{tail}.")
    if st == "converged":
        return "final", (f"Converged ({numbers}; criterion: R-hat below 1.01 and ESS at least 400). "
                         "Report with the cautions below.")
    if st == "unconverged":
        return "bad", (f"Finished without converging ({numbers}): do not report these numbers. "
                       "Try more draws, fewer segments or a longer minimum segment length.")
    if st == "stopped":
        if diag.get("converged"):
            return "final", f"Stopped by request; the draws kept meet the convergence criterion ({numbers})."
        return "bad", (f"Stopped by request before converging ({numbers or 'no draws kept'}): "
                       "do not report these numbers.")
    if st == "failed":
        return "bad", f"The fit failed: {record.get('reason') or 'no reason was recorded'}."
    return "", st


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
        bits.append(f"max R-hat {diag['rhat_max']:.3f}")
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


def summary_sentence(result):
    """A plain-language summary of the current trend, honest about uncertainty.

    Parameters
    ----------
    result : dict
        A JSON result or snapshot (``current``, ``segments``, ``changepoints``).

    Returns
    -------
    str
    """
    cur = (result or {}).get("current")
    if not cur:
        return "No fit yet."
    segs = result.get("segments") or []
    cps = result.get("changepoints") or []
    g = cur["growth_rate_per_day"]
    how = direction(cur)
    rng = f"{fmt_pct(pct_per_day(g['q05']))} to {fmt_pct(pct_per_day(g['q95']))} per day"
    since = ""
    if len(segs) > 1 and cps:
        c = cps[-1]
        since = (f" since about {fmt_date(c['median_date'])} "
                 f"(90% interval {fmt_date_range(c['q05_date'], c['q95_date'])})")
    if how == "growing":
        t = time_text("doubling", cur.get("doubling_time_days"))
        body = f"Counts have been growing{since}, by {fmt_pct(pct_per_day(g['median']), signed=False)} a day ({rng})"
        return body + (f", {t}." if t else ".")
    if how == "shrinking":
        t = time_text("halving", cur.get("halving_time_days"))
        body = (f"Counts have been falling{since}, by {fmt_pct(-pct_per_day(g['median']), signed=False)} "
                f"a day ({rng})")
        return body + (f", {t}." if t else ".")
    if how == "flat":
        return f"Counts have been about flat{since}: the daily change is between {rng}."
    return (f"The direction of the current trend is uncertain{since}: the daily change could be anywhere "
            f"from {rng} (probability of growth {fmt_prob(cur.get('prob_growing'))}).")
