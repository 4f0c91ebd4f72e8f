"""The validated count series every fit starts from.

A :class:`Series` holds one value per interval (a day or a week) on a regular
calendar grid, with ``NaN`` where a value is missing, and the data-quality
notes that record every change the loader made to the input. Parsing files
lives in :mod:`inference.reader`; this module only defines the object and its
invariants.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError

#: Counts above this are taken as a data error (no surveillance series has
#: ten billion events in one interval).
MAX_COUNT = 1e10

#: Note kinds the loader emits; the dashboard and reports group by these.
NOTE_KINDS = frozenset(
    {
        "gap",  # a date missing from the grid, kept as missing
        "missing",  # an empty cell, kept as missing
        "negative",  # a negative value (a revision), set to missing
        "reordered",  # rows were not in date order
        "thousands",  # a thousands separator was removed
        "fraction",  # a non-integer count was rounded
        "dropped_region",  # rows of other regions were left out
        "trailing",  # empty rows at the end were ignored
        "blank",  # empty rows between data rows were skipped
    }
)


@dataclass(frozen=True)
class DataQualityNote:
    """One change the loader made to the data, never done silently.

    Attributes
    ----------
    row : int or None
        1-based row in the file (header is row 1); None for notes about the
        whole file or about dates absent from it.
    date : str or None
        ISO date the note concerns.
    kind : str
        One of :data:`NOTE_KINDS`.
    message : str
        Plain-language description.
    """

    row: int | None
    date: str | None
    kind: str
    message: str

    def to_dict(self):
        return {"row": self.row, "date": self.date, "kind": self.kind, "message": self.message}


@dataclass(frozen=True)
class Series:
    """A regular count series.

    Attributes
    ----------
    start : numpy.datetime64
        Date of the first value (day precision).
    values : numpy.ndarray, shape (n,)
        Counts as floats, ``NaN`` where missing.
    interval_days : int
        1 for daily series, 7 for weekly.
    name : str
        Label (region or file name).
    notes : tuple of DataQualityNote
        Every change the loader made.
    rows_read : int
        Data rows read from the file (for this region).
    rows_used : int
        Rows whose value enters the series.
    """

    start: np.datetime64
    values: np.ndarray
    interval_days: int
    name: str = ""
    notes: tuple = field(default_factory=tuple)
    rows_read: int = 0
    rows_used: int = 0

    def __post_init__(self):
        values = np.asarray(self.values, dtype=float)
        if values.ndim != 1:
            raise InputError(f"expected a 1-D series of counts, got shape {values.shape}")
        if self.interval_days not in (1, 7):
            raise InputError(
                f"interval must be 1 day or 7 days, got {self.interval_days}", column="interval"
            )
        finite = values[np.isfinite(values)]
        if np.any(finite < 0):
            raise InputError("counts must be zero or more; negative values belong in the notes")
        if np.any(finite > MAX_COUNT):
            raise InputError(f"counts above {MAX_COUNT:.0e} are not plausible")
        values = values.copy()
        values.setflags(write=False)
        object.__setattr__(self, "values", values)
        object.__setattr__(self, "start", np.datetime64(self.start, "D"))
        object.__setattr__(self, "notes", tuple(self.notes))

    @classmethod
    def from_counts(cls, start, counts, interval_days=1, name=""):
        """Build a series from an array of counts (NaN for missing).

        Parameters
        ----------
        start : str or numpy.datetime64
            ISO date of the first value.
        counts : array_like, shape (n,)
        interval_days : {1, 7}
        name : str
        """
        counts = np.asarray(counts, dtype=float)
        n = int(counts.size)
        used = int(np.isfinite(counts).sum())
        return cls(np.datetime64(start, "D"), counts, interval_days, name, (), n, used)

    @property
    def n(self):
        """Number of intervals on the grid, missing ones included."""
        return int(self.values.size)

    @property
    def observed(self):
        """Boolean mask of intervals with a value."""
        return np.isfinite(self.values)

    @property
    def dates(self):
        """Calendar dates of the grid, ``datetime64[D]``, shape (n,)."""
        return self.start + np.arange(self.n) * np.timedelta64(self.interval_days, "D")

    @property
    def end(self):
        """Date of the last value on the grid."""
        return self.start + np.timedelta64((self.n - 1) * self.interval_days, "D")

    @property
    def total(self):
        """Sum of the observed counts."""
        return float(np.nansum(self.values))

    def day_of_week(self):
        """Day of week of each grid date, 0 = Monday ... 6 = Sunday."""
        # 1970-01-01 was a Thursday (3).
        return ((self.dates.astype("int64") + 3) % 7).astype(int)

    def content_hash(self):
        """SHA-256 of the dates and values: identifies the input of a run."""
        h = hashlib.sha256()
        h.update(str(self.start).encode())
        h.update(str(self.interval_days).encode())
        h.update(np.ascontiguousarray(self.values).tobytes())
        return h.hexdigest()

    def summary(self):
        """JSON-safe summary used in results: start, end, n, interval_days, total."""
        return {
            "start": str(self.start),
            "end": str(self.end),
            "n": self.n,
            "interval_days": self.interval_days,
            "total": self.total,
            "name": self.name,
        }

    def to_dict(self):
        """Full JSON-safe form (values with null for missing), for the run store."""
        return {
            "start": str(self.start),
            "interval_days": self.interval_days,
            "name": self.name,
            "values": [None if not np.isfinite(v) else float(v) for v in self.values],
            "notes": [n.to_dict() for n in self.notes],
            "rows_read": self.rows_read,
            "rows_used": self.rows_used,
        }

    @classmethod
    def from_dict(cls, d):
        """Inverse of :meth:`to_dict`."""
        values = np.array([np.nan if v is None else float(v) for v in d["values"]], dtype=float)
        notes = tuple(DataQualityNote(**n) for n in d.get("notes", ()))
        return cls(
            np.datetime64(d["start"], "D"),
            values,
            int(d["interval_days"]),
            d.get("name", ""),
            notes,
            int(d.get("rows_read", values.size)),
            int(d.get("rows_used", np.isfinite(values).sum())),
        )
