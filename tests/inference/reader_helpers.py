"""Shared helpers of the reader tests (tests/inference/test_reader_*.py)."""

import pytest

from bendline.inference.errors import InputError


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
