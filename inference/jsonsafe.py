"""Numbers made JSON-safe: finite floats rounded to significant digits, else None."""

from __future__ import annotations

import math

import numpy as np


def num(x, digits=6):
    """A finite float rounded to ``digits`` significant digits, else None."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    if x == 0:
        return 0.0
    return float(f"{x:.{digits}g}")


def num_list(xs, digits=6):
    """Vectorised :func:`num` over an array (flattened), as a list."""
    x = np.asarray(xs, dtype=float).ravel()
    finite = np.isfinite(x)
    safe = np.where(finite & (x != 0), np.abs(x), 1.0)
    scale = 10.0 ** (digits - 1 - np.floor(np.log10(safe)))
    rounded = np.where(finite, np.round(x * scale) / scale, 0.0)
    out = rounded.tolist()
    if not finite.all():
        for i in np.flatnonzero(~finite):
            out[i] = None
    return out
