"""A result's numbers as CSV tables, safe to open in a spreadsheet.

:func:`csv_tables` writes four tables (``segments``, ``changepoints``,
``band``, ``projection``): one row per segment, change date or date, with
the unit in every column's name. Numbers are written as numbers (a negative
growth rate stays ``-0.028``); every text cell passes :func:`neutralise`.

CSV injection
-------------
A spreadsheet treats a cell starting with ``=``, ``+``, ``-`` or ``@`` (or a
tab or carriage return) as a formula, so a series name or data-quality note
taken from an uploaded file could run a formula on an analyst's machine.
Following OWASP's "CSV Injection" guidance
(https://owasp.org/www-community/attacks/CSV_Injection; also CWE-1236),
such text cells get a leading single quote, and the ``csv`` module quotes
every cell holding a separator, quote or line break, so no text can start a
new cell of its own.
"""

from __future__ import annotations

import csv
import io
import math
import re

from .. import wording
from .content import reportable

#: The tables :func:`csv_tables` returns, in order.
TABLES = ("segments", "changepoints", "band", "projection")
#: First characters that make a spreadsheet read a cell as a formula (OWASP).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
#: A separator followed by a formula character: some spreadsheets split an
#: unquoted cell there and read the rest as a formula of its own.
_EMBEDDED_FORMULA = re.compile(r"[,;\t|]\s*[=+\-@]")


def neutralise(cell):
    """A text cell a spreadsheet will not run as a formula: the one rule for every CSV we write.

    Parameters
    ----------
    cell : str, number, bool or None
        A table cell. Numbers and booleans are not text and are returned as
        they are (a negative growth rate stays a number).

    Returns
    -------
    str or the number unchanged
        ``""`` for None; ``"'" + cell`` when the text starts with ``= + - @``,
        a tab or a carriage return, starts with those after leading
        whitespace (``" =1+1"``), or holds a separator followed by one of
        them; the text unchanged otherwise.
    """
    if cell is None:
        return ""
    if not isinstance(cell, str):
        return cell
    if (cell.startswith(FORMULA_STARTS) or cell.lstrip().startswith(FORMULA_STARTS[:4])
            or _EMBEDDED_FORMULA.search(cell)):
        return "'" + cell
    return cell


def _num(v):
    """A finite float (or int) for a numeric cell; None (an empty cell) otherwise."""
    if v is None or isinstance(v, bool):
        return None
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    if not math.isfinite(f):
        return None
    return int(v) if isinstance(v, int) else f


def _q(summary, key):
    return _num((summary or {}).get(key))


def _status_text(result):
    return "reportable" if reportable(result) else "NOT REPORTABLE: do not report"


def _write(header, rows, text_columns):
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL)
    w.writerow(header)
    for row in rows:
        w.writerow(["" if v is None else (neutralise(v) if h in text_columns else v)
                    for h, v in zip(header, row)])
    return buf.getvalue()


def segments_table(result):
    """(header, rows) of the segments table."""
    header = ["series", "status", "segment", "start_date", "end_date", "start_day", "end_day", "direction",
              "growth_rate_per_day_median", "growth_rate_per_day_q05", "growth_rate_per_day_q95",
              "growth_rate_per_day_mean",
              "growth_pct_per_day_median", "growth_pct_per_day_q05", "growth_pct_per_day_q95",
              "growth_pct_per_week_median", "growth_pct_per_week_q05", "growth_pct_per_week_q95",
              "doubling_time_days_median", "doubling_time_days_q05", "doubling_time_days_q95",
              "halving_time_days_median", "halving_time_days_q05", "halving_time_days_q95",
              "prob_growing", "reproduction_number_median", "reproduction_number_q05",
              "reproduction_number_q95", "reproduction_number_prob_above_1"]
    name, status = result["series"].get("name"), _status_text(result)
    rows = []
    for s in result.get("segments") or []:
        g, d, h = s.get("growth_rate_per_day") or {}, s.get("doubling_time_days"), s.get("halving_time_days")
        rn = s.get("reproduction_number")
        day, week = wording.growth_block(s, "day"), wording.growth_block(s, "week")
        rows.append([name, status, _num(s.get("index")), s.get("start_date"), s.get("end_date"),
                     _num(s.get("start_day")), _num(s.get("end_day")), wording.direction_of(s),
                     _q(g, "median"), _q(g, "q05"), _q(g, "q95"), _q(g, "mean"),
                     _q(day, "median"), _q(day, "q05"), _q(day, "q95"),
                     _q(week, "median"), _q(week, "q05"), _q(week, "q95"),
                     _q(d, "median"), _q(d, "q05"), _q(d, "q95"), _q(h, "median"), _q(h, "q05"), _q(h, "q95"),
                     _num(s.get("prob_growing")), _q(rn, "median"), _q(rn, "q05"), _q(rn, "q95"),
                     _q(rn, "prob_above_1")])
    return header, rows


def changepoints_table(result):
    """(header, rows) of the change-date table."""
    header = ["series", "status", "change_date", "median_date", "q05_date", "q95_date",
              "median_day", "q05_day", "q95_day", "mean_day", "sd_days"]
    name, status = result["series"].get("name"), _status_text(result)
    rows = [[name, status, _num(c.get("index")), c.get("median_date"), c.get("q05_date"), c.get("q95_date"),
             _num(c.get("median_day")), _num(c.get("q05_day")), _num(c.get("q95_day")), _num(c.get("mean_day")),
             _num(c.get("sd_days"))] for c in result.get("changepoints") or []]
    return header, rows


def _per(result):
    return "day" if int(result["series"].get("interval_days") or 1) == 1 else "week"


def _notes_by_date(result):
    out = {}
    for n in ((result.get("data_quality") or {}).get("notes") or []):
        if n.get("date"):
            out.setdefault(n["date"][:10], []).append(n.get("message") or n.get("kind") or "")
    return out


def band_table(result):
    """(header, rows) of the fitted trend, one row per date of the series."""
    per = _per(result)
    header = ["series", "status", "date", f"reported_count_per_{per}",
              f"trend_median_per_{per}", f"trend_q05_per_{per}", f"trend_q95_per_{per}",
              f"predictive_q05_per_{per}", f"predictive_q95_per_{per}", "data_quality_note"]
    name, status = result["series"].get("name"), _status_text(result)
    band = result.get("band") or {}
    values = result["series"].get("values") or []
    notes = _notes_by_date(result)
    cols = [band.get(k) or [] for k in ("trend_q50", "trend_q05", "trend_q95", "predictive_q05", "predictive_q95")]
    rows = []
    for i, date in enumerate(band.get("dates") or []):
        observed = _num(values[i]) if i < len(values) else None
        row = [name, status, date, observed] + [_num(c[i]) if i < len(c) else None for c in cols]
        row.append("; ".join(notes.get(str(date)[:10], [])) or None)
        rows.append(row)
    return header, rows


def projection_table(result):
    """(header, rows) of the projection: what follows if the current trend continues."""
    per = _per(result)
    header = ["series", "status", "date", "meaning",
              f"trend_median_per_{per}", f"trend_q05_per_{per}", f"trend_q95_per_{per}",
              f"counts_median_per_{per}", f"counts_q05_per_{per}", f"counts_q95_per_{per}"]
    name, status = result["series"].get("name"), _status_text(result)
    proj = result.get("projection") or {}
    cols = [proj.get(k) or [] for k in ("trend_q50", "trend_q05", "trend_q95", "q50", "q05", "q95")]
    meaning = "if the current trend continues (not a forecast)"
    rows = [[name, status, date, meaning] + [_num(c[i]) if i < len(c) else None for c in cols]
            for i, date in enumerate(proj.get("dates") or [])]
    return header, rows


_BUILDERS = {"segments": segments_table, "changepoints": changepoints_table, "band": band_table,
             "projection": projection_table}
_TEXT = {"series", "status", "start_date", "end_date", "median_date", "q05_date", "q95_date", "date", "meaning",
         "data_quality_note"}


def csv_tables(result):
    """The result's tables as CSV text.

    Parameters
    ----------
    result : dict
        A JSON result.

    Returns
    -------
    dict
        ``{"segments": csv, "changepoints": csv, "band": csv, "projection":
        csv}``; each has a header row, CRLF line ends (RFC 4180) and a
        ``status`` column that says "NOT CONVERGED: do not report" on every
        row of an unconverged result.
    """
    return {name: _write(*_BUILDERS[name](result), _TEXT) for name in TABLES}
