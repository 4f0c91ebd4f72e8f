"""Bendline: Bayesian piecewise-exponential trends with unknown change dates for surveillance counts.

For notebooks::

    import bendline
    fit = bendline.fit("cases.csv", segments=3)
    fit.summary_text, fit.segments, fit.json["diagnostics"]["reportable"]

The engine is :mod:`bendline.inference` (numpy, scipy and pandas only); the
dashboard, command line, team server and reports are :mod:`bendline.app`.
"""

from __future__ import annotations

__version__ = "0.1.0"


def fit(data, **options):
    """Fit a series and return a :class:`bendline.notebook.FitResult` (see :func:`bendline.notebook.fit`)."""
    from .notebook import fit as _fit

    return _fit(data, **options)
