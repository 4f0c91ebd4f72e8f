"""The table of cells: separator, header, rows as a spreadsheet numbers them.

:func:`read_table` sniffs the separator (comma, semicolon or tab), splits the
text into cells, finds the header row, pads or checks each row against it,
skips empty rows (with notes) and enforces :data:`inference.reader.MAX_ROWS`.
"""

from __future__ import annotations

import csv
import io

import pandas as pd

from . import limits  # looked up at call time, so rebinding a limit takes effect
from ..errors import InputError
from ..series import DataQualityNote
from .text import SEPARATORS, load_text
from .values import parse_date
from .wording import column_letter, normalised, plural, row_list

_SEPARATOR_NAMES = {",": "comma", ";": "semicolon", "\t": "tab"}


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
    text, label = load_text(source, name)
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
        if len(data) > limits.MAX_ROWS:
            raise InputError(
                f"the file has more than {limits.MAX_ROWS:,} data rows (the limit); "
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
                f"{plural(len(inner), 'empty row')} between data rows skipped "
                f"({row_list(inner)})",
            )
        )
    if trailing:
        notes.append(
            DataQualityNote(
                trailing[0],
                None,
                "trailing",
                f"{plural(len(trailing), 'empty row')} at the end of the file ignored "
                f"({row_list(trailing)})",
            )
        )
    frame.attrs.update(
        {"separator": sep, "header_row": header_row, "source": label, "notes": tuple(notes)}
    )
    return frame, label


def _sniff(text):
    """Pick the separator (comma, semicolon or tab) that splits the header
    into the most cells and the rows most consistently."""
    sample = text[:65536]
    truncated = len(text) > len(sample)
    best, best_key = ",", (-1.0, 0)
    for sep in SEPARATORS:
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
        if parse_date(cell)[0] is not None:
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
            names.append(f"column {column_letter(i)}")
        else:
            names.append(None)
    seen = {}
    for i, n in enumerate(names):
        if n is None:
            continue
        key = normalised(n)
        if key in seen:
            j = seen[key]
            raise InputError(
                f"two columns have the same name: '{names[j]}' (column "
                f"{column_letter(j)}) and '{n}' (column {column_letter(i)}); "
                "give each column a different name",
                source=label,
                row=header_row,
                column=n,
                value=n,
            )
        seen[key] = i
    return names
