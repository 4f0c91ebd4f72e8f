"""Tests for inference.reader: finding the columns and reading the cells.

Date, count and given columns; date and count cells (thousands separators,
missing markers, negatives, fractions); one test per reading rule, on small
invented files.
"""

import numpy as np

from bendline.inference.reader import read_series

from .reader_helpers import error_of, notes_of


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
