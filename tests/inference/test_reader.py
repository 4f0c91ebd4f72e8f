"""Tests for inference.reader: one test per reading rule, on small invented files."""

import numpy as np
import pytest

from inference import reader
from inference.errors import InputError
from inference.reader import list_regions, read_all_regions, read_series, read_table
from inference.series import NOTE_KINDS, DataQualityNote, Series


def error_of(func, *args, **kwargs):
    """Call ``func`` and return the InputError it raises."""
    with pytest.raises(InputError) as info:
        func(*args, **kwargs)
    return info.value


def kinds(series):
    return [n.kind for n in series.notes]


def notes_of(series, kind):
    return [n for n in series.notes if n.kind == kind]


DAILY = "date,count\n2026-01-01,3\n2026-01-02,5\n2026-01-03,4\n"


# --------------------------------------------------------------------------
# read_table: separators, encodings, line ends, quoting


def test_comma_file_reads_as_strings_with_spreadsheet_rows():
    table, label = read_table(DAILY, name="toy.csv")
    assert label == "toy.csv"
    assert list(table.columns) == ["date", "count"]
    assert list(table.index) == [2, 3, 4]
    assert table.loc[3, "count"] == "5"
    assert table.attrs["separator"] == ","


def test_semicolon_file():
    table, _ = read_table("date;count\n2026-01-01;3\n2026-01-02;5\n")
    assert table.attrs["separator"] == ";"
    assert list(table.columns) == ["date", "count"]
    s = read_series("date;count\n2026-01-01;3\n2026-01-02;5\n")
    assert s.values.tolist() == [3.0, 5.0]


def test_tab_file():
    text = "date\tcount\n2026-01-01\t3\n2026-01-02\t5\n"
    table, _ = read_table(text)
    assert table.attrs["separator"] == "\t"
    assert read_series(text).values.tolist() == [3.0, 5.0]


def test_utf8_bom_is_removed_from_bytes_and_text():
    data = "\ufeffdate,count\n2026-01-01,3\n2026-01-02,5\n"
    for source in (data.encode("utf-8"), data):
        table, _ = read_table(source)
        assert list(table.columns) == ["date", "count"]
        assert read_series(source).values.tolist() == [3.0, 5.0]


def test_crlf_line_ends():
    data = b"date,count\r\n2026-01-01,3\r\n2026-01-02,5\r\n"
    s = read_series(data)
    assert s.values.tolist() == [3.0, 5.0]
    assert s.notes == ()


def test_quoted_fields_keep_commas():
    text = 'site,date,count\n"North, upper",2026-01-01,"1,200"\n"North, upper",2026-01-02,7\n'
    assert list_regions(text) == ["North, upper"]
    s = read_series(text)
    assert s.values.tolist() == [1200.0, 7.0]
    assert s.name == "North, upper"


def test_path_source_uses_file_name_as_label(tmp_path):
    path = tmp_path / "toy_counts.csv"
    path.write_text(DAILY)
    for source in (path, str(path)):
        s = read_series(source)
        assert s.name == "toy_counts.csv"
        assert s.values.tolist() == [3.0, 5.0, 4.0]


def test_missing_path_error_names_the_path(tmp_path):
    missing = str(tmp_path / "nope.csv")
    e = error_of(read_table, missing)
    assert "file not found" in str(e)
    assert "nope.csv" in str(e)


def test_empty_file_error():
    for source in ("", b""):
        e = error_of(read_table, source, name="toy.csv")
        assert str(e).startswith("toy.csv: the file is empty")
        assert "header row" in str(e)


def test_only_blank_lines_error():
    e = error_of(read_table, "\n\n  \r\n", name="toy.csv")
    assert "toy.csv" in str(e)
    assert "only blank lines" in str(e)


def test_header_only_error_names_the_header():
    e = error_of(read_table, "date,count\n\n", name="toy.csv")
    assert "toy.csv" in str(e)
    assert "header (date, count) but no data rows" in str(e)


def test_binary_files_rejected():
    e = error_of(read_table, b"PK\x03\x04\x14\x00\x06\x00rest", name="book.xlsx")
    assert "book.xlsx" in str(e)
    assert "Excel workbook" in str(e)
    assert "CSV UTF-8" in str(e)
    e = error_of(read_table, b"date,count\n\x00\x01\x02\xff\x00", name="blob.bin")
    assert "blob.bin" in str(e)
    assert "not text" in str(e)


def test_wrong_encoding_rejected_with_row():
    data = "date,site,count\n2026-01-01,Caf\u00e9,3\n".encode("latin-1")
    e = error_of(read_table, data, name="toy.csv")
    assert e.row == 2
    assert "toy.csv, row 2" in str(e)
    assert "not UTF-8" in str(e)
    assert "0xe9" in str(e)


def test_utf16_rejected():
    data = "date,count\n2026-01-01,3\n".encode("utf-16")
    e = error_of(read_table, data, name="toy.csv")
    assert "UTF-16" in str(e)
    assert "CSV UTF-8" in str(e)


def test_blank_rows_are_skipped_with_notes_and_rows_keep_file_numbers():
    text = "date,count\n2026-01-01,3\n\n2026-01-02,5\n,\n\n"
    table, _ = read_table(text)
    assert list(table.index) == [2, 4]
    s = read_series(text)
    (blank,) = notes_of(s, "blank")
    assert blank.row == 3
    assert "row 3" in blank.message
    (trailing,) = notes_of(s, "trailing")
    assert "rows 5, 6" in trailing.message
    assert s.rows_read == 2


def test_row_with_extra_cells_error():
    e = error_of(read_table, "date,count\n2026-01-01,3\n2026-01-02,1,234\n", name="toy.csv")
    assert e.row == 3
    assert "toy.csv, row 3" in str(e)
    assert "3 cells but the header (row 1) has 2" in str(e)
    assert "'234'" in str(e)


def test_unclosed_quote_error():
    e = error_of(read_table, 'date,count\n2026-01-01,3\n2026-01-02,"5\n2026-01-03,4\n')
    assert e.row == 3
    assert "row 3" in str(e)
    assert "never closed" in str(e)


def test_header_that_is_data_error():
    e = error_of(read_table, "2026-01-01,3\n2026-01-02,5\n")
    assert "row 1" in str(e)
    assert "'2026-01-01'" in str(e)
    assert "not a header" in str(e)


def test_duplicate_column_names_error():
    e = error_of(read_table, "date,count,Count\n2026-01-01,3,4\n")
    assert "row 1" in str(e)
    assert "'count' (column B) and 'Count' (column C)" in str(e)


def test_file_size_limit(monkeypatch):
    monkeypatch.setattr(reader, "MAX_BYTES", 1024 * 1024)
    big = ("date,count\n" + "2026-01-01,3\n" * 90_000).encode()
    e = error_of(read_table, big, name="big.csv")
    assert "big.csv" in str(e)
    assert f"{len(big):,} bytes" in str(e)
    assert "the limit is 1 MB" in str(e)


def test_row_limit(monkeypatch):
    monkeypatch.setattr(reader, "MAX_ROWS", 3)
    text = "date,count\n" + "".join(f"2026-01-0{d},1\n" for d in range(1, 6))
    e = error_of(read_table, text, name="toy.csv")
    assert "more than 3 data rows" in str(e)
    assert "row 5" in str(e)


# --------------------------------------------------------------------------
# Finding the columns


def test_two_column_file_with_odd_headers_is_found_by_content():
    s = read_series("when,how_many\n2026-01-01,3\n2026-01-02,5\n")
    assert str(s.start) == "2026-01-01"
    assert s.values.tolist() == [3.0, 5.0]


def test_column_names_are_case_insensitive():
    s = read_series("Week Start,CASES\n2026-01-05,3\n2026-01-12,5\n")
    assert s.interval_days == 7
    assert s.values.tolist() == [3.0, 5.0]


def test_ambiguous_date_columns_error():
    e = error_of(read_series, "date,report_date,count\n2026-01-01,2026-01-03,3\n")
    msg = str(e)
    assert "several columns could hold the dates: 'date', 'report_date'" in msg
    assert "--date-column" in msg
    assert "'count'" in msg


def test_ambiguous_count_columns_error():
    e = error_of(read_series, "date,cases,deaths\n2026-01-01,3,1\n2026-01-02,4,0\n")
    msg = str(e)
    assert "several columns could hold the counts: 'cases', 'deaths'" in msg
    assert "--count-column" in msg


def test_absent_date_column_error_lists_columns():
    e = error_of(read_series, "alpha,beta,gamma\nx,1,2\n", name="toy.csv")
    msg = str(e)
    assert msg.startswith("toy.csv:")
    assert "no column holding the dates" in msg
    assert "'alpha', 'beta', 'gamma'" in msg
    assert "--date-column" in msg


def test_absent_count_column_error_lists_columns():
    e = error_of(read_series, "date,comment,source\n2026-01-01,ok,lab\n")
    msg = str(e)
    assert "no column holding the counts" in msg
    assert "'date', 'comment', 'source'" in msg
    assert "--count-column" in msg


def test_given_columns_are_used_and_unknown_ones_rejected():
    text = "date,cases,deaths\n2026-01-01,3,1\n2026-01-02,4,0\n"
    assert read_series(text, count_column="deaths").values.tolist() == [1.0, 0.0]
    e = error_of(read_series, text, count_column="hospital")
    assert e.column == "hospital"
    assert "no column 'hospital'" in str(e)
    assert "--count-column" in str(e)
    assert "'date', 'cases', 'deaths'" in str(e)


# --------------------------------------------------------------------------
# Dates


def test_unparseable_date_names_row_value_and_expected_form():
    e = error_of(read_series, "date,count\n2026-01-01,3\n2026-01-02,4\nsoon,5\n", name="toy.csv")
    assert (e.row, e.column, e.value) == (4, "date", "soon")
    msg = str(e)
    assert msg.startswith("toy.csv, row 4, column 'date': 'soon' is not a date")
    assert "YYYY-MM-DD" in msg


def test_day_first_date_gets_a_hint():
    e = error_of(read_series, "date,count\n01/02/2026,3\n")
    assert e.row == 2
    assert "'01/02/2026'" in str(e)
    assert "day/month/year" in str(e)


def test_impossible_and_empty_dates():
    e = error_of(read_series, "date,count\n2026-02-28,3\n2026-02-30,4\n")
    assert e.row == 3
    assert "'2026-02-30'" in str(e)
    assert "no day 30 in month 2" in str(e)
    e = error_of(read_series, "date,count\n2026-02-28,3\n,4\n")
    assert (e.row, e.column) == (3, "date")
    assert "the date is empty" in str(e)


def test_slash_dates_and_midnight_datetimes_accepted():
    text = (
        "date,count\n2026/01/01,1\n2026-01-02T00:00:00,2\n"
        "2026-01-03 00:00,3\n2026-01-04T00:00:00Z,4\n"
    )
    s = read_series(text)
    assert str(s.start) == "2026-01-01"
    assert s.values.tolist() == [1.0, 2.0, 3.0, 4.0]


def test_datetime_with_a_time_of_day_rejected():
    e = error_of(read_series, "date,count\n2026-01-01,1\n2026-01-02T14:30:00,2\n")
    assert e.row == 3
    assert "'2026-01-02T14:30:00'" in str(e)
    assert "time of day" in str(e)


# --------------------------------------------------------------------------
# Counts


def test_integer_and_point_zero_counts():
    s = read_series("date,count\n2026-01-01,3\n2026-01-02,5.0\n2026-01-03,0\n")
    assert s.values.tolist() == [3.0, 5.0, 0.0]
    assert s.notes == ()


def test_thousands_separators_one_note_with_cell_count():
    text = "date;count\n2026-01-01;1,234\n2026-01-02;2 345\n2026-01-03;3'456\n2026-01-04;12\n"
    s = read_series(text)
    assert s.values.tolist() == [1234.0, 2345.0, 3456.0, 12.0]
    (note,) = notes_of(s, "thousands")
    assert note.row is None
    assert "3 cells" in note.message
    assert "'count'" in note.message
    assert "rows 2, 3, 4" in note.message


def test_tab_file_with_comma_thousands():
    s = read_series("date\tcases\n2026-01-01\t1,500\n2026-01-02\t20\n")
    assert s.values.tolist() == [1500.0, 20.0]
    assert "1 cell" in notes_of(s, "thousands")[0].message


def test_missing_cells_note_per_row():
    text = "date,count\n2026-01-01,3\n2026-01-02,\n2026-01-03,NA\n2026-01-04,.\n2026-01-05,4\n"
    s = read_series(text)
    assert np.isnan(s.values[1:4]).all()
    missing = notes_of(s, "missing")
    assert [n.row for n in missing] == [3, 4, 5]
    assert [n.date for n in missing] == ["2026-01-02", "2026-01-03", "2026-01-04"]
    assert "row 3 (2026-01-02): empty count" in missing[0].message
    assert "'NA'" in missing[1].message
    assert (s.rows_read, s.rows_used) == (5, 2)


def test_non_numeric_count_error():
    e = error_of(read_series, "date,count\n2026-01-01,3\n2026-01-02,abc\n", name="toy.csv")
    assert (e.row, e.column, e.value) == (3, "count", "abc")
    msg = str(e)
    assert msg.startswith("toy.csv, row 3, column 'count': the count 'abc' is not a number")
    assert "whole count" in msg


def test_non_finite_count_error():
    for bad in ("inf", "nan", "-Infinity"):
        e = error_of(read_series, f"date,count\n2026-01-01,3\n2026-01-02,{bad}\n")
        assert (e.row, e.column) == (3, "count")
        assert f"'{bad}' is not a finite number" in str(e)


def test_huge_count_error():
    e = error_of(read_series, "date,count\n2026-01-01,3\n2026-01-02,3e12\n")
    assert (e.row, e.column, e.value) == (3, "count", "3e12")
    assert "'3e12' is too large" in str(e)
    assert "1e+10" in str(e)


def test_negative_count_set_to_missing_with_note():
    s = read_series("date,count\n2026-01-01,3\n2026-01-02,-2\n2026-01-03,4\n")
    assert np.isnan(s.values[1])
    (note,) = notes_of(s, "negative")
    assert (note.row, note.date) == (3, "2026-01-02")
    assert "-2" in note.message and "set to missing" in note.message
    assert s.rows_used == 2


def test_fractional_count_rounded_with_note():
    s = read_series("date,count\n2026-01-01,3.5\n2026-01-02,2.4\n")
    assert s.values.tolist() == [4.0, 2.0]
    fractions = notes_of(s, "fraction")
    assert [n.row for n in fractions] == [2, 3]
    assert "3.5" in fractions[0].message and "rounded to 4" in fractions[0].message


def test_dot_grouped_count_in_semicolon_file_is_ambiguous():
    e = error_of(read_series, "date;count\n2026-01-01;1.234\n")
    assert (e.row, e.column) == (2, "count")
    assert "'1.234' is ambiguous" in str(e)


def test_all_counts_missing_error():
    e = error_of(read_series, "date,count\n2026-01-01,\n2026-01-02,-1\n")
    assert e.column == "count"
    assert "none of the 2 rows has a usable count" in str(e)


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
