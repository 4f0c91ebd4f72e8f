"""Plotly figures of the dashboard: pure functions from plain data to figures.

Every builder takes the plain dicts the engine and the loader produce (a
``Series.to_dict()``, a driver snapshot, the analyst's tentative change dates)
and returns a ``plotly.graph_objects.Figure``. Nothing here keeps state,
registers a Dash callback or computes a statistic: every quantile was computed
by the engine, and figures only convert units for display (a growth rate per
day to percent per day, a day offset to a calendar date).

Updating in place
-----------------
Figures that change while sampling runs have an ``*_updates`` companion that
returns only what changes between snapshots::

    {"trace_count": int,                  # the figure's number of traces
     "traces": {index: {property: value}},  # top-level trace properties
     "annotations": {index: annotation},    # whole annotations (optional)
     "shapes": {index: shape},              # whole shapes (optional)
     "title": str}                          # layout.title.text (optional)

Each trace entry replaces whole top-level properties (``x``, ``y``,
``customdata``, ``marker`` ...), which maps one to one onto ``dash.Patch``
assignments (``patch["data"][i][key] = value``). When ``trace_count``
differs from the figure on screen, rebuild the figure instead.
:func:`apply_updates` applies an update to a figure dict (used by the tests to
prove the updates agree with a full rebuild).

Modules
-------
``common``       numbers and dates for display, status notes, the empty panel, :func:`apply_updates`
``main``         the main chart (counts, trend, projection, change dates) and its updates
``changes``      the change-date chart and its updates
``rates``        the growth-rate panel and its texts
``traces``       the trace plot and its updates
``checks``       the day-of-week factors and the residuals of the predictive check
``diagnostics``  the convergence table and its summary
``support``      how many segments the data support (stacking weights by K)

Every figure sets ``layout.height``: the app does not size them with CSS.
"""

from .changes import changepoint_figure, changepoint_updates
from .checks import residual_figure, residual_updates, weekday_figure
from .common import (MS_PER_DAY, NO_FIT_NOTE, NOT_CONVERGED_NOTE, PROVISIONAL_NOTE, apply_updates, day_to_x,
                     empty_figure, is_final, status_note, x_to_day)
from .diagnostics import ESS_MIN, RHAT_LIMIT, diagnostics_note, diagnostics_rows, diagnostics_summary
from .main import (MAIN_SNAPSHOT_TRACES, MAIN_STATUS_ANNOTATION, MAIN_TRACE_INDEX, MAIN_TRACES,
                   centred_average_7day, main_figure, main_updates)
from .rates import growth_text, rates_figure, segment_label
from .support import support_figure
from .traces import trace_figure, trace_updates

__all__ = [
    "ESS_MIN", "MAIN_SNAPSHOT_TRACES", "MAIN_STATUS_ANNOTATION", "MAIN_TRACE_INDEX", "MAIN_TRACES", "MS_PER_DAY",
    "NOT_CONVERGED_NOTE", "NO_FIT_NOTE", "PROVISIONAL_NOTE", "RHAT_LIMIT", "apply_updates", "centred_average_7day",
    "changepoint_figure", "changepoint_updates", "day_to_x", "diagnostics_note", "diagnostics_rows", "diagnostics_summary",
    "empty_figure", "growth_text", "is_final", "main_figure", "main_updates", "rates_figure", "residual_figure",
    "residual_updates", "segment_label", "status_note", "support_figure", "trace_figure", "trace_updates",
    "weekday_figure",
    "x_to_day",
]
