"""Errors raised at the engine's edge, worded for the analyst."""

from __future__ import annotations


class InputError(ValueError):
    """Bad input: a file, a row, an option or a prior that cannot be used.

    The message is one paragraph that names where the problem is (file, row,
    column, option) and what was expected, so the CLI, the API and the
    dashboard can show it as it is.

    Parameters
    ----------
    message : str
        What is wrong and what was expected.
    source : str, optional
        File name or option group ("spec", "priors").
    row : int, optional
        1-based row number in the file as a spreadsheet shows it (header is
        row 1).
    column : str, optional
        Column or option name.
    value : object, optional
        The value that was received.
    """

    def __init__(self, message, *, source=None, row=None, column=None, value=None):
        self.source = source
        self.row = row
        self.column = column
        self.value = value
        self.detail = message
        where = []
        if source:
            where.append(str(source))
        if row is not None:
            where.append(f"row {row}")
        if column:
            where.append(f"column '{column}'")
        prefix = ", ".join(where)
        text = f"{prefix}: {message}" if prefix else message
        super().__init__(text)

    def to_dict(self):
        """JSON-safe form for APIs: message plus where it is."""
        return {
            "message": str(self),
            "source": self.source,
            "row": self.row,
            "column": self.column,
            "value": None if self.value is None else str(self.value),
        }
