"""Every component id of the dashboard, in one place."""

# state kept in the browser
SERIES_KEY = "series-key"  # upload key of the loaded series (the series itself stays on the server)
CHANGEPOINTS = "changepoints"  # [{"day": float, "spread_days": float}], date order
RUN_ID = "run-id"  # the run the panels show
FIGURE_RUN = "figure-run"  # {"run": id, "iteration": n} drawn so far
HIGHLIGHT = "highlight-segment"
URL = "url"
REQUEST_RUN = "request-run"  # the run the address asks for
POLL = "poll"

# data
UPLOAD = "upload"
SAMPLE = "sample-picker"
REGION = "region-picker"
REGION_ROW = "region-row"
SERIES_INFO = "series-info"
DATA_NOTES = "data-notes"
DATA_ERROR = "data-error"

# change dates
ADD_CHANGE = "add-change-date"
CHANGE_LIST = "change-date-list"
CHANGE_SPREAD = "change-spread"  # pattern-matching: {"type": CHANGE_SPREAD, "index": i}
CHANGE_DATE = "change-date"  # pattern-matching: the date field of change date i (YYYY-MM-DD)
CHANGE_ERROR = "change-date-error"  # a typed date that could not be used, in words
CHANGE_REMOVE = "change-remove"  # pattern-matching
SEGMENTS_NOTE = "segments-note"
COMPARE = "compare-segments"  # "How many segments?"
COMPARE_ID = "compare-id"
COMPARE_POLL = "compare-poll"
COMPARE_STATUS = "compare-status"
COMPARE_FIG = "compare-chart"
COMPARE_STRIP = "compare-strip"  # {edges_day, probability, weights, series_hash}: P(change) averaged over K
ADOPT = "adopt-segments"

# model and priors: one control per option of inference.options, its id the
# option's name with dashes (app.web.controls.control_id)
SEGMENTS = "segments"
STALE_NOTE = "stale-note"  # "the controls changed since the fit shown"
ADVANCED = "advanced-sampler"  # the fold holding the sampler's settings

# running
FIT = "fit-button"
STOP = "stop-button"
PROGRESS = "progress"
FIT_ERROR = "fit-error"
RUN_LIST = "run-list"
REFRESH_RUNS = "refresh-runs"
BRIEF_LINK = "brief-link"

# display
STYLE = "display-style"
SCALE = "display-scale"

# panels
RESULTS = "results"  # the results column (a skip link's target)
ANNOUNCER = "status-announcer"  # the live region a screen reader announces: queued, running, the verdict
HEADLINE = "headline"
SUMMARY = "summary-sentence"
WARNINGS = "warning-list"
STATUS_BANNER = "status-banner"
MAIN = "main-chart"
CHANGE_HIST = "change-date-chart"
RATES = "rates-chart"
DIAG_SUMMARY = "diagnostics-summary"
DIAG_TABLE = "diagnostics-table"
DIAG_NOTE = "diagnostics-note"  # what R-hat and ESS mean, and the criterion, under the table
TRACE = "trace-chart"
TRACE_PARAM = "trace-parameter"
WEEKDAY_FIG = "weekday-chart"
RESIDUALS = "residual-chart"
#: Deleting the run shown (a confirmation dialog, then a message)
DELETE_RUN = "delete-run"
DELETE_CONFIRM = "delete-run-confirm"
DELETE_MESSAGE = "delete-run-message"
