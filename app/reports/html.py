"""The self-contained HTML report of one result.

One file, no requests: plotly.js is inlined once in the head, each figure is
a ``plotly.io.to_html(..., include_plotlyjs=False, full_html=False)`` div,
styles are inline and use the reader's system fonts, and a
Content-Security-Policy meta tag forbids loading anything from elsewhere.
Every text taken from the result is HTML-escaped.
"""

from __future__ import annotations

import datetime as _dt
import html
import json

import plotly.io as pio
from plotly.offline import get_plotlyjs

from .. import wording
from ..version import CODE_VERSION
from ..web import figures as F
from ..web import words as W
from ..web.presenting import label_projection
from .content import (NOT_CONVERGED_BOX, about_lines, cautions_of, hedged_summary, reportable, result_view,
                      warnings_of,
                      series_dict, short_status, title_text)

#: Nothing may load from elsewhere: scripts and styles are inline, images data: only.
CSP = ("default-src 'none'; script-src 'unsafe-inline' 'unsafe-eval'; style-src 'unsafe-inline'; "
       "img-src data: blob:; font-src data:; connect-src 'none'; base-uri 'none'; form-action 'none'")
FIGURE_CONFIG = {"displaylogo": False, "responsive": True,
                 "modeBarButtonsToRemove": ["select2d", "lasso2d", "sendDataToCloud", "sendChartToCloud"]}

STYLE = """
:root { --ink:#15202b; --muted:#3d4852; --line:#c9d1d9; --accent:#0b5394; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff; line-height: 1.45;
  font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; font-size: 16px; }
main { max-width: 1180px; margin: 0 auto; padding: 18px 24px 40px; }
header.top { border-bottom: 4px solid var(--accent); padding-bottom: 8px; margin-bottom: 12px; }
.kicker { color: var(--muted); font-size: 14px; letter-spacing: .04em; text-transform: uppercase; margin: 0; }
h1 { font-size: 30px; margin: 2px 0 4px; }
h2 { font-size: 21px; margin: 28px 0 8px; border-bottom: 1px solid var(--line); padding-bottom: 4px; }
.badge { display: inline-block; font-weight: 700; font-size: 18px; padding: 3px 12px; border-radius: 4px; color: #fff; }
.badge.final { background: #0d5230; } .badge.provisional { background: #7a3d00; } .badge.bad { background: #8a1c0b; }
.status-line { margin: 8px 0; font-size: 16px; }
.not-converged { border: 4px solid #8a1c0b; background: #fde8e4; color: #5c1207; padding: 14px 18px; margin: 14px 0;
  border-radius: 6px; font-size: 18px; }
.not-converged strong { display: block; font-size: 26px; margin-bottom: 4px; }
.cautions { border-left: 6px solid #e69f00; background: #fff4e0; padding: 10px 16px; margin: 12px 0; }
.cautions p { margin: 4px 0; }
.stats { display: grid; grid-template-columns: repeat(auto-fit, minmax(170px, 1fr)); gap: 10px; margin: 12px 0; }
.stat { border: 2px solid var(--ink); border-radius: 6px; padding: 8px 12px; }
.stat .label { font-size: 13px; text-transform: uppercase; letter-spacing: .03em; color: var(--muted);
  font-weight: 600; }
.stat .value { font-size: 26px; font-weight: 800; font-variant-numeric: tabular-nums; }
.stat .detail { font-size: 14px; color: var(--muted); }
.summary { font-size: 19px; margin: 10px 0; }
.figure { margin: 6px 0 0; }
:focus-visible { outline: 3px solid #b35900; outline-offset: 2px; }
.js-plotly-plot .plotly .modebar:focus-within { opacity: 1 !important; }
.in-words { font-size: 15px; margin: 4px 0 10px; }
.in-words > summary { cursor: pointer; color: var(--accent); font-weight: 600; }
table { border-collapse: collapse; width: 100%; font-size: 14px; margin: 6px 0; }
th, td { text-align: left; padding: 4px 8px; border-bottom: 1px solid var(--line); vertical-align: top; }
th { font-weight: 700; background: #f3f5f7; }
td.num { font-variant-numeric: tabular-nums; }
tr.problem td { color: #8a1c0b; font-weight: 600; }
ul.lines { margin: 4px 0; padding-left: 22px; }
code { font-size: 14px; }
footer { margin-top: 30px; color: var(--muted); font-size: 14px; border-top: 2px solid var(--line); padding-top: 10px; }
@media print { .figure { page-break-inside: avoid; } }
"""


def _e(text):
    return html.escape("" if text is None else str(text), quote=True)


def _figure_div(fig, div_id):
    return pio.to_html(fig, include_plotlyjs=False, full_html=False, config=FIGURE_CONFIG, div_id=div_id,
                       default_width="100%", default_height=f"{int(fig.layout.height or 450)}px", validate=False)


def _status_block(result):
    view = result_view(result)
    status = result.get("status") or "unconverged"
    cls, label = short_status(status, view)
    _cls, sentence = wording.status_line({"status": status}, view)
    parts = [f'<section id="status"><span class="badge {cls}">{_e(label)}</span>'
             f'<p class="status-line">{_e(sentence)}</p>']
    if not reportable(result):
        parts.append(f'<div class="not-converged" role="alert" id="not-converged"><strong>{_e(NOT_CONVERGED_BOX)}'
                     '</strong>The reasons are listed below. Refit (more draws, fewer segments, other priors or '
                     'minimum segment length, as the reasons suggest) before using any number below.</div>')
    warns = warnings_of(view)
    if warns:
        items = "".join(f'<li class="{"blocking" if blocking else "note"}"><strong>'
                        f'{_e("Not reportable" if blocking else "Note")} ({_e(kind)}):</strong> {_e(msg)}</li>'
                        for kind, msg, blocking in warns)
        parts.append(f'<ul class="warnings" id="warnings" aria-label="Warnings">{items}</ul>')
    parts.append("</section>")
    return "".join(parts)


def _cautions(result):
    paras = "".join(f"<p>{_e(c)}</p>" for c in cautions_of(result))
    return f'<section id="cautions" class="cautions" aria-label="Cautions">{paras}</section>'


def _headline(view):
    stats = wording.headline_stats(view)
    if not stats:
        return '<section id="headline"><p>No estimates: the run kept no draws.</p></section>'
    cards = "".join(f'<div class="stat"><div class="label">{_e(label)}</div><div class="value">{_e(value)}</div>'
                    f'<div class="detail">{_e(detail)}</div></div>' for label, value, detail in stats)
    return (f'<section id="headline"><h2>Headline numbers (90% intervals)</h2>'
            f'<div class="stats">{cards}</div></section>')


def _in_words(key, lines):
    """A chart's text alternative: a fold under the figure, the same words as the dashboard's."""
    items = "".join(f"<li>{_e(line)}</li>" for line in lines)
    return (f'<figcaption><details class="in-words"><summary>{_e(W.TITLES[key])}</summary>'
            f'<ul>{items}</ul></details></figcaption>')


def _charts(result, view):
    sd = series_dict(result)
    main = label_projection(F.main_figure(sd, view), view)
    rates = F.rates_figure(view)
    return (f'<section id="main-chart"><h2>Counts, fitted trend and change dates</h2>'
            f'<p>The shaded period at the right shows what follows if the current trend continues; '
            f'it is not a forecast.</p><figure class="figure">{_figure_div(main, "report-main")}'
            f'{_in_words("main", W.main_words(sd, view))}</figure></section>'
            f'<section id="rates-chart"><h2>Growth rate by segment</h2>'
            f'<figure class="figure">{_figure_div(rates, "report-rates")}'
            f'{_in_words("rates", W.rates_words(view))}</figure></section>')


def _fmt(v, fmt):
    return "–" if v is None else format(v, fmt)


def _reductions(n):
    if not n:
        return "no"
    return f"{n} time{'s' if n > 1 else ''}; the draws before the last reduction were discarded"


def _diagnostics(view):
    diag = view.get("diagnostics") or {}
    rows = F.diagnostics_rows(view)
    body = "".join(
        f'<tr class="{"" if r["status"] == "ok" else "problem"}"><td>{_e(r["parameter"])}</td>'
        f'<td class="num">{_e("–" if r["rhat"] is None else wording.fmt_rhat(r["rhat"]))}</td>'
        f'<td class="num">{_e(_fmt(r["ess_bulk"], ","))}</td>'
        f'<td class="num">{_e(_fmt(r["ess_tail"], ","))}</td><td>{_e(r["status"])}</td></tr>' for r in rows)
    dropped = diag.get("chains_dropped") or []
    facts = [
        ("Criterion", diag.get("criterion") or "–"),
        ("Converged", "yes" if diag.get("converged") else "no"),
        ("Chains", diag.get("chains")), ("Draws per chain", diag.get("draws_per_chain")),
        ("Chains dropped", ", ".join(str(c) for c in dropped) if dropped else "none"),
        ("Divergent transitions", diag.get("divergences")),
        ("Step size reduced after divergences", _reductions(diag.get("step_size_reductions"))),
        ("Sampling time", f"{diag['seconds']:.1f} s" if isinstance(diag.get("seconds"), (int, float)) else "–"),
    ]
    fact_rows = "".join(f"<tr><th>{_e(k)}</th><td>{_e('–' if v is None else v)}</td></tr>" for k, v in facts)
    return (f'<section id="diagnostics"><h2>Convergence diagnostics</h2><p>{_e(F.diagnostics_summary(view))}</p>'
            f'<table class="facts">{fact_rows}</table>'
            '<table><thead><tr><th>Quantity</th><th>R-hat</th><th>Bulk ESS</th><th>Tail ESS</th><th>Status</th>'
            f'</tr></thead><tbody>{body or "<tr><td colspan=5>No per-quantity diagnostics.</td></tr>"}</tbody>'
            '</table></section>')


def _data_quality(result):
    dq = result.get("data_quality") or {}
    notes = dq.get("notes") or []
    items = "".join(f"<li>{_e(n.get('message') or n.get('kind'))}</li>" for n in notes)
    counts = ""
    if dq.get("rows_read") is not None:
        counts = f"<p>Rows read: {_e(dq.get('rows_read'))}; rows used: {_e(dq.get('rows_used'))}.</p>"
    listing = f'<ul class="lines">{items}</ul>' if items else "<p>No data-quality notes.</p>"
    return f'<section id="data-quality"><h2>Data quality</h2>{counts}{listing}</section>'


def _value_text(v):
    if isinstance(v, str):
        return v
    return json.dumps(v, allow_nan=False, default=str)


def _spec(result):
    spec = result.get("spec") or {}
    rows = "".join(f"<tr><th><code>{_e(k)}</code></th><td><code>{_e(_value_text(v))}</code></td></tr>"
                   for k, v in spec.items())
    resolved = result.get("spec_resolved") or {}
    res_rows = "".join(f"<tr><th><code>{_e(k)}</code></th><td><code>{_e(_value_text(v))}</code></td></tr>"
                       for k, v in resolved.items())
    extra = (f"<details><summary>Every setting, with defaults filled in</summary><table>{res_rows}</table>"
             "</details>") if res_rows else ""
    return (f'<section id="spec"><h2>Options and seed</h2><p>Options as given; random seed '
            f'<strong>{_e(result.get("seed"))}</strong>.</p><table>{rows or "<tr><td>none</td></tr>"}</table>'
            f'{extra}</section>')


def _gi(result):
    gi = result.get("generation_interval")
    if gi and gi.get("mean_days") is not None:
        mean, sd = gi["mean_days"], gi.get("sd_days")
        text = f"Mean {mean:g} days" + (f", sd {sd:g} days" if sd is not None else "")
        text += ". Reproduction numbers depend on the generation interval assumed."
    else:
        text = "None given, so no reproduction numbers were estimated."
    return f'<section id="generation-interval"><h2>Generation interval</h2><p>{_e(text)}</p></section>'


def _assumptions(result, run_id):
    series = result.get("series") or {}
    lines = list(result.get("assumptions") or []) + about_lines(
        end=series.get("end"), run_id=run_id, seed=result.get("seed"), gi=result.get("generation_interval"))
    items = "".join(f"<li>{_e(line)}</li>" for line in lines)
    return (f'<section id="assumptions"><h2>Model assumptions</h2><ul class="lines">{items}</ul>'
            f'<h2>Cautions</h2><ul class="lines">{"".join(f"<li>{_e(c)}</li>" for c in cautions_of(result))}'
            '</ul></section>')


def _about(result, run, now):
    rows = [("Result generated", result.get("generated_at") or "–"), ("Report generated", now),
            ("Result schema version", result.get("schema_version")), ("Bendline version", CODE_VERSION)]
    if run:
        rows += [("Run owner", run.get("owner")), ("Run created", run.get("created_at"))]
    body = "".join(f"<tr><th>{_e(k)}</th><td>{_e('–' if v is None else v)}</td></tr>" for k, v in rows)
    return f'<footer id="about"><table>{body}</table></footer>'


def html_report(result, *, run=None, now=None):
    """The whole report as one HTML document (a str).

    Parameters
    ----------
    result : dict
        A Bendline JSON result (see :func:`app.reports.content.check_result`).
    run : dict, optional
        The run's record (status, owner, created_at, id) when the report is
        made by the server.
    now : str, optional
        The report's generation time (ISO); defaults to the current UTC time.

    Returns
    -------
    str
        Self-contained HTML: no external scripts, styles, fonts or images.
    """
    now = now or _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    view = result_view(result)
    series = result.get("series") or {}
    run_id = result.get("run_id") or (run or {}).get("id")
    title = title_text(series.get("name"), series.get("end"))
    summary = hedged_summary(view, provisional=False, final=reportable(result))
    body = "".join([
        f'<header class="top"><p class="kicker">Bendline trend report</p><h1 id="title">{_e(title)}</h1>'
        f'<p class="kicker">{_e(series.get("n"))} values, '
        f'{"daily" if int(series.get("interval_days") or 1) == 1 else "weekly"}, '
        f'{_e(wording.fmt_date(series.get("start")))} to {_e(wording.fmt_date(series.get("end")))}'
        f'{", run " + _e(run_id) if run_id else ""}</p></header>',
        _status_block(result), _cautions(result), _headline(view),
        f'<section id="summary"><h2>In plain words</h2><p class="summary">{_e(summary)}</p></section>',
        _charts(result, view), _diagnostics(view), _data_quality(result), _spec(result), _gi(result),
        _assumptions(result, run_id), _about(result, run, now),
    ])
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta http-equiv=\"Content-Security-Policy\" content=\"{CSP}\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{_e(title)} · Bendline report</title><style>{STYLE}</style>"
            f"<script type=\"text/javascript\">{get_plotlyjs()}</script></head>"
            f"<body><main>{body}</main></body></html>\n")
