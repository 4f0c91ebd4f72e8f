"""Reading whole series: :func:`read_series`, :func:`read_all_regions`, :func:`list_regions`.

Puts the other modules together: the table, the columns, the region chosen
from a long-format file, the cells, the grid, and the notes of every change.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..series import DataQualityNote, Series
from .columns import pick_columns, find_region_column, region_names
from .grid import (
    check_unique_dates,
    describe_gaps,
    grid_step,
    interval_step,
    place_on_grid,
    sort_by_date,
)
from .table import read_table
from .values import iso_text, read_cells
from .wording import plural, quote_list, row_list, short_list


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
    col = find_region_column(frame, label, region_column)
    if col is None:
        return []
    return region_names(frame, col, label)


def series_column(source, *, region_column=None, name=None):
    """The column that names the series (region) of a long-format file, or None.

    ``region_column`` is checked when given; otherwise the column is found
    by name as in :func:`list_regions`.
    """
    frame, label = read_table(source, name=name)
    return find_region_column(frame, label, region_column)


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
    step = interval_step(interval)
    region_col = find_region_column(frame, label, region_column)
    if region_col is None:
        if region is not None:
            raise InputError(
                f"region '{region}' was asked for (--region), but the file has no region "
                f"column; the columns are: {quote_list(list(frame.columns))}. Name the column "
                "holding the region with --region-column",
                source=label,
                value=region,
            )
        dcol, ccol = pick_columns(frame, label, date_column, count_column, None)
        return _build(frame, label, dcol, ccol, step, label, frame.attrs["notes"])
    regions = region_names(frame, region_col, label)
    if region is None:
        if len(regions) > 1:
            raise InputError(
                f"the file holds {len(regions)} regions in this column "
                f"({short_list(regions)}); choose one with --region (region=...), or fit "
                "them all as a batch",
                source=label,
                column=region_col,
            )
        chosen = regions[0]
    else:
        chosen = _match_region(regions, region, region_col, label)
    dcol, ccol = pick_columns(frame, label, date_column, count_column, region_col)
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
    step = interval_step(interval)
    region_col = find_region_column(frame, label, region_column)
    if region_col is None:
        dcol, ccol = pick_columns(frame, label, date_column, count_column, None)
        return {label: _build(frame, label, dcol, ccol, step, label, frame.attrs["notes"])}
    regions = region_names(frame, region_col, label)
    dcol, ccol = pick_columns(frame, label, date_column, count_column, region_col)
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
        f"{short_list(regions, limit=50)}",
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
                f"kept the {plural(int(mask.sum()), 'row')} of region '{chosen}'; "
                f"{plural(left, 'row')} of {plural(len(regions) - 1, 'other region')} "
                "left out",
            ),
        )
    return _build(frame[mask], label, dcol, ccol, step, chosen, table_notes, extra,
                  region=chosen)


def _build(frame, label, dcol, ccol, step, series_name, table_notes, extra_notes=(),
           region=None):
    """Turn the rows of one series into a :class:`Series`."""
    where = f" of region '{region}'" if region is not None else ""
    notes = list(table_notes) + list(extra_notes)
    rows, days, values, row_notes, thousands_rows = read_cells(frame, label, dcol, ccol)

    if thousands_rows:
        notes.append(
            DataQualityNote(
                None, None, "thousands",
                f"thousands separators removed from {plural(len(thousands_rows), 'cell')} "
                f"in column '{ccol}'{where} ({row_list(thousands_rows)})",
            )
        )

    check_unique_dates(frame, rows, days, label, dcol, where)
    days, values, rows_sorted, reordered = sort_by_date(rows, days, values)
    if reordered is not None:
        notes.append(reordered)

    step = grid_step(days, rows_sorted, step, label, dcol, where)
    start, grid, present = place_on_grid(days, values, rows_sorted, step, label, dcol, where)
    gap_notes = describe_gaps(present, start, step)

    used = int(np.isfinite(grid).sum())
    if used == 0:
        raise InputError(
            f"none of the {plural(len(rows), 'row')}{where} has a usable count (all are "
            "empty, NA or negative); expected whole counts of zero or more",
            source=label, column=ccol,
        )
    row_notes.sort(key=lambda note: note.row)
    return Series(
        np.datetime64(iso_text(start), "D"),
        grid,
        step,
        series_name,
        tuple(notes + row_notes + gap_notes),
        len(rows),
        used,
    )
