"""What every subcommand shares: exit statuses and writing JSON.

Exit status: 0 when the result is reportable; 3 when the fit finished but
its numbers must not be reported (unconverged, or a warning invalidates
them; the result is still written, with ``diagnostics.reportable = false``);
2 for bad input (a one-paragraph message on stderr naming file, row, column,
value and what was expected); 1 for anything else (a message, never a
traceback); 130 when interrupted.
"""

from __future__ import annotations

import json
import os
import sys

EXIT_OK = 0
EXIT_ERROR = 1
EXIT_INPUT = 2
EXIT_UNCONVERGED = 3  # finished, but not reportable (unconverged, or a warning invalidates the numbers)


def emit_json(obj, path):
    """Write ``obj`` as JSON to ``path``, or to stdout when path is None or '-'."""
    text = json.dumps(obj, indent=1, allow_nan=False)
    if path in (None, "-"):
        sys.stdout.write(text + "\n")
    else:
        tmp = f"{path}.tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text + "\n")
        os.replace(tmp, path)
