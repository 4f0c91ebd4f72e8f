"""Numbers into words, once for every view: formatters, headline figures, the summary sentence.

The JSON result carries ``summary_text`` from :func:`summary_sentence`, and
the dashboard, briefing view, reports and the command line print the same
sentence and the same formatted numbers. Nothing here computes a statistic:
the direction of each trend is the engine's (``direction`` in the result,
:mod:`inference.direction`), growth is shown as percent change per day, or
per week for weekly series, and every interval is a "90% interval".
"""

from __future__ import annotations

import math

from .direction import pct

MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
INTERVAL = "90% interval"
REPORTABLE = "Reportable"
NOT_REPORTABLE = "Not reportable: do not report these numbers"
PROVISIONAL = "Provisional"
DIRECTION_WORDS = {"growing": "counts are growing", "falling": "counts are falling", "flat": "about flat",
                   "uncertain": "direction uncertain"}


# ------------------------------------------------------------- formatters

def fmt_pct(p, signed=True, digits=None):
    """'+1.2%', '−8%' (a true minus sign); one decimal below 10, none above."""
    if p is None:
        return "–"
    if digits is None:
        digits = 1 if abs(p) < 10 else 0
    if round(p, digits) == 0:
        p = 0.0  # no "−0.0%": a rate that rounds to zero has no sign
    text = f"{p:+.{digits}f}%" if signed else f"{abs(p):.{digits}f}%"
    return text.replace("-", "−")


def fmt_rhat(rh):
    """R-hat to three decimals, never rounded onto or across the convergence threshold.

    A value of 1.00996 passes the criterion (below 1.01) but rounds to
    "1.010", which reads as failing it next to "R-hat below 1.01"; such
    values get a fourth decimal, cut rather than rounded ("1.0099").
    """
    from .snapshots import RHAT_MAX

    text = f"{rh:.3f}"
    if rh < RHAT_MAX <= float(text):
        text = f"{math.floor(rh * 1e4) / 1e4:.4f}"
    return text


def fmt_days(d):
    """Days: one decimal below 10, whole days above, thousands separated."""
    if d is None:
        return None
    if d >= 100:
        return f"{d:,.0f}"
    return f"{d:.0f}" if d >= 10 else f"{d:.1f}"


def fmt_date(iso, year=True):
    """'2026-03-20' -> '20 Mar 2026' (or '20 Mar')."""
    if not iso:
        return "–"
    y, m, d = str(iso)[:10].split("-")
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
    """A probability as '> 99%', '74%' or '< 1%'."""
    if p is None:
        return "–"
    if p >= 0.995:
        return "> 99%"
    if p < 0.005:
        return "< 1%"
    return f"{100 * p:.0f}%"


def unit_of(result):
    """'day' or 'week': the unit growth is read in for this result or snapshot."""
    interval = (result.get("series") or {}).get("interval_days") or result.get("interval_days") or 1
    return "week" if int(interval) == 7 else "day"


def growth_block(summary, unit):
    """{median, q05, q95} percent change per ``unit`` of a segment or current summary."""
    block = summary.get(f"growth_pct_per_{unit}")
    if block:
        return block
    g = summary.get("growth_rate_per_day") or {}  # results written before the percent blocks
    days = 7.0 if unit == "week" else 1.0
    return {k: pct(g.get(k), days) for k in ("median", "q05", "q95")}


def rate_text(block, unit):
    """'+1.2% per day (90% interval +0.8% to +1.6%)'."""
    return (f"{fmt_pct(block.get('median'))} per {unit} ({INTERVAL} {fmt_pct(block.get('q05'))} to "
            f"{fmt_pct(block.get('q95'))})")


def time_text(kind, t):
    """'doubling every 12 days (9 to 17)'; an open bound as '(at least 40, or no doubling)'."""
    if not t:
        return None
    verb = "doubling" if kind == "doubling" else "halving"
    med, lo, hi = fmt_days(t.get("median")), fmt_days(t.get("q05")), fmt_days(t.get("q95"))
    if lo and hi:
        return f"{verb} every {med} days ({lo} to {hi})"
    if lo:
        return f"{verb} every {med} days (at least {lo}, or no {verb})"
    return f"{verb} every {med} days (up to {hi})"


def change_date_text(cp, year=True):
    """'about 12 Mar 2026 (90% interval 9 to 15 Mar 2026)', or its modes: 'around X (60%) or around Y (40%)'."""
    modes = cp.get("modes") or []
    if len(modes) > 1:
        return " or ".join(f"around {fmt_date(m['median_date'], year)} ({fmt_prob(m['probability'])})"
                           for m in modes)
    return (f"about {fmt_date(cp['median_date'], year)} "
            f"({INTERVAL} {fmt_date_range(cp['q05_date'], cp['q95_date'])})")


def direction_of(summary):
    """The engine's direction for a segment or the current trend.

    Results written before the direction was stored get the same rule from
    their P(growing) and interval (:mod:`inference.direction`).
    """
    d = summary.get("direction")
    if d:
        return d
    from .direction import FLAT_PCT_PER_DAY, SURE

    p = summary.get("prob_growing")
    g = summary.get("growth_rate_per_day") or {}
    if p is None or g.get("q05") is None:
        return "uncertain"
    if p >= SURE:
        return "growing"
    if p <= 1 - SURE:
        return "falling"
    if -FLAT_PCT_PER_DAY <= pct(g["q05"]) and pct(g["q95"]) <= FLAT_PCT_PER_DAY:
        return "flat"
    return "uncertain"


def verdict_of(diagnostics):
    """(reportable, [blocking warning messages]) from a result's or final snapshot's diagnostics.

    Results written before the verdict existed count as reportable when
    their chains converged; a result whose flags disagree (edited by hand)
    is not reportable.
    """
    diag = diagnostics or {}
    blocking = [w["message"] for w in diag.get("warnings") or [] if isinstance(w, dict) and w.get("blocking")]
    ok = bool(diag.get("converged")) and diag.get("reportable", True) is True and not blocking
    return ok, blocking


# ------------------------------------------------------------ headline

def headline_stats(result):
    """The headline figures as (label, value, detail) triples.

    Parameters
    ----------
    result : dict
        A JSON result or snapshot (``current``, ``segments``, ``changepoints``).
    """
    cur = (result or {}).get("current")
    if not cur:
        return []
    unit = unit_of(result)
    segs = result.get("segments") or []
    since = segs[-1].get("start_date") if len(segs) > 1 else None
    g = growth_block(cur, unit)
    stats = [(
        "Current growth rate",
        f"{fmt_pct(g.get('median'))} per {unit}",
        f"{INTERVAL} {fmt_pct(g.get('q05'))} to {fmt_pct(g.get('q95'))}"
        + (f"; since {fmt_date(since, year=False)}" if since else ""),
    )]
    if unit == "day":
        w = growth_block(cur, "week")
        stats.append(("Per week", fmt_pct(w.get("median"), digits=0),
                      f"{INTERVAL} {fmt_pct(w.get('q05'), digits=0)} to {fmt_pct(w.get('q95'), digits=0)}"))
    d, h = cur.get("doubling_time_days"), cur.get("halving_time_days")
    if d or h:
        t, kind = (d, "Doubling time") if d else (h, "Halving time")
        lo, hi = fmt_days(t.get("q05")), fmt_days(t.get("q95"))
        if hi:
            detail = f"{INTERVAL} {lo or '?'} to {hi} days"
        else:
            detail = f"{INTERVAL} from {lo} days to no {'doubling' if d else 'halving'} at all" if lo else ""
        stats.append((kind, f"{fmt_days(t.get('median'))} days", detail))
    stats.append(("Probability growing", fmt_prob(cur.get("prob_growing")), DIRECTION_WORDS[direction_of(cur)]))
    cps = result.get("changepoints") or []
    if cps:
        c = cps[-1]
        modes = c.get("modes") or []
        if len(modes) > 1:
            stats.append(("Latest change date", " or ".join(fmt_date(m["median_date"]) for m in modes),
                          "separate modes: " + ", ".join(f"{fmt_prob(m['probability'])} "
                                                         f"({fmt_date_range(m['q05_date'], m['q95_date'])})"
                                                         for m in modes)))
        else:
            stats.append(("Latest change date", fmt_date(c["median_date"]),
                          f"{INTERVAL} {fmt_date_range(c['q05_date'], c['q95_date'])}"))
    R = cur.get("reproduction_number")
    if R:
        stats.append(("Reproduction number", f"{R['median']:.2f}",
                      f"{INTERVAL} {R['q05']:.2f} to {R['q95']:.2f}; depends on the generation interval"))
    return stats


# ------------------------------------------------------------ sentence

def summary_sentence(result):
    """A plain-language summary of the current trend, honest about uncertainty.

    Names the start of the current direction (where the trend turned, not
    where it last changed speed), later changes of speed, the rate with its
    90% interval in the series' unit, and the doubling or halving time.
    Change dates with separate modes are given as their modes.

    Parameters
    ----------
    result : dict
        A JSON result or snapshot.

    Returns
    -------
    str
    """
    cur = (result or {}).get("current")
    if not cur:
        return "No fit yet."
    if _is_step_model(result):
        return _step_sentence(result)
    unit = unit_of(result)
    segs = result.get("segments") or []
    cps = result.get("changepoints") or []
    how = direction_of(cur)
    g = growth_block(cur, unit)
    rng = f"{fmt_pct(g.get('q05'))} to {fmt_pct(g.get('q95'))} per {unit}"
    since, speed = _since(segs, cps, how)
    if how in ("growing", "falling"):
        verb = "growing" if how == "growing" else "falling"
        kind = "doubling" if how == "growing" else "halving"
        t = time_text(kind, cur.get(f"{kind}_time_days"))
        body = (f"Counts have been {verb}{since}{speed}, by {fmt_pct(g.get('median'), signed=False)} a {unit} "
                f"({INTERVAL} {rng})")
        return body + (f", {t}." if t else ".")
    if how == "flat":
        return f"Counts have been about flat{since}: the change per {unit} is between {rng}."
    return (f"The direction of the current trend is uncertain{since}: the change per {unit} could be anywhere "
            f"from {rng} (probability of growth {fmt_prob(cur.get('prob_growing'))}).")


def _since(segs, cps, how):
    """(' since about X (...)', ', more slowly since about Y') for the current direction."""
    if len(segs) < 2 or len(cps) < len(segs) - 1:
        return "", ""
    start = len(segs) - 1
    if how in ("growing", "falling"):
        while start > 0 and direction_of(segs[start - 1]) == how:
            start -= 1
    if start == 0:
        return "", ""
    since = f" since {change_date_text(cps[start - 1])}"
    speed = []
    for j in range(start + 1, len(segs)):
        before = abs((segs[j - 1].get("growth_rate_per_day") or {}).get("median") or 0.0)
        after = abs((segs[j].get("growth_rate_per_day") or {}).get("median") or 0.0)
        word = "more slowly" if after < before else "faster"
        speed.append(f", {word} since {change_date_text(cps[j - 1], year=False).split(' (')[0]}")
    return since, "".join(speed)


def _is_step_model(result):
    spec = result.get("spec_resolved") or result.get("spec") or {}
    return bool(spec.get("flat_segments")) or all(
        "level_per_day" in s for s in (result.get("segments") or [{}]))


def _step_sentence(result):
    """The level-shift model: the current level and the last step."""
    segs = result.get("segments") or []
    cps = result.get("changepoints") or []
    unit = unit_of(result)
    per = 7.0 if unit == "week" else 1.0
    lvl = segs[-1].get("level_per_day") or {}
    level = (f"about {_count(lvl.get('median'), per)} a {unit} ({INTERVAL} {_count(lvl.get('q05'), per)} to "
             f"{_count(lvl.get('q95'), per)})")
    if not cps:
        return f"Counts have been level at {level}."
    c = cps[-1]
    ratio = c.get("level_ratio") or {}
    step = ""
    if ratio.get("median") is not None:
        mid, lo, hi = (100 * (ratio[k] - 1) for k in ("median", "q05", "q95"))
        way = "up" if mid > 0 else "down"
        step = (f", after a step {way} of {fmt_pct(mid, signed=False)} ({INTERVAL} {fmt_pct(lo)} to "
                f"{fmt_pct(hi)})")
    return f"Counts have been level at {level} since {change_date_text(c)}{step}."


def _count(v, per):
    if v is None:
        return "–"
    x = v * per
    return f"{x:,.0f}" if x >= 10 else f"{x:.1f}"
