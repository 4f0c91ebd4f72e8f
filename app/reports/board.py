"""A board as self-contained HTML: the report (works offline) and the briefing view.

Small charts are inline SVG drawn here (no script, no network): the counts
as points, the trend's 90% interval as a band with its median, and each
change date as a line over its 90% interval. Every chart has a text
alternative in words. Direction is carried by a shape and a word as well as
a colour; not-reportable series are set apart below the ranked ones.
"""

from __future__ import annotations

import html
import math

from bendline.inference.wording import INTERVAL, fmt_date, fmt_date_range, fmt_days, fmt_pct, fmt_prob

from ..boards import ranked
from .content import BRIEF_CAUTION

#: Direction: shape, word and colour (the colour is never the only carrier).
DIRECTION_MARK = {"growing": ("▲", "growing", "#D55E00"), "falling": ("▼", "falling", "#0072B2"),
                  "flat": ("●", "flat", "#6B6B6B"), "uncertain": ("?", "uncertain", "#6B6B6B")}
ATTENTION_TEXT = {"turned": "Turned since the last release", "new change date": "New change date",
                  "growing": "Growing"}
INK, MUTED, BAND, LINE, POINT = "#1A1A1A", "#4D4D4D", "#C9DDEE", "#0B4F8A", "#6B6B6B"


def direction_html(direction):
    if not direction:
        return "–"
    shape, word, colour = DIRECTION_MARK.get(direction, ("?", direction, MUTED))
    return f'<span class="dir"><span aria-hidden="true" style="color:{colour}">{shape}</span> {word}</span>'


def growth_text(row):
    if row["growth_pct_median"] is None:
        return "–"
    return (f"{fmt_pct(row['growth_pct_median'])} per {row['growth_unit']} "
            f"({fmt_pct(row['growth_pct_q05'])} to {fmt_pct(row['growth_pct_q95'])})")


def time_cell(row):
    if row["direction"] == "growing" and row["doubling_time_days"]:
        return f"doubles in {fmt_days(row['doubling_time_days'])} d"
    if row["direction"] == "falling" and row["halving_time_days"]:
        return f"halves in {fmt_days(row['halving_time_days'])} d"
    return "–"


def change_text(row):
    if not row["latest_change_date"]:
        return "none"
    return f"{fmt_date(row['latest_change_date'])} ({fmt_date_range(row['latest_change_q05'], row['latest_change_q95'])})"


def since_text(row):
    """What moved since the previous release, in words ('' for a first release)."""
    parts = []
    if row["direction_before"] and row["direction"] and row["direction_before"] != row["direction"]:
        parts.append(f"was {row['direction_before']}, now {row['direction']}")
    elif row["direction_before"]:
        parts.append(f"still {row['direction']}")
    if row["growth_pct_before"] is not None and row["growth_pct_median"] is not None:
        parts.append(f"growth {fmt_pct(row['growth_pct_before'])} then, {fmt_pct(row['growth_pct_median'])} now")
    if row["new_change_date"]:
        parts.append(f"new change date {fmt_date(row['new_change_date'])}")
    if row["revision_pct"] is not None:
        parts.append(f"last release's latest trend revised {fmt_pct(row['revision_pct'])}")
    return "; ".join(parts)


def chart_alt(row):
    """The small chart in words."""
    if row["growth_pct_median"] is None:
        return f"{row['series']}: no estimate ({row['status']})."
    text = f"{row['series']}: {row['direction']}, {growth_text(row)} ({INTERVAL})"
    if row["latest_change_date"]:
        text += f"; latest change date {change_text(row)}"
    return text + "."


def small_chart_svg(result, width=260, height=110, title=None):
    """An inline SVG of a result: counts, trend band and median, change dates. '' without a result."""
    if not result:
        return ""
    series, band = result.get("series") or {}, result.get("band") or {}
    values = series.get("values") or []
    dates = band.get("dates") or []
    if not values or not dates:
        return ""
    n = len(dates)
    start = series.get("start")
    lo, mid, hi = band.get("trend_q05") or [], band.get("trend_q50") or [], band.get("trend_q95") or []
    finite = [v for v in values if v is not None] + [v for v in hi if v is not None]
    top = max(finite) * 1.05 if finite else 1.0
    top = top if top > 0 else 1.0
    pad_l, pad_b, pad_t = 4, 16, 12

    def x(i):
        return pad_l + (width - 2 * pad_l) * i / max(n - 1, 1)

    def y(v):
        return pad_t + (height - pad_t - pad_b) * (1 - min(v, top) / top)

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" aria-label="{html.escape(title or "")}">']
    index = {d: i for i, d in enumerate(dates)}
    for cp in result.get("changepoints") or []:
        a, b, m = index.get(cp.get("q05_date")), index.get(cp.get("q95_date")), index.get(cp.get("median_date"))
        if a is not None and b is not None:
            parts.append(f'<rect x="{x(a):.1f}" y="{pad_t}" width="{max(x(b) - x(a), 1):.1f}" '
                         f'height="{height - pad_t - pad_b}" fill="#F3E3F0"/>')
        if m is not None:
            parts.append(f'<line x1="{x(m):.1f}" x2="{x(m):.1f}" y1="{pad_t}" y2="{height - pad_b}" '
                         'stroke="#CC79A7" stroke-width="1.5" stroke-dasharray="3,2"/>')
    if lo and hi:
        upper = " ".join(f"{x(i):.1f},{y(v):.1f}" for i, v in enumerate(hi) if v is not None)
        lower = " ".join(f"{x(i):.1f},{y(v):.1f}" for i, v in reversed(list(enumerate(lo))) if v is not None)
        parts.append(f'<polygon points="{upper} {lower}" fill="{BAND}"/>')
    step = max(1, len(values) // 120)
    for i in range(0, min(len(values), n), step):
        v = values[i]
        if v is not None and math.isfinite(v):
            parts.append(f'<circle cx="{x(i):.1f}" cy="{y(v):.1f}" r="1.1" fill="{POINT}"/>')
    if mid:
        parts.append('<polyline fill="none" stroke="{}" stroke-width="1.8" points="{}"/>'.format(
            LINE, " ".join(f"{x(i):.1f},{y(v):.1f}" for i, v in enumerate(mid) if v is not None)))
    parts.append(f'<text x="{pad_l}" y="{height - 3}" font-size="10" fill="{MUTED}">{fmt_date(start)}</text>')
    parts.append(f'<text x="{width - pad_l}" y="{height - 3}" font-size="10" fill="{MUTED}" '
                 f'text-anchor="end">{fmt_date(dates[-1])}</text>')
    parts.append(f'<text x="{pad_l}" y="10" font-size="10" fill="{MUTED}">max {top / 1.05:,.0f}</text>')
    parts.append("</svg>")
    return "".join(parts)


STYLE = """
body{font-family:'Segoe UI','Helvetica Neue',Helvetica,Arial,'Liberation Sans',sans-serif;color:#1A1A1A;
margin:1.5rem;line-height:1.4}
h1{font-size:1.6rem;margin:0 0 .3rem} h2{font-size:1.2rem;margin:1.4rem 0 .4rem}
.meta,.muted{color:#4D4D4D} .caution{border-left:4px solid #D55E00;background:#FFF1E6;padding:.5rem .8rem;
margin:.8rem 0}
table{border-collapse:collapse;width:100%;font-size:.92rem} th,td{border-bottom:1px solid #D0D0D0;
padding:.35rem .5rem;text-align:left;vertical-align:top} th{background:#F2F2F2}
.attention{font-weight:600} .grid{display:flex;flex-wrap:wrap;gap:.8rem}
figure{margin:0;border:1px solid #D0D0D0;padding:.4rem;width:272px} figcaption{font-size:.85rem}
.apart{background:#F7F7F7}
body.presenting{font-size:1.35rem;margin:2rem 3rem} .presenting h1{font-size:2.4rem}
.presenting h2{font-size:1.7rem} .presenting table{font-size:1.2rem}
"""


def _rows_table(rows, caption, *, apart=False):
    head = ("<tr><th scope='col'>Series</th><th scope='col'>Direction</th><th scope='col'>Growth "
            f"({INTERVAL})</th><th scope='col'>Doubling or halving</th><th scope='col'>P(growing)</th>"
            "<th scope='col'>Latest change date</th><th scope='col'>Since the last release</th>"
            "<th scope='col'>Verdict and warnings</th></tr>")
    body = []
    for r in rows:
        verdict = ("reportable" if r["reportable"] else
                   {"refused": "not fitted", "queued": "waiting", "running": "fitting"}.get(r["status"], "not reportable"))
        notes = "; ".join(x for x in (r["reason"], r["warnings"]) if x)
        attention = ATTENTION_TEXT.get(r["attention"] or "", "")
        body.append(
            "<tr>"
            f"<th scope='row'>{html.escape(str(r['series']))}"
            + (f"<div class='attention'>{attention}</div>" if attention else "") + "</th>"
            f"<td>{direction_html(r['direction'])}</td><td>{growth_text(r)}</td><td>{time_cell(r)}</td>"
            f"<td>{fmt_prob(r['prob_growing'])}</td><td>{change_text(r) if r['growth_pct_median'] is not None else '–'}</td>"
            f"<td>{html.escape(since_text(r))}</td>"
            f"<td>{verdict}{': ' + html.escape(notes) if notes else ''}</td></tr>")
    cls = " class='apart'" if apart else ""
    return f"<table{cls}><caption class='muted'>{caption}</caption>{head}{''.join(body)}</table>"


def board_html(view, results=None, *, presenting=False, refresh_seconds=None):
    """The board's latest release as one HTML page (report or briefing view).

    Parameters
    ----------
    view : dict
        :func:`app.boards.board_view` (with ``results`` for the charts).
    presenting : bool
        Large type for a meeting room; the series that need attention first.
    refresh_seconds : int, optional
        Reload every so often (the briefing view while series still fit).
    """
    results = results if results is not None else view.get("results") or {}
    rel = view["releases"][-1] if view["releases"] else {"index": 0, "rows": [], "file_name": "", "created": ""}
    good, rest = ranked(rel["rows"])
    name = html.escape(str(view.get("name") or "board"))
    n_rel = len(view["releases"])
    finished = sum(1 for r in rel["rows"] if r["status"] not in ("queued", "running"))
    status = ("all series finished" if view["status"] == "finished"
              else f"fitting: {finished} of {len(rel['rows'])} series finished; numbers are provisional")
    attention = [r for r in good if r["attention"]]
    figures = []
    for r in good + rest:
        svg = small_chart_svg(results.get(r["run_id"]), title=chart_alt(r))
        if svg:
            figures.append(f"<figure>{svg}<figcaption><b>{html.escape(str(r['series']))}</b>: "
                           f"{direction_html(r['direction'])} {growth_text(r)}</figcaption></figure>")
    refresh = f'<meta http-equiv="refresh" content="{int(refresh_seconds)}">' if refresh_seconds else ""
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        f"<meta name='viewport' content='width=device-width, initial-scale=1'>{refresh}",
        f"<title>Board: {name}</title><style>{STYLE}</style></head>",
        f"<body class='{'presenting' if presenting else ''}'><main>",
        f"<h1>Board: {name}</h1>",
        f"<p class='meta'>Release {rel['index'] + 1} of {n_rel} ({html.escape(str(rel.get('file_name') or ''))}, "
        f"loaded {html.escape(str(rel.get('created') or ''))[:16].replace('T', ' ')}, data "
        f"{html.escape(str(rel.get('data_hash') or ''))}); series by {html.escape(str(view.get('by')))}; "
        f"<span role='status'>{status}</span>.</p>",
        f"<p class='caution'>{BRIEF_CAUTION}</p>",
    ]
    if presenting:
        if attention:
            items = "".join(f"<li><b>{html.escape(str(r['series']))}</b>: "
                            f"{ATTENTION_TEXT[r['attention']].lower()}; {direction_html(r['direction'])} "
                            f"{growth_text(r)}{'; ' + html.escape(since_text(r)) if since_text(r) else ''}</li>"
                            for r in attention)
            parts.append(f"<h2>Needs attention</h2><ul>{items}</ul>")
        else:
            parts.append("<h2>Needs attention</h2><p>No reportable series is growing, turned or has a new "
                         "change date.</p>")
    parts.append("<h2>Reportable series, ranked</h2>")
    parts.append(_rows_table(good, "Needs attention first (turned, new change date, growing), then by growth.")
                 if good else "<p>No series is reportable yet.</p>")
    if rest:
        parts.append("<h2>Not reportable, not fitted or still fitting</h2>")
        parts.append(_rows_table(rest, "Set apart: do not report these estimates.", apart=True))
    if figures:
        parts.append("<h2>Each series</h2><p class='muted'>Points: counts. Band: the trend's "
                     f"{INTERVAL}; line: its median. Dashed lines: change dates, shaded over their "
                     f"{INTERVAL}.</p><div class='grid'>" + "".join(figures) + "</div>")
    parts.append("</main></body></html>")
    return "".join(parts)
