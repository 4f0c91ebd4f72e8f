"""Reports and exports of a finished run: a self-contained HTML report and CSV tables.

``html_report(result, run=None)`` gives one HTML file with the briefing's
content, the diagnostics, the data-quality notes, the options and the
cautions; ``csv_tables(result)`` the segment, change-date, trend and
projection tables, every text cell passed through ``neutralise`` (OWASP
CSV Injection). Both read only the JSON result (and optionally the run's
record), so the CLI, the downloads and scripts produce the same files.
"""

from .content import NOT_CONVERGED_BOX, NotAResult, check_result, reportable, result_view
from .html import html_report
from .tables import TABLES, csv_tables, neutralise

__all__ = ["NOT_CONVERGED_BOX", "NotAResult", "TABLES", "check_result", "csv_tables", "html_report", "neutralise",
           "reportable", "result_view"]
