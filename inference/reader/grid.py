"""The daily or weekly grid: interval, duplicate dates, date order and gaps.

The grid runs from the first to the last date in steps of one day or one week;
a date absent from the file is a gap (kept as missing, never zero, and noted),
a date off the grid or repeated is an error.
"""

from __future__ import annotations

import numpy as np

from . import limits  # looked up at call time, so rebinding a limit takes effect
from ..errors import InputError
from ..series import DataQualityNote
from .values import iso_text, weekday_label

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


def interval_step(interval):
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


def check_unique_dates(frame, rows, days, label, dcol, where):
    """Raise when two rows have the same date."""
    first_row = {}
    for row, day in zip(rows, days.tolist()):
        if day in first_row:
            raise InputError(
                f"rows {first_row[day]} and {row} both have the date {iso_text(day)}{where}; "
                "each date may appear only once. Delete the repeated row, or, if the file "
                "holds several regions, name the column that tells them apart with "
                "--region-column",
                source=label, row=row, column=dcol, value=frame.at[row, dcol],
            )
        first_row[day] = row


def sort_by_date(rows, days, values):
    """Sort the rows by date (stable).

    Returns the sorted days, values and rows, and a ``reordered`` note when
    the file was not in date order (else None).
    """
    order = np.argsort(days, kind="stable")
    note = None
    if np.any(np.diff(days) < 0):
        k = int(np.argmax(np.diff(days) < 0)) + 1
        note = DataQualityNote(
            rows[k], iso_text(days[k]), "reordered",
            f"rows were not in date order (row {rows[k]}, {iso_text(days[k])}, comes after "
            f"{iso_text(days[k - 1])}); sorted by date",
        )
    return days[order], values[order], [rows[j] for j in order], note


def grid_step(days, rows, forced, label, dcol, where):
    """Check the sorted dates against a daily or weekly grid; return the step."""
    first = int(days[0])
    if forced is not None:
        if forced == 7:
            off = np.nonzero((days - first) % 7)[0]
            if off.size:
                k = int(off[0])
                raise InputError(
                    f"'{iso_text(days[k])}' (a {weekday_label(days[k])}) is not a whole number of "
                    f"weeks after the first date {iso_text(first)} (a {weekday_label(first)}); "
                    f"with --interval week every date must fall on a {weekday_label(first)}",
                    source=label, row=rows[k], column=dcol, value=iso_text(days[k]),
                )
        return forced
    if days.size < 2:
        raise InputError(
            f"the series{where} has a single date ({iso_text(first)}), so it cannot tell a daily "
            "series from a weekly one; add more rows or pass --interval day or --interval week",
            source=label, row=rows[0], column=dcol, value=iso_text(first),
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
            f"the dates look weekly (mostly 7 days apart), but '{iso_text(days[k])}' (a "
            f"{weekday_label(days[k])}) is {int(diffs[k - 1])} days after the previous date "
            f"{iso_text(days[k - 1])}; weekly dates must all fall on the same weekday "
            f"({weekday_label(first)}, as the first date {iso_text(first)})",
            source=label, row=rows[k], column=dcol, value=iso_text(days[k]),
        )
    off = np.nonzero((diffs != 1) & (diffs != 7))[0]
    if off.size == 0:  # a mix of 1- and 7-day steps
        off = np.nonzero(diffs != diffs[0])[0]
    k = int(off[0]) + 1
    looks = " (they look monthly)" if 28 <= median <= 31 else ""
    raise InputError(
        f"the dates are {median:g} days apart in the middle of the series{looks}; expected "
        f"daily dates (1 day apart) or weekly dates (7 days apart, on the same weekday). "
        f"'{iso_text(days[k])}' is {int(diffs[k - 1])} days after the previous date "
        f"{iso_text(days[k - 1])}. If the series is daily or weekly with many missing dates, "
        "pass --interval day or --interval week",
        source=label, row=rows[k], column=dcol, value=iso_text(days[k]),
    )


def place_on_grid(days, values, rows, step, label, dcol, where):
    """Put the sorted values on the grid from the first date, ``NaN`` where absent.

    Returns the first day, the grid of values and a mask of the grid points
    that have a row.
    """
    start = int(days[0])
    n = (int(days[-1]) - start) // step + 1
    if n > limits.MAX_ROWS:
        raise InputError(
            f"the dates{where} span {iso_text(days[0])} (row {rows[0]}) to "
            f"{iso_text(days[-1])} (row {rows[-1]}), {n:,} {'days' if step == 1 else 'weeks'}, "
            f"more than the {limits.MAX_ROWS:,} limit; check those dates for a typing error in "
            "the year",
            source=label, column=dcol,
        )
    grid = np.full(n, np.nan)
    pos = (days - start) // step
    grid[pos] = values
    present = np.zeros(n, dtype=bool)
    present[pos] = True
    return start, grid, present


def describe_gaps(present, start, step):
    """One ``gap`` note per run of grid points without a row."""
    n = len(present)
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
            msg = f"1 {unit} missing on {iso_text(a)}, kept as missing, not zero"
        else:
            msg = f"{count} {unit}s missing from {iso_text(a)} to {iso_text(b)}, kept as missing, not zero"
        gap_notes.append(DataQualityNote(None, iso_text(a), "gap", msg))
        i = j + 1
    return gap_notes
