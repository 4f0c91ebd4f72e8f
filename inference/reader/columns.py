"""Finding the date, count and region columns, by name, by content or as given."""

from __future__ import annotations

from ..errors import InputError
from .values import MISSING_TOKENS, CellError, parse_count, parse_date
from .wording import normalised, quote_list

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


def find_region_column(frame, label, region_column):
    columns = list(frame.columns)
    if region_column is not None:
        return _given_column(columns, region_column, "--region-column", "region", label)
    if len(columns) < 3:
        return None
    found = [c for c in columns if normalised(c) in REGION_NAMES]
    if len(found) > 1:
        raise InputError(
            f"several columns could name the region: {quote_list(found)}; choose one with "
            f"--region-column. The columns are: {quote_list(columns)}",
            source=label,
        )
    return found[0] if found else None


def region_names(frame, col, label):
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
    matches = [c for c in columns if normalised(c) == normalised(str(wanted))]
    if len(matches) == 1:
        return matches[0]
    raise InputError(
        f"there is no column '{wanted}' (asked for as the {what} column with {flag}); "
        f"the columns are: {quote_list(columns)}",
        source=label,
        column=str(wanted),
        value=wanted,
    )


def pick_columns(frame, label, date_column, count_column, region_col):
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
    all_columns = quote_list(list(frame.columns))

    def ambiguous(found):
        return InputError(
            f"several columns could hold {what}: {quote_list(found)}; choose one with "
            f"{flag}. The columns are: {all_columns}",
            source=label,
        )

    # 1. a header from the list; 2. a header containing one of its words whose
    # values fit; 3. the only column whose values fit; 4. the only column left.
    exact = [c for c in candidates if normalised(c) in names]
    if len(exact) == 1:
        return exact[0]
    if len(exact) > 1:
        fitting = [c for c in exact if looks_right(frame[c])]
        if len(fitting) == 1:
            return fitting[0]
        raise ambiguous(exact)
    partial = [
        c for c in candidates
        if tokens.intersection(normalised(c).split("_")) and looks_right(frame[c])
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
    return bool(sample) and all(parse_date(v)[0] is not None for v in sample)


def _looks_like_counts(values, sep=","):
    sample = [v for v in values.head(200).tolist() if v.lower() not in MISSING_TOKENS][:20]
    if not sample:
        return False
    for v in sample:
        try:
            parse_count(v)
        except CellError:
            return False
    return True
