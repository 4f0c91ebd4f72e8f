"""Tests for inference.reader: reading a file into a table of cells.

Separators, encodings, line ends, quoting, blank rows, the header, and the size
and row limits; one test per reading rule, on small invented files.
"""

from bendline.inference import reader
from bendline.inference.reader import list_regions, read_series, read_table

from .reader_helpers import DAILY, error_of, notes_of


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
    monkeypatch.setattr(reader.limits, "MAX_BYTES", 1024 * 1024)
    big = ("date,count\n" + "2026-01-01,3\n" * 90_000).encode()
    e = error_of(read_table, big, name="big.csv")
    assert "big.csv" in str(e)
    assert f"{len(big):,} bytes" in str(e)
    assert "the limit is 1 MB" in str(e)


def test_row_limit(monkeypatch):
    monkeypatch.setattr(reader.limits, "MAX_ROWS", 3)
    text = "date,count\n" + "".join(f"2026-01-0{d},1\n" for d in range(1, 6))
    e = error_of(read_table, text, name="toy.csv")
    assert "more than 3 data rows" in str(e)
    assert "row 5" in str(e)
