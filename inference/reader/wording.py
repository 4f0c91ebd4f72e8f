"""Small wording helpers for the reader's messages: names, lists, plurals."""

from __future__ import annotations

import re


def normalised(name):
    return re.sub(r"[\s.\-/]+", "_", str(name).strip().lower()).strip("_")


def quote_list(names):
    return ", ".join(f"'{n}'" for n in names)


def short_list(items, limit=20):
    shown = quote_list(items[:limit])
    if len(items) > limit:
        shown += f" and {len(items) - limit} more"
    return shown


def row_list(rows, limit=10):
    shown = ", ".join(str(r) for r in rows[:limit])
    if len(rows) > limit:
        shown += f" and {len(rows) - limit} more"
    return ("row " if len(rows) == 1 else "rows ") + shown


def plural(n, word):
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def column_letter(i):
    letters = ""
    i += 1
    while i:
        i, r = divmod(i - 1, 26)
        letters = chr(65 + r) + letters
    return letters
