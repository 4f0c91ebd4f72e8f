"""Reading one cell: dates (ISO, with hints for other forms) and counts.

Counts may carry thousands separators (removed, and noted), be missing (empty,
NA, N/A or .), negative (a revision, set to missing) or fractional (rounded);
anything else that is not a usable whole number is an error.
"""

from __future__ import annotations

import datetime as _dt
import math
import re

import numpy as np

from ..errors import InputError
from ..series import MAX_COUNT, DataQualityNote

MISSING_TOKENS = frozenset({"", "na", "n/a", "."})
_NONFINITE_TOKENS = frozenset(
    {"inf", "+inf", "-inf", "infinity", "+infinity", "-infinity", "nan", "+nan", "-nan"}
)
_PLAIN_NUMBER = re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")
# Groups of three digits split by one separator used consistently: comma,
# apostrophe (plain or typographic), space, no-break space, narrow no-break
# space; optionally followed by a decimal part.
_THOUSANDS = re.compile(
    r"^([+-]?)(\d{1,3}(?:([,' \u00a0\u202f\u2019])\d{3})(?:\3\d{3})*)(\.\d+)?$"
)
_DOT_GROUPS = re.compile(r"^[+-]?[1-9]\d{0,2}(?:\.\d{3})+$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_DATE = re.compile(
    r"^(\d{4})([-/])(\d{1,2})\2(\d{1,2})"
    r"(?:[T ](\d{1,2}):(\d{2})(?::(\d{2})(?:\.(\d+))?)?\s*(Z|[+-]\d{2}:?\d{2})?)?$"
)
_DAY_FIRST = re.compile(r"^\d{1,2}[./-]\d{1,2}[./-]\d{4}$")
_ISO_WEEK = re.compile(r"^\d{4}-?W\d{1,2}(?:-?\d)?$", re.IGNORECASE)
_EXPECTED_DATE = (
    "a date written as YYYY-MM-DD (for example 2026-01-31; YYYY/MM/DD and midnight "
    "datetimes such as 2026-01-31T00:00:00 are also accepted)"
)
_EPOCH = _dt.date(1970, 1, 1)
_WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")


class CellError(Exception):
    """A cell that cannot be read; the caller adds row and column."""


def parse_date(text):
    """Return (days since 1970-01-01, None) or (None, reason)."""
    m = _DATE.match(text)
    if m is None:
        if _DAY_FIRST.match(text):
            return None, (
                "this looks like day/month/year or month/day/year, which cannot be told apart"
            )
        if _ISO_WEEK.match(text):
            return None, "this is a week number, not a date; write the date the week starts"
        if text.lower() in ("total", "totals", "sum", "all", "grand total"):
            return None, "this looks like a totals row; delete it from the file"
        return None, None
    year, month, day = int(m.group(1)), int(m.group(3)), int(m.group(4))
    if not 1 <= month <= 12:
        return None, f"there is no month {month}"
    try:
        d = _dt.date(year, month, day)
    except ValueError:
        return None, f"there is no day {day} in month {month} of {year}"
    if m.group(5) is not None:
        clock = (m.group(5), m.group(6), m.group(7) or "0", (m.group(8) or "0"))
        if any(int(x) != 0 for x in clock):
            return None, (
                "it has a time of day; only dates, or datetimes at midnight (00:00), are accepted"
            )
    return (d - _EPOCH).days, None


def iso_text(day):
    return (_EPOCH + _dt.timedelta(days=int(day))).isoformat()


def weekday_label(day):
    return _WEEKDAYS[(int(day) + 3) % 7]


def parse_count(text, sep=","):
    """Read one count cell.

    Returns
    -------
    value : float or None
        None for a missing cell.
    thousands : bool
        Whether a thousands separator was removed.

    Raises
    ------
    CellError
        With the reason, when the cell is not a usable number.
    """
    if text.lower() in MISSING_TOKENS:
        return None, False
    thousands = False
    clean = text
    if not _PLAIN_NUMBER.match(clean):
        m = _THOUSANDS.match(clean)
        if m is not None:
            clean = m.group(1) + m.group(2).replace(m.group(3), "") + (m.group(4) or "")
            thousands = True
        elif clean.lower() in _NONFINITE_TOKENS:
            raise CellError(
                "is not a finite number; expected a whole count such as 12, or an empty "
                "cell or NA for a missing value"
            )
        elif _DECIMAL_COMMA.match(clean):
            raise CellError(
                "is not a whole number (a decimal comma?); expected a whole count such as "
                "12, written without a decimal part"
            )
        elif clean.startswith("#"):
            raise CellError(
                "is a spreadsheet error value, not a number; fix the formula or leave the "
                "cell empty for a missing value"
            )
        else:
            raise CellError(
                "is not a number; expected a whole count such as 12, or an empty cell, NA "
                "or . for a missing value"
            )
    if sep == ";" and _DOT_GROUPS.match(clean):
        raise CellError(
            "is ambiguous in a semicolon-separated file: it could be a whole number with "
            "'.' as thousands separator or a decimal; write counts without separators "
            "(for example 1234)"
        )
    value = float(clean)
    if not math.isfinite(value) or abs(value) > MAX_COUNT:
        raise CellError(
            f"is too large to be a count (the limit is {MAX_COUNT:.0e}); check the cell "
            "for a typing error or a value from another column"
        )
    return value, thousands


def read_cells(frame, label, dcol, ccol):
    """Read the date and count cell of every row of ``frame``.

    Returns
    -------
    rows : list of int
        Spreadsheet row numbers, in file order.
    days : numpy.ndarray of int64
        Days since 1970-01-01, in file order.
    values : numpy.ndarray of float
        Counts, ``NaN`` where missing or negative, fractions rounded.
    row_notes : list of DataQualityNote
        One ``missing``, ``negative`` or ``fraction`` note per row concerned.
    thousands_rows : list of int
        Rows whose count had a thousands separator removed.
    """
    rows = [int(r) for r in frame.index]
    row_notes = []
    days = np.empty(len(rows), dtype=np.int64)
    values = np.empty(len(rows), dtype=float)
    thousands_rows = []
    date_cache = {}
    sep = frame.attrs.get("separator", ",")
    for i, (row, dtext, ctext) in enumerate(zip(rows, frame[dcol].tolist(), frame[ccol].tolist())):
        if dtext in date_cache:
            day = date_cache[dtext]
        else:
            if dtext == "":
                raise InputError(
                    f"the date is empty; expected {_EXPECTED_DATE}",
                    source=label, row=row, column=dcol, value="",
                )
            day, reason = parse_date(dtext)
            if day is None:
                why = f" ({reason})" if reason else ""
                raise InputError(
                    f"'{dtext}' is not a date{why}; expected {_EXPECTED_DATE}",
                    source=label, row=row, column=dcol, value=dtext,
                )
            date_cache[dtext] = day
        days[i] = day
        try:
            value, thousands = parse_count(ctext, sep)
        except CellError as exc:
            raise InputError(
                f"the count '{ctext}' {exc}", source=label, row=row, column=ccol, value=ctext,
            ) from None
        iso = iso_text(day)
        if thousands:
            thousands_rows.append(row)
        if value is None:
            shown = "empty count" if ctext == "" else f"count '{ctext}'"
            row_notes.append(
                DataQualityNote(row, iso, "missing", f"row {row} ({iso}): {shown} kept as missing")
            )
            value = np.nan
        elif value < 0:
            row_notes.append(
                DataQualityNote(
                    row, iso, "negative",
                    f"row {row} ({iso}): negative count {ctext} (a revision) set to missing",
                )
            )
            value = np.nan
        elif value != math.floor(value):
            rounded = float(math.floor(value + 0.5))
            row_notes.append(
                DataQualityNote(
                    row, iso, "fraction",
                    f"row {row} ({iso}): count {ctext} is not a whole number, rounded to "
                    f"{int(rounded)}",
                )
            )
            value = rounded
        values[i] = value
    return rows, days, values, row_notes, thousands_rows
