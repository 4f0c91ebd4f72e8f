"""Turning a source (path, bytes or text) into decoded text.

Checks the size against :data:`inference.reader.MAX_BYTES`, removes a UTF-8
byte-order mark, and rejects what is not UTF-8 text (spreadsheets, archives,
UTF-16, other encodings, binary data) with a message saying how to re-save it.
"""

from __future__ import annotations

import os
import re

from . import limits  # looked up at call time, so rebinding a limit takes effect
from ..errors import InputError

SEPARATORS = (",", ";", "\t")


def load_text(source, name):
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
    return not any(s in text for s in SEPARATORS)


def _check_size(size, label):
    if size > limits.MAX_BYTES:
        raise InputError(
            f"the file is {size / 1024 / 1024:.1f} MB ({size:,} bytes); the limit is "
            f"{limits.MAX_BYTES // (1024 * 1024)} MB. Keep only the columns and the period you "
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
