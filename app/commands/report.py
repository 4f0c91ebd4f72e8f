"""``bendline report RESULT.json --html OUT.html [--csv-dir DIR]``: a result into a report and tables.

Exit status: 0 when the files were written (an unconverged result is still
reported, with its "Not converged: do not report these numbers" box, and a
warning on stderr); 2 when RESULT.json is missing, unreadable, not JSON or
not a Bendline result of this schema version (one line on stderr); 1 when
an output cannot be written.
"""

from __future__ import annotations

import json
import os
import sys

from .common import EXIT_ERROR, EXIT_INPUT, EXIT_OK

PROG = "bendline report"


def register(sub):
    p = sub.add_parser(
        "report",
        help="write a self-contained HTML report (and CSV tables) from a JSON result",
        description="Write a self-contained HTML report of a Bendline JSON result, and optionally its "
                    "segment, change-date, trend and projection tables as CSV files.",
    )
    p.add_argument("result", metavar="RESULT.json", help="a JSON result written by 'bendline fit' or downloaded")
    p.add_argument("--html", metavar="OUT.html", required=True, help="where to write the HTML report")
    p.add_argument("--csv-dir", metavar="DIR",
                   help="also write segments.csv, changepoints.csv, band.csv and projection.csv here")
    p.set_defaults(handler=run_report)


def _fail(message, code):
    sys.stderr.write(f"{PROG}: {message}\n")
    return code


def read_result(path):
    """(result, None) or (None, one-line message) for a RESULT.json path."""
    from ..reports import NotAResult, check_result

    try:
        with open(path, encoding="utf-8") as fh:
            obj = json.load(fh)
    except FileNotFoundError:
        return None, f"cannot read {path}: no such file"
    except IsADirectoryError:
        return None, f"cannot read {path}: it is a folder, not a file"
    except OSError as exc:
        return None, f"cannot read {path}: {exc.strerror or exc}"
    except UnicodeDecodeError:
        return None, f"{path} is not a Bendline result: it is not UTF-8 text"
    except ValueError as exc:  # json.JSONDecodeError
        return None, f"{path} is not a Bendline result: it is not valid JSON ({exc})"
    try:
        check_result(obj)
    except NotAResult as exc:
        return None, f"{path}: {exc}"
    return obj, None


def _write_text(path, text):
    tmp = f"{path}.tmp"
    with open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)
    os.replace(tmp, path)


def run_report(args):
    from bendline.inference.wording import verdict_of

    from ..reports import TABLES, csv_tables, html_report, reportable

    result, problem = read_result(args.result)
    if problem:
        return _fail(problem, EXIT_INPUT)
    try:
        page = html_report(result)
        tables = csv_tables(result) if args.csv_dir else {}
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        return _fail(f"{args.result} is an incomplete Bendline result ({type(exc).__name__}: {exc})", EXIT_INPUT)
    try:
        _write_text(args.html, page)
    except OSError as exc:
        return _fail(f"cannot write the report to {args.html}: {exc.strerror or exc}", EXIT_ERROR)
    if args.csv_dir:
        try:
            os.makedirs(args.csv_dir, exist_ok=True)
            for name in TABLES:
                _write_text(os.path.join(args.csv_dir, f"{name}.csv"), tables[name])
        except OSError as exc:
            return _fail(f"cannot write the tables to {args.csv_dir}: {exc.strerror or exc}", EXIT_ERROR)
    if not reportable(result):
        _ok, reasons = verdict_of(result.get("diagnostics"))
        why = reasons[0] if reasons else "the chains did not converge."
        sys.stderr.write(f"{PROG}: the result is not reportable: {why} The report says so; its numbers "
                         "should not be reported.\n")
    return EXIT_OK
