"""Reading surveillance count files into :class:`~inference.series.Series`.

The reader takes a delimited text file (comma, semicolon or tab separated;
UTF-8 with or without a byte-order mark; any line ending) holding one row per
day or per week, and returns a regular series with ``NaN`` where a value is
missing. It never changes the data silently: every cell it reads as missing,
every value it rounds or drops and every date absent from the grid is recorded
as a :class:`~inference.series.DataQualityNote`. Anything it cannot read with
confidence raises :class:`~inference.errors.InputError` naming the file, the
row as a spreadsheet numbers it (header = row 1), the column, the value and
what was expected.

Long-format files (several regions stacked, one column naming the region) are
supported: :func:`list_regions` lists them, :func:`read_series` picks one and
:func:`read_all_regions` reads them all for a batch fit.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import math
import os
import re

import numpy as np
import pandas as pd

from .errors import InputError
from .series import MAX_COUNT, DataQualityNote, Series

#: Largest file accepted, in bytes (20 MB).
MAX_BYTES = 20 * 1024 * 1024

#: Largest number of data rows accepted in one file.
MAX_ROWS = 200_000

#: Header names taken as the date column (compared case-insensitively, with
#: spaces, dots and hyphens read as underscores).
DATE_NAMES = (
    "date",
    "dates",
    "day",
    "week",
    "week_start",
    "week_starting",
    "week_beginning",
    "week_ending",
    "week_end",
    "period",
    "period_start",
    "period_end",
    "report_date",
    "reporting_date",
    "date_reported",
    "time",
    "ds",
)
_DATE_TOKENS = frozenset({"date", "week", "day", "period"})

#: Header names taken as the count column.
COUNT_NAMES = (
    "count",
    "counts",
    "cases",
    "case",
    "case_count",
    "value",
    "values",
    "n",
    "admissions",
    "deaths",
    "total",
    "number",
    "num",
    "freq",
    "frequency",
    "events",
    "incidence",
    "hospitalisations",
    "hospitalizations",
    "new_cases",
    "new_deaths",
    "new_admissions",
    "y",
)
_COUNT_TOKENS = frozenset(
    {"count", "counts", "cases", "deaths", "admissions", "total", "value", "n"}
)

#: Header names taken as the region column of a long-format file.
REGION_NAMES = (
    "region",
    "area",
    "location",
    "site",
    "district",
    "zone",
    "group",
    "name",
    "region_name",
    "area_name",
    "location_name",
    "site_name",
    "district_name",
)

_SEPARATORS = (",", ";", "\t")
_SEPARATOR_NAMES = {",": "comma", ";": "semicolon", "\t": "tab"}
_MISSING_TOKENS = frozenset({"", "na", "n/a", "."})
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
_INTERVALS = {
    "day": 1,
    "daily": 1,
    "d": 1,
    "1": 1,
    "week": 7,
    "weekly": 7,
    "w": 7,
    "7": 7,
}


# --------------------------------------------------------------------------
# Reading the file


def read_table(source, *, name=None):
    """Read a delimited text file into a table of strings.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        A path to the file, the file's raw bytes (an upload), or its text. A
        ``str`` is taken as text when it contains a line break or a
        separator and is not the name of an existing file.
    name : str, optional
        Label used in messages (defaults to the file's base name, or
        ``"uploaded file"`` for bytes and text).

    Returns
    -------
    table : pandas.DataFrame
        One column per header cell, all values ``str`` with surrounding
        spaces removed; the index (named ``"row"``) holds each row's number
        as a spreadsheet shows it (header = row 1). Empty rows are left out.
        ``table.attrs`` holds ``"separator"``, ``"header_row"``, ``"source"``
        and ``"notes"`` (a tuple of :class:`DataQualityNote` about skipped
        empty rows).
    label : str
        The file label used in messages.

    Raises
    ------
    InputError
        If the file is missing, too large, not UTF-8 text, empty, has only a
        header or only blank lines, has unbalanced quotes, or has a row with
        more cells than the header.
    """
    text, label = _load_text(source, name)
    if not text.strip():
        if text == "":
            raise InputError(
                "the file is empty; expected a header row (for example date,count) "
                "followed by one row per day or week",
                source=label,
            )
        raise InputError(
            "the file contains only blank lines; expected a header row (for example "
            "date,count) followed by one row per day or week",
            source=label,
        )
    sep = _sniff(text)
    records = _records(text, sep, label)

    header_row = None
    header = None
    data_rows, data = [], []
    blank_rows = []
    for rownum, fields in records:
        cells = [f.strip() for f in fields]
        if not any(cells):
            if header is not None:
                blank_rows.append(rownum)
            continue
        if header is None:
            header_row, header = rownum, cells
            continue
        if len(cells) > len(header):
            extra = cells[len(header):]
            if any(extra):
                raise InputError(
                    f"this row has {len(cells)} cells but the header (row {header_row}) has "
                    f"{len(header)}, separated by {_SEPARATOR_NAMES[sep]}s; the extra cell "
                    f"holds '{next(c for c in extra if c)}'. A number written with a comma "
                    f"as thousands separator must be quoted (\"1,234\") or written without "
                    f"it (1234), and every row needs the same number of cells as the header",
                    source=label,
                    row=rownum,
                    value=sep.join(cells),
                )
            cells = cells[: len(header)]
        elif len(cells) < len(header):
            cells = cells + [""] * (len(header) - len(cells))
        data_rows.append(rownum)
        data.append(cells)
        if len(data) > MAX_ROWS:
            raise InputError(
                f"the file has more than {MAX_ROWS:,} data rows (the limit); "
                f"split it or keep only the period you want to fit",
                source=label,
                row=rownum,
            )

    if not data:
        extra = f" ({len(blank_rows)} blank rows follow it)" if blank_rows else ""
        raise InputError(
            f"the file has a header ({', '.join(header)}) but no data rows{extra}; "
            "expected one row per day or week below the header",
            source=label,
        )

    columns = _header_names(header, header_row, data, label)
    keep = [i for i, c in enumerate(columns) if c is not None]
    if len(keep) < len(columns):
        data = [[row[i] for i in keep] for row in data]
    frame = pd.DataFrame(
        data,
        columns=[columns[i] for i in keep],
        index=pd.Index(data_rows, name="row"),
        dtype=object,
    )

    notes = []
    last = data_rows[-1]
    inner = [r for r in blank_rows if r < last]
    trailing = [r for r in blank_rows if r > last]
    if inner:
        notes.append(
            DataQualityNote(
                inner[0],
                None,
                "blank",
                f"{_plural(len(inner), 'empty row')} between data rows skipped "
                f"({_row_list(inner)})",
            )
        )
    if trailing:
        notes.append(
            DataQualityNote(
                trailing[0],
                None,
                "trailing",
                f"{_plural(len(trailing), 'empty row')} at the end of the file ignored "
                f"({_row_list(trailing)})",
            )
        )
    frame.attrs.update(
        {"separator": sep, "header_row": header_row, "source": label, "notes": tuple(notes)}
    )
    return frame, label


def _load_text(source, name):
    """Return the decoded text of ``source`` and its label."""
    if isinstance(source, (bytes, bytearray, memoryview)):
        data = bytes(source)
        label = name or "uploaded file"
        _check_size(len(data), label)
        return _decode(data, label), label
    if isinstance(source, os.PathLike) or (isinstance(source, str) and _is_path(source)):
        path = os.fspath(source)
        label = name or os.path.basename(path) or path
        if not os.path.exists(path):
            raise InputError(
                f"file not found: '{path}'; check the path and the file name",
                source=label,
                value=path,
            )
        if os.path.isdir(path):
            raise InputError(
                f"'{path}' is a folder, not a file; give the path of a CSV file",
                source=label,
                value=path,
            )
        _check_size(os.path.getsize(path), label)
        try:
            with open(path, "rb") as fh:
                data = fh.read()
        except OSError as exc:
            raise InputError(
                f"the file could not be opened ({exc.strerror or exc}); check that it "
                "exists and can be read",
                source=label,
                value=path,
            ) from None
        return _decode(data, label), label
    if isinstance(source, str):
        label = name or "uploaded file"
        _check_size(len(source.encode("utf-8", errors="surrogatepass")), label)
        text = source[1:] if source.startswith("\ufeff") else source
        _check_text(text, label)
        return text, label
    raise InputError(
        f"expected a file path, the file's bytes or its text, got {type(source).__name__}",
        source=name,
        value=type(source).__name__,
    )


def _is_path(text):
    """Whether a ``str`` source names a file rather than holding its text."""
    if not text.strip() or "\n" in text or "\r" in text:
        return False
    if os.path.exists(text):
        return True
    if re.search(r"\.(csv|tsv|txt|tab|dat)$", text, re.IGNORECASE):
        return True
    return not any(s in text for s in _SEPARATORS)


def _check_size(size, label):
    if size > MAX_BYTES:
        raise InputError(
            f"the file is {size / 1024 / 1024:.1f} MB ({size:,} bytes); the limit is "
            f"{MAX_BYTES // (1024 * 1024)} MB. Keep only the columns and the period you "
            "need, or split the file by region",
            source=label,
            value=size,
        )


_SIGNATURES = (
    (b"PK\x03\x04", "an Excel workbook (.xlsx) or another zip archive"),
    (b"\xd0\xcf\x11\xe0", "an old-style Excel workbook (.xls)"),
    (b"\x1f\x8b", "a gzip-compressed file"),
    (b"%PDF", "a PDF document"),
    (b"PAR1", "a Parquet file"),
    (b"SQLite format 3", "an SQLite database"),
)
_RESAVE = "save it from the spreadsheet as 'CSV UTF-8 (comma delimited)' and upload that file"


def _decode(data, label):
    """Decode UTF-8 bytes (BOM optional); reject anything that is not text."""
    for magic, what in _SIGNATURES:
        if data.startswith(magic):
            raise InputError(
                f"this is {what}, not a text file of comma-, semicolon- or "
                f"tab-separated values; {_RESAVE}",
                source=label,
            )
    head = data[:64] if len(data) % 2 == 0 else data[:63]
    if data.startswith((b"\xff\xfe", b"\xfe\xff")) or (
        len(head) >= 4
        and any(
            set(head[i::2]) == {0}
            and all(32 <= b < 127 or b in (9, 10, 13) for b in head[1 - i :: 2])
            for i in (0, 1)
        )
    ):
        raise InputError(
            f"the file is saved as UTF-16 text ('Unicode text'), not UTF-8; {_RESAVE}",
            source=label,
        )
    if b"\x00" in data[:65536]:
        raise InputError(
            f"the file is not text (it contains binary data); expected a CSV text file. "
            f"If it came from a spreadsheet, {_RESAVE}",
            source=label,
        )
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        row = data[: exc.start].count(b"\n") + 1
        bad = data[exc.start : exc.start + 1].hex()
        raise InputError(
            f"the file is not UTF-8 text: byte 0x{bad} on this line cannot be read. "
            f"It was probably saved in another encoding (such as Windows-1252 or "
            f"Latin-1); {_RESAVE}",
            source=label,
            row=row,
            value=f"0x{bad}",
        ) from None
    _check_text(text, label)
    return text


def _check_text(text, label):
    """Reject text full of control characters (a binary file read as text)."""
    sample = text[:65536]
    if "\x00" in sample:
        raise InputError(
            f"the file is not text (it contains binary data); expected a CSV text file. "
            f"If it came from a spreadsheet, {_RESAVE}",
            source=label,
        )
    control = sum(1 for ch in sample if ord(ch) < 32 and ch not in "\t\n\r\f\v")
    if sample and control > max(8, len(sample) // 100):
        raise InputError(
            f"the file is not text ({control} control characters in its first "
            f"{len(sample):,} characters); expected a CSV text file. If it came from a "
            f"spreadsheet, {_RESAVE}",
            source=label,
        )


def _sniff(text):
    """Pick the separator (comma, semicolon or tab) that splits the header
    into the most cells and the rows most consistently."""
    sample = text[:65536]
    truncated = len(text) > len(sample)
    best, best_key = ",", (-1.0, 0)
    for sep in _SEPARATORS:
        try:
            rows = list(
                csv.reader(io.StringIO(sample, newline=""), delimiter=sep, skipinitialspace=True)
            )
        except csv.Error:
            continue
        if truncated and rows:
            rows = rows[:-1]
        rows = [r for r in rows if any(c.strip() for c in r)][:50]
        if not rows or len(rows[0]) < 2:
            continue
        width = len(rows[0])
        consistency = sum(1 for r in rows if len(r) == width) / len(rows)
        key = (consistency, width)
        if key > best_key:
            best, best_key = sep, key
    return best


def _records(text, sep, label):
    """Parse ``text`` into (spreadsheet row, cells) pairs, blank rows included."""
    reader = csv.reader(
        io.StringIO(text, newline=""), delimiter=sep, strict=True, skipinitialspace=True
    )
    out = []
    rownum = 0
    try:
        for fields in reader:
            rownum += 1
            out.append((rownum, fields))
    except csv.Error as exc:
        reason = str(exc)
        if "end of data" in reason or "field larger" in reason:
            what = (
                'a quoted field opened with " on this row is never closed; every " that '
                "starts a field needs a matching closing \""
            )
        elif "expected after" in reason:
            what = (
                'a quoted field on this row has text after its closing "; a quote inside '
                'a quoted field must be doubled ("")'
            )
        else:
            what = f"the row cannot be split into cells ({reason})"
        raise InputError(what, source=label, row=rownum + 1) from None
    return out


def _header_names(header, header_row, data, label):
    """Column names from the header row; None for an empty, unnamed column."""
    for cell in header:
        if _parse_date(cell)[0] is not None:
            raise InputError(
                f"the first row looks like data ('{cell}' is a date), not a header; add a "
                "header row naming the columns, for example date,count",
                source=label,
                row=header_row,
                value=cell,
            )
    names = []
    for i, cell in enumerate(header):
        if cell:
            names.append(cell)
        elif any(row[i] for row in data):
            names.append(f"column {_column_letter(i)}")
        else:
            names.append(None)
    seen = {}
    for i, n in enumerate(names):
        if n is None:
            continue
        key = _norm(n)
        if key in seen:
            j = seen[key]
            raise InputError(
                f"two columns have the same name: '{names[j]}' (column "
                f"{_column_letter(j)}) and '{n}' (column {_column_letter(i)}); "
                "give each column a different name",
                source=label,
                row=header_row,
                column=n,
                value=n,
            )
        seen[key] = i
    return names


# --------------------------------------------------------------------------
# Columns and regions


def list_regions(source, *, region_column=None, name=None):
    """List the regions of a long-format file.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        Path, bytes or text of the file (see :func:`read_table`).
    region_column : str, optional
        Name of the column naming the region. When not given, a column named
        region, area, location, site, district, zone, group or name
        (case-insensitive) is used; files with fewer than three columns have
        no region column.
    name : str, optional
        File label for messages.

    Returns
    -------
    list of str
        Region names in order of first appearance, or ``[]`` when the file
        has no region column.

    Raises
    ------
    InputError
        If ``region_column`` is not a column of the file, if several columns
        could name the region, or if a region cell is empty.
    """
    frame, label = read_table(source, name=name)
    col = _region_column(frame, label, region_column)
    if col is None:
        return []
    return _regions(frame, col, label)


def _region_column(frame, label, region_column):
    columns = list(frame.columns)
    if region_column is not None:
        return _given_column(columns, region_column, "--region-column", "region", label)
    if len(columns) < 3:
        return None
    found = [c for c in columns if _norm(c) in REGION_NAMES]
    if len(found) > 1:
        raise InputError(
            f"several columns could name the region: {_quoted(found)}; choose one with "
            f"--region-column. The columns are: {_quoted(columns)}",
            source=label,
        )
    return found[0] if found else None


def _regions(frame, col, label):
    values = frame[col]
    empty = values[values == ""]
    if len(empty):
        raise InputError(
            "the region is empty; every row of a file with several regions needs the "
            "region's name in this column",
            source=label,
            row=int(empty.index[0]),
            column=col,
            value="",
        )
    return list(dict.fromkeys(values.tolist()))


def _given_column(columns, wanted, flag, what, label):
    if wanted in columns:
        return wanted
    matches = [c for c in columns if _norm(c) == _norm(str(wanted))]
    if len(matches) == 1:
        return matches[0]
    raise InputError(
        f"there is no column '{wanted}' (asked for as the {what} column with {flag}); "
        f"the columns are: {_quoted(columns)}",
        source=label,
        column=str(wanted),
        value=wanted,
    )


def _pick_columns(frame, label, date_column, count_column, region_col):
    """Resolve the date and count columns, by name, by content, or as given."""
    columns = list(frame.columns)
    taken = {region_col} if region_col else set()
    if len(columns) < 2:
        raise InputError(
            f"only one column was found ('{columns[0]}'); expected a date column and a "
            "count column separated by commas, semicolons or tabs",
            source=label,
            column=columns[0],
        )
    if date_column is not None:
        dcol = _given_column(columns, date_column, "--date-column", "date", label)
    else:
        dcol = _find_column(
            frame, label, [c for c in columns if c not in taken], DATE_NAMES, _DATE_TOKENS,
            _looks_like_dates, "the dates", "--date-column",
            "date, day, week, week_start, week_ending or period",
        )
    taken.add(dcol)
    if count_column is not None:
        ccol = _given_column(columns, count_column, "--count-column", "count", label)
        if ccol == dcol:
            raise InputError(
                f"column '{ccol}' was chosen both as the date column and as the count "
                "column; give --date-column and --count-column different columns",
                source=label,
                column=ccol,
            )
    else:
        ccol = _find_column(
            frame, label, [c for c in columns if c not in taken], COUNT_NAMES, _COUNT_TOKENS,
            _looks_like_counts, "the counts", "--count-column",
            "count, cases, value, n, admissions, deaths or total",
            last_resort=True,
        )
    return dcol, ccol


def _find_column(frame, label, candidates, names, tokens, looks_right, what, flag, examples,
                 last_resort=False):
    all_columns = _quoted(list(frame.columns))

    def ambiguous(found):
        return InputError(
            f"several columns could hold {what}: {_quoted(found)}; choose one with "
            f"{flag}. The columns are: {all_columns}",
            source=label,
        )

    # 1. a header from the list; 2. a header containing one of its words whose
    # values fit; 3. the only column whose values fit; 4. the only column left.
    exact = [c for c in candidates if _norm(c) in names]
    if len(exact) == 1:
        return exact[0]
    if len(exact) > 1:
        fitting = [c for c in exact if looks_right(frame[c])]
        if len(fitting) == 1:
            return fitting[0]
        raise ambiguous(exact)
    partial = [
        c for c in candidates
        if tokens.intersection(_norm(c).split("_")) and looks_right(frame[c])
    ]
    if len(partial) == 1:
        return partial[0]
    if len(partial) > 1:
        raise ambiguous(partial)
    fitting = [c for c in candidates if looks_right(frame[c])]
    if len(fitting) == 1:
        return fitting[0]
    if len(fitting) > 1:
        raise ambiguous(fitting)
    if last_resort and len(candidates) == 1:
        return candidates[0]
    raise InputError(
        f"no column holding {what} was found; the columns are: {all_columns}. Name the "
        f"column with {flag} (a header such as {examples} is found without it)",
        source=label,
    )


def _looks_like_dates(values):
    sample = [v for v in values.head(200).tolist() if v][:20]
    return bool(sample) and all(_parse_date(v)[0] is not None for v in sample)


def _looks_like_counts(values, sep=","):
    sample = [v for v in values.head(200).tolist() if v.lower() not in _MISSING_TOKENS][:20]
    if not sample:
        return False
    for v in sample:
        try:
            _parse_count(v)
        except _CellError:
            return False
    return True


# --------------------------------------------------------------------------
# Cells


class _CellError(Exception):
    """A cell that cannot be read; the caller adds row and column."""


def _parse_date(text):
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


def _iso(day):
    return (_EPOCH + _dt.timedelta(days=int(day))).isoformat()


def _weekday(day):
    return _WEEKDAYS[(int(day) + 3) % 7]


def _parse_count(text, sep=","):
    """Read one count cell.

    Returns
    -------
    value : float or None
        None for a missing cell.
    thousands : bool
        Whether a thousands separator was removed.

    Raises
    ------
    _CellError
        With the reason, when the cell is not a usable number.
    """
    if text.lower() in _MISSING_TOKENS:
        return None, False
    thousands = False
    clean = text
    if not _PLAIN_NUMBER.match(clean):
        m = _THOUSANDS.match(clean)
        if m is not None:
            clean = m.group(1) + m.group(2).replace(m.group(3), "") + (m.group(4) or "")
            thousands = True
        elif clean.lower() in _NONFINITE_TOKENS:
            raise _CellError(
                "is not a finite number; expected a whole count such as 12, or an empty "
                "cell or NA for a missing value"
            )
        elif _DECIMAL_COMMA.match(clean):
            raise _CellError(
                "is not a whole number (a decimal comma?); expected a whole count such as "
                "12, written without a decimal part"
            )
        elif clean.startswith("#"):
            raise _CellError(
                "is a spreadsheet error value, not a number; fix the formula or leave the "
                "cell empty for a missing value"
            )
        else:
            raise _CellError(
                "is not a number; expected a whole count such as 12, or an empty cell, NA "
                "or . for a missing value"
            )
    if sep == ";" and _DOT_GROUPS.match(clean):
        raise _CellError(
            "is ambiguous in a semicolon-separated file: it could be a whole number with "
            "'.' as thousands separator or a decimal; write counts without separators "
            "(for example 1234)"
        )
    value = float(clean)
    if not math.isfinite(value) or abs(value) > MAX_COUNT:
        raise _CellError(
            f"is too large to be a count (the limit is {MAX_COUNT:.0e}); check the cell "
            "for a typing error or a value from another column"
        )
    return value, thousands


# --------------------------------------------------------------------------
# Series


def read_series(source, *, date_column=None, count_column=None, region_column=None,
                region=None, interval=None, name=None):
    """Read one count series from a file.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        Path, bytes or text of the file (see :func:`read_table`).
    date_column, count_column : str, optional
        Column names (``--date-column``, ``--count-column``). When not given
        they are found by name (case-insensitive; see :data:`DATE_NAMES` and
        :data:`COUNT_NAMES`), then by content: the only column of ISO dates,
        and the only column left for the counts.
    region_column : str, optional
        Column naming the region in a long-format file (``--region-column``);
        found by name when not given (see :func:`list_regions`).
    region : str, optional
        Region to keep (``--region``). Required when the file holds several
        regions; matched exactly, else case-insensitively.
    interval : {"day", "week"}, optional
        Force the grid instead of detecting it from the dates; dates off the
        grid are then an error.
    name : str, optional
        File label for messages and, for single-region files, the series name.

    Returns
    -------
    Series
        Regular series, ``NaN`` where missing, with one
        :class:`~inference.series.DataQualityNote` per change made:
        ``missing`` (empty / NA / . cells), ``negative`` (set to missing),
        ``fraction`` (rounded), ``thousands`` (separators removed, one note),
        ``reordered`` (rows sorted by date, one note), ``gap`` (one per run of
        absent dates), ``dropped_region``, ``blank`` and ``trailing``.

    Raises
    ------
    InputError
        For any row, column or option that cannot be used; the message names
        the file, the row (header = row 1), the column, the value and what
        was expected.
    """
    frame, label = read_table(source, name=name)
    step = _interval_days(interval)
    region_col = _region_column(frame, label, region_column)
    if region_col is None:
        if region is not None:
            raise InputError(
                f"region '{region}' was asked for (--region), but the file has no region "
                f"column; the columns are: {_quoted(list(frame.columns))}. Name the column "
                "holding the region with --region-column",
                source=label,
                value=region,
            )
        dcol, ccol = _pick_columns(frame, label, date_column, count_column, None)
        return _build(frame, label, dcol, ccol, step, label, frame.attrs["notes"])
    regions = _regions(frame, region_col, label)
    if region is None:
        if len(regions) > 1:
            raise InputError(
                f"the file holds {len(regions)} regions in this column "
                f"({_short_list(regions)}); choose one with --region (region=...), or fit "
                "them all as a batch",
                source=label,
                column=region_col,
            )
        chosen = regions[0]
    else:
        chosen = _match_region(regions, region, region_col, label)
    dcol, ccol = _pick_columns(frame, label, date_column, count_column, region_col)
    return _series_for_region(frame, label, region_col, chosen, regions, dcol, ccol, step)


def read_all_regions(source, *, region_column=None, date_column=None, count_column=None,
                     interval=None, name=None):
    """Read every region of a long-format file, for batch fits.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        Path, bytes or text of the file (see :func:`read_table`).
    region_column : str, optional
        Column naming the region; found by name when not given.
    date_column, count_column, interval, name
        As for :func:`read_series`; applied to every region.

    Returns
    -------
    dict of str to Series
        One series per region, in order of first appearance. A file without a
        region column gives one entry keyed by the file label.

    Raises
    ------
    InputError
        As for :func:`read_series`; the first region that cannot be read
        stops the batch, and the message names the rows involved.
    """
    frame, label = read_table(source, name=name)
    step = _interval_days(interval)
    region_col = _region_column(frame, label, region_column)
    if region_col is None:
        dcol, ccol = _pick_columns(frame, label, date_column, count_column, None)
        return {label: _build(frame, label, dcol, ccol, step, label, frame.attrs["notes"])}
    regions = _regions(frame, region_col, label)
    dcol, ccol = _pick_columns(frame, label, date_column, count_column, region_col)
    return {
        r: _series_for_region(frame, label, region_col, r, regions, dcol, ccol, step)
        for r in regions
    }


def _match_region(regions, region, region_col, label):
    if region in regions:
        return region
    folded = [r for r in regions if r.casefold() == str(region).strip().casefold()]
    if len(folded) == 1:
        return folded[0]
    raise InputError(
        f"region '{region}' is not in the file; the regions found in this column are: "
        f"{_short_list(regions, limit=50)}",
        source=label,
        column=region_col,
        value=region,
    )


def _series_for_region(frame, label, region_col, chosen, regions, dcol, ccol, step):
    table_notes = frame.attrs["notes"]
    mask = frame[region_col] == chosen
    extra = ()
    if len(regions) > 1:
        left = int((~mask).sum())
        extra = (
            DataQualityNote(
                None,
                None,
                "dropped_region",
                f"kept the {_plural(int(mask.sum()), 'row')} of region '{chosen}'; "
                f"{_plural(left, 'row')} of {_plural(len(regions) - 1, 'other region')} "
                "left out",
            ),
        )
    return _build(frame[mask], label, dcol, ccol, step, chosen, table_notes, extra,
                  region=chosen)


def _interval_days(interval):
    if interval is None:
        return None
    key = str(interval).strip().lower()
    if key in _INTERVALS:
        return _INTERVALS[key]
    raise InputError(
        f"interval must be 'day' or 'week' (--interval), got '{interval}'",
        source="options",
        column="interval",
        value=interval,
    )


def _build(frame, label, dcol, ccol, step, series_name, table_notes, extra_notes=(),
           region=None):
    """Turn the rows of one series into a :class:`Series`."""
    where = f" of region '{region}'" if region is not None else ""
    rows = [int(r) for r in frame.index]
    notes = list(table_notes) + list(extra_notes)
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
            day, reason = _parse_date(dtext)
            if day is None:
                why = f" ({reason})" if reason else ""
                raise InputError(
                    f"'{dtext}' is not a date{why}; expected {_EXPECTED_DATE}",
                    source=label, row=row, column=dcol, value=dtext,
                )
            date_cache[dtext] = day
        days[i] = day
        try:
            value, thousands = _parse_count(ctext, sep)
        except _CellError as exc:
            raise InputError(
                f"the count '{ctext}' {exc}", source=label, row=row, column=ccol, value=ctext,
            ) from None
        iso = _iso(day)
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

    if thousands_rows:
        notes.append(
            DataQualityNote(
                None, None, "thousands",
                f"thousands separators removed from {_plural(len(thousands_rows), 'cell')} "
                f"in column '{ccol}'{where} ({_row_list(thousands_rows)})",
            )
        )

    first_row = {}
    for row, day in zip(rows, days.tolist()):
        if day in first_row:
            raise InputError(
                f"rows {first_row[day]} and {row} both have the date {_iso(day)}{where}; "
                "each date may appear only once. Delete the repeated row, or, if the file "
                "holds several regions, name the column that tells them apart with "
                "--region-column",
                source=label, row=row, column=dcol, value=frame.at[row, dcol],
            )
        first_row[day] = row

    order = np.argsort(days, kind="stable")
    if np.any(np.diff(days) < 0):
        k = int(np.argmax(np.diff(days) < 0)) + 1
        notes.append(
            DataQualityNote(
                rows[k], _iso(days[k]), "reordered",
                f"rows were not in date order (row {rows[k]}, {_iso(days[k])}, comes after "
                f"{_iso(days[k - 1])}); sorted by date",
            )
        )
    days, values = days[order], values[order]
    rows_sorted = [rows[j] for j in order]

    step = _grid_step(days, rows_sorted, step, label, dcol, where)
    start = int(days[0])
    n = (int(days[-1]) - start) // step + 1
    if n > MAX_ROWS:
        raise InputError(
            f"the dates{where} span {_iso(days[0])} (row {rows_sorted[0]}) to "
            f"{_iso(days[-1])} (row {rows_sorted[-1]}), {n:,} {'days' if step == 1 else 'weeks'}, "
            f"more than the {MAX_ROWS:,} limit; check those dates for a typing error in the year",
            source=label, column=dcol,
        )
    grid = np.full(n, np.nan)
    pos = (days - start) // step
    grid[pos] = values
    present = np.zeros(n, dtype=bool)
    present[pos] = True

    gap_notes = []
    unit = "day" if step == 1 else "week"
    i = 0
    while i < n:
        if present[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and not present[j + 1]:
            j += 1
        a, b = start + i * step, start + j * step
        count = j - i + 1
        if count == 1:
            msg = f"1 {unit} missing on {_iso(a)}, kept as missing, not zero"
        else:
            msg = f"{count} {unit}s missing from {_iso(a)} to {_iso(b)}, kept as missing, not zero"
        gap_notes.append(DataQualityNote(None, _iso(a), "gap", msg))
        i = j + 1

    used = int(np.isfinite(grid).sum())
    if used == 0:
        raise InputError(
            f"none of the {_plural(len(rows), 'row')}{where} has a usable count (all are "
            "empty, NA or negative); expected whole counts of zero or more",
            source=label, column=ccol,
        )
    row_notes.sort(key=lambda note: note.row)
    return Series(
        np.datetime64(_iso(start), "D"),
        grid,
        step,
        series_name,
        tuple(notes + row_notes + gap_notes),
        len(rows),
        used,
    )


def _grid_step(days, rows, forced, label, dcol, where):
    """Check the sorted dates against a daily or weekly grid; return the step."""
    first = int(days[0])
    if forced is not None:
        if forced == 7:
            off = np.nonzero((days - first) % 7)[0]
            if off.size:
                k = int(off[0])
                raise InputError(
                    f"'{_iso(days[k])}' (a {_weekday(days[k])}) is not a whole number of "
                    f"weeks after the first date {_iso(first)} (a {_weekday(first)}); "
                    f"with --interval week every date must fall on a {_weekday(first)}",
                    source=label, row=rows[k], column=dcol, value=_iso(days[k]),
                )
        return forced
    if days.size < 2:
        raise InputError(
            f"the series{where} has a single date ({_iso(first)}), so it cannot tell a daily "
            "series from a weekly one; add more rows or pass --interval day or --interval week",
            source=label, row=rows[0], column=dcol, value=_iso(first),
        )
    diffs = np.diff(days)
    median = float(np.median(diffs))
    if median == 1:
        return 1
    # Weekly: every step a whole number of weeks, mostly one week (a short
    # weekly series with a gap can have a median above 7, its smallest step is 7).
    if median == 7 or (int(diffs.min()) == 7 and not np.any(diffs % 7)):
        off = np.nonzero(diffs % 7)[0]
        if off.size == 0:
            return 7
        k = int(off[0]) + 1
        raise InputError(
            f"the dates look weekly (mostly 7 days apart), but '{_iso(days[k])}' (a "
            f"{_weekday(days[k])}) is {int(diffs[k - 1])} days after the previous date "
            f"{_iso(days[k - 1])}; weekly dates must all fall on the same weekday "
            f"({_weekday(first)}, as the first date {_iso(first)})",
            source=label, row=rows[k], column=dcol, value=_iso(days[k]),
        )
    off = np.nonzero((diffs != 1) & (diffs != 7))[0]
    if off.size == 0:  # a mix of 1- and 7-day steps
        off = np.nonzero(diffs != diffs[0])[0]
    k = int(off[0]) + 1
    looks = " (they look monthly)" if 28 <= median <= 31 else ""
    raise InputError(
        f"the dates are {median:g} days apart in the middle of the series{looks}; expected "
        f"daily dates (1 day apart) or weekly dates (7 days apart, on the same weekday). "
        f"'{_iso(days[k])}' is {int(diffs[k - 1])} days after the previous date "
        f"{_iso(days[k - 1])}. If the series is daily or weekly with many missing dates, "
        "pass --interval day or --interval week",
        source=label, row=rows[k], column=dcol, value=_iso(days[k]),
    )


# --------------------------------------------------------------------------
# Wording helpers


def _norm(name):
    return re.sub(r"[\s.\-/]+", "_", str(name).strip().lower()).strip("_")


def _quoted(names):
    return ", ".join(f"'{n}'" for n in names)


def _short_list(items, limit=20):
    shown = _quoted(items[:limit])
    if len(items) > limit:
        shown += f" and {len(items) - limit} more"
    return shown


def _row_list(rows, limit=10):
    shown = ", ".join(str(r) for r in rows[:limit])
    if len(rows) > limit:
        shown += f" and {len(rows) - limit} more"
    return ("row " if len(rows) == 1 else "rows ") + shown


def _plural(n, word):
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def _column_letter(i):
    letters = ""
    i += 1
    while i:
        i, r = divmod(i - 1, 26)
        letters = chr(65 + r) + letters
    return letters
