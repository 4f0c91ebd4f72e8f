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

The package is split by what each part does:

* :mod:`.text`: bytes, paths and text in; encoding, binary and size checks;
* :mod:`.table`: separator sniffing and the table of cells with its
  spreadsheet row numbers;
* :mod:`.columns`: which columns hold the dates, the counts and the region;
* :mod:`.values`: reading date and count cells (thousands separators,
  missing markers);
* :mod:`.grid`: the interval, duplicate dates, date order and gaps;
* :mod:`.series`: :func:`read_series`, :func:`read_all_regions` and
  :func:`list_regions`, which put the above together;
* :mod:`.wording`: small helpers for the messages.

:data:`MAX_BYTES` and :data:`MAX_ROWS` live in :mod:`.limits`, where the
modules look them up when they check a file: rebind
``inference.reader.limits.MAX_BYTES`` (as a test or a deployment may) to
change a limit. The package re-exports their values.
"""

from __future__ import annotations

from . import limits
from .columns import COUNT_NAMES, DATE_NAMES, REGION_NAMES
from .limits import MAX_BYTES, MAX_ROWS
from .series import list_regions, read_all_regions, read_series, series_column
from .table import read_table

__all__ = [
    "series_column",
    "limits",
    "MAX_BYTES",
    "MAX_ROWS",
    "DATE_NAMES",
    "COUNT_NAMES",
    "REGION_NAMES",
    "read_table",
    "list_regions",
    "read_series",
    "read_all_regions",
]
