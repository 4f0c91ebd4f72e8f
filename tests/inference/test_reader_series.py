"""Tests for inference.reader: from cells to a series.

Date order and duplicates, the interval, gaps, long-format files with regions,
and the data-quality notes; one test per reading rule, on small invented files.
"""

import numpy as np

from bendline.inference.reader import list_regions, read_all_regions, read_series
from bendline.inference.series import NOTE_KINDS, DataQualityNote, Series

from .reader_helpers import DAILY, error_of, kinds, notes_of


# --------------------------------------------------------------------------
# Order and duplicates


def test_duplicate_date_error_names_both_rows():
    text = "date,count\n2026-01-01,3\n2026-01-02,4\n2026-01-01,5\n"
    e = error_of(read_series, text, name="toy.csv")
    assert e.row == 4
    msg = str(e)
    assert "rows 2 and 4 both have the date 2026-01-01" in msg
    assert "column 'date'" in msg


def test_rows_out_of_order_sorted_with_one_note():
    s = read_series("date,count\n2026-01-03,3\n2026-01-01,1\n2026-01-02,2\n")
    assert s.values.tolist() == [1.0, 2.0, 3.0]
    (note,) = notes_of(s, "reordered")
    assert note.row == 3
    assert "not in date order" in note.message and "row 3" in note.message


# --------------------------------------------------------------------------
# Interval


def test_daily_detected():
    s = read_series(DAILY)
    assert s.interval_days == 1
    assert str(s.end) == "2026-01-03"


def test_weekly_detected():
    s = read_series("week,count\n2026-01-05,3\n2026-01-12,5\n2026-01-19,4\n2026-01-26,6\n")
    assert s.interval_days == 7
    assert s.n == 4
    assert s.notes == ()


def test_monthly_rejected_naming_first_offending_row():
    e = error_of(read_series, "date,count\n2026-01-01,3\n2026-02-01,5\n2026-03-01,4\n")
    assert (e.row, e.column, e.value) == (3, "date", "2026-02-01")
    msg = str(e)
    assert "look monthly" in msg
    assert "daily dates (1 day apart) or weekly dates (7 days apart" in msg


def test_weekly_dates_on_varying_weekdays_rejected():
    text = "date,count\n2026-01-05,3\n2026-01-12,5\n2026-01-19,4\n2026-01-27,6\n2026-02-02,2\n"
    e = error_of(read_series, text)
    assert (e.row, e.value) == (5, "2026-01-27")
    assert "a Tuesday" in str(e)
    assert "same weekday" in str(e)
    assert "Monday" in str(e)


def test_forced_week_rejects_dates_off_the_grid():
    e = error_of(read_series, "date,count\n2026-01-05,3\n2026-01-06,5\n", interval="week")
    assert (e.row, e.column) == (3, "date")
    assert "'2026-01-06' (a Tuesday)" in str(e)
    assert "--interval week" in str(e)


def test_forced_day_accepts_sparse_dates_as_gaps():
    s = read_series("date,count\n2026-01-01,3\n2026-01-04,5\n2026-01-07,4\n", interval="day")
    assert s.interval_days == 1
    assert s.n == 7
    assert len(notes_of(s, "gap")) == 2


def test_bad_interval_option_and_single_date():
    e = error_of(read_series, DAILY, interval="month")
    assert e.column == "interval"
    assert "'day' or 'week'" in str(e) and "'month'" in str(e)
    e = error_of(read_series, "date,count\n2026-01-01,3\n")
    assert e.row == 2
    assert "single date (2026-01-01)" in str(e)
    assert "--interval" in str(e)
    assert read_series("date,count\n2026-01-01,3\n", interval="week").interval_days == 7


# --------------------------------------------------------------------------
# Gaps


def test_gap_notes_one_per_run_with_counts():
    text = (
        "date,count\n2026-02-01,1\n2026-02-02,2\n2026-02-06,3\n2026-02-07,4\n"
        "2026-02-09,5\n2026-02-10,6\n2026-02-11,7\n"
    )
    s = read_series(text)
    assert s.n == 11
    assert np.isnan(s.values[[2, 3, 4, 7]]).all()
    gaps = notes_of(s, "gap")
    assert [g.message for g in gaps] == [
        "3 days missing from 2026-02-03 to 2026-02-05, kept as missing, not zero",
        "1 day missing on 2026-02-08, kept as missing, not zero",
    ]
    assert [g.date for g in gaps] == ["2026-02-03", "2026-02-08"]
    assert (s.rows_read, s.rows_used) == (7, 7)


def test_weekly_gap_note():
    s = read_series("date,count\n2026-01-05,3\n2026-01-12,5\n2026-02-02,4\n")
    assert s.interval_days == 7
    (gap,) = notes_of(s, "gap")
    assert gap.message == (
        "2 weeks missing from 2026-01-19 to 2026-01-26, kept as missing, not zero"
    )


# --------------------------------------------------------------------------
# Long format


LONG = (
    "region,date,count\n"
    "North,2026-01-01,3\nSouth,2026-01-01,7\n"
    "North,2026-01-02,4\nSouth,2026-01-02,8\n"
    "North,2026-01-03,5\nSouth,2026-01-03,9\n"
)


def test_list_regions():
    assert list_regions(LONG) == ["North", "South"]
    assert list_regions(DAILY) == []
    assert list_regions(LONG.replace("region,", "Zone,")) == ["North", "South"]


def test_several_regions_without_choice_error():
    e = error_of(read_series, LONG, name="long.csv")
    assert e.column == "region"
    msg = str(e)
    assert "long.csv" in msg
    assert "2 regions" in msg and "'North', 'South'" in msg
    assert "--region" in msg


def test_region_is_picked_with_dropped_region_note():
    s = read_series(LONG, region="South")
    assert s.name == "South"
    assert s.values.tolist() == [7.0, 8.0, 9.0]
    assert (s.rows_read, s.rows_used) == (3, 3)
    (note,) = notes_of(s, "dropped_region")
    assert "3 rows of region 'South'" in note.message
    assert "3 rows of 1 other region" in note.message


def test_unknown_region_error_lists_known_ones():
    e = error_of(read_series, LONG, region="East")
    assert (e.column, e.value) == ("region", "East")
    assert "region 'East' is not in the file" in str(e)
    assert "'North', 'South'" in str(e)


def test_single_region_file_just_works():
    text = "site,date,count\nAlpha,2026-01-01,3\nAlpha,2026-01-02,4\n"
    s = read_series(text)
    assert s.name == "Alpha"
    assert s.values.tolist() == [3.0, 4.0]
    assert "dropped_region" not in kinds(s)


def test_region_without_region_column_error():
    e = error_of(read_series, DAILY, region="North")
    assert e.value == "North"
    assert "no region column" in str(e)
    assert "'date', 'count'" in str(e)
    assert "--region-column" in str(e)


def test_explicit_region_column_and_empty_region_cell():
    text = "ward,date,count\nA,2026-01-01,3\nB,2026-01-01,4\nA,2026-01-02,5\nB,2026-01-02,6\n"
    assert list_regions(text) == []
    assert list_regions(text, region_column="ward") == ["A", "B"]
    assert read_series(text, region_column="ward", region="B").values.tolist() == [4.0, 6.0]
    e = error_of(read_series, text)  # the unnamed region column makes dates repeat
    assert "rows 2 and 3 both have the date 2026-01-01" in str(e)
    assert "--region-column" in str(e)
    e = error_of(list_regions, LONG + ",2026-01-04,1\n")
    assert (e.row, e.column) == (8, "region")
    assert "the region is empty" in str(e)


def test_ambiguous_region_column_error():
    text = "region,site,date,count\nA,x,2026-01-01,3\nA,x,2026-01-02,4\n"
    e = error_of(read_series, text)
    assert "several columns could name the region: 'region', 'site'" in str(e)
    assert "--region-column" in str(e)
    assert read_series(text, region_column="site").name == "x"


def test_duplicate_date_within_a_region_names_region():
    text = LONG + "South,2026-01-02,1\n"
    e = error_of(read_series, text, region="South")
    assert "rows 5 and 8 both have the date 2026-01-02 of region 'South'" in str(e)


def test_read_all_regions():
    series = read_all_regions(LONG)
    assert list(series) == ["North", "South"]
    assert series["North"].values.tolist() == [3.0, 4.0, 5.0]
    assert all(isinstance(s, Series) for s in series.values())
    single = read_all_regions(DAILY, name="toy.csv")
    assert list(single) == ["toy.csv"]
    assert single["toy.csv"].values.tolist() == [3.0, 5.0, 4.0]


# --------------------------------------------------------------------------
# Notes


def test_notes_are_dataquality_notes_with_known_kinds_and_file_rows():
    text = (
        "\ufeffdate,count\r\n2026-01-02,\r\n2026-01-01,3.5\r\n"
        '2026-01-05,-1\r\n2026-01-06,"1,000"\r\n\r\n'
    )
    s = read_series(text)
    assert all(isinstance(n, DataQualityNote) for n in s.notes)
    assert set(kinds(s)) <= NOTE_KINDS
    assert set(kinds(s)) == {
        "missing", "fraction", "negative", "thousands", "reordered", "gap", "trailing"
    }
    by_kind = {n.kind: n for n in s.notes}
    assert by_kind["missing"].row == 2
    assert by_kind["fraction"].row == 3
    assert by_kind["negative"].row == 4
    assert by_kind["trailing"].row == 6
    assert by_kind["gap"].row is None
    assert s.to_dict()["notes"][0]["kind"] in NOTE_KINDS
