"""``bendline.fit``: the command line's pipeline for notebooks.

Takes a file path, CSV bytes or a pandas DataFrame and the same options as
``bendline fit`` (the option table, :mod:`bendline.inference.options`, with
the flags' names as keywords) and returns the JSON result with its tables
as DataFrames.
"""

from __future__ import annotations

import io

from .inference.errors import InputError
from .inference.fitting import fit_result
from .inference.options import LOADER_OPTIONS, check_public, engine_options
from .inference.reader import read_series

_LOADER = {o.name for o in LOADER_OPTIONS}


class FitResult:
    """A finished fit: the JSON result (``.json``) and its tables as pandas DataFrames.

    Attributes
    ----------
    json : dict
        The JSON result, as ``bendline fit --out`` writes it.
    """

    def __init__(self, result):
        self.json = result

    @property
    def reportable(self):
        """The engine's verdict: may these numbers be reported?"""
        return bool(self.json["diagnostics"]["reportable"])

    @property
    def warnings(self):
        """The verdict's warnings as (kind, message) pairs."""
        return [(w["kind"], w["message"]) for w in self.json["diagnostics"]["warnings"]]

    @property
    def summary_text(self):
        return self.json["summary_text"]

    @property
    def segments(self):
        """One row per segment: dates, direction, percent change per day and week, doubling or halving time."""
        import pandas as pd

        rows = []
        for s in self.json["segments"]:
            row = {"segment": s["index"], "start_date": s["start_date"], "end_date": s["end_date"],
                   "direction": s.get("direction"), "prob_growing": s.get("prob_growing")}
            for unit in ("day", "week"):
                for k in ("median", "q05", "q95"):
                    row[f"growth_pct_per_{unit}_{k}"] = (s.get(f"growth_pct_per_{unit}") or {}).get(k)
            for kind in ("doubling", "halving"):
                t = s.get(f"{kind}_time_days") or {}
                row[f"{kind}_time_days_median"] = t.get("median")
            rows.append(row)
        return pd.DataFrame(rows)

    @property
    def changepoints(self):
        """One row per change date: median and 90% interval, and the number of separate modes."""
        import pandas as pd

        return pd.DataFrame([{"change_date": c["index"], "median_date": c["median_date"], "q05_date": c["q05_date"],
                              "q95_date": c["q95_date"], "modes": len(c.get("modes") or [1])}
                             for c in self.json["changepoints"]])

    @property
    def band(self):
        """The fitted trend and predictive band, one row per date."""
        import pandas as pd

        b = self.json["band"]
        return pd.DataFrame({"date": pd.to_datetime(b["dates"]), "trend_q05": b["trend_q05"],
                             "trend_q50": b["trend_q50"], "trend_q95": b["trend_q95"],
                             "predictive_q05": b["predictive_q05"], "predictive_q95": b["predictive_q95"]})

    @property
    def projection(self):
        """If the current trend continues: counts per interval, median and 90% interval."""
        import pandas as pd

        p = self.json["projection"]
        return pd.DataFrame({"date": pd.to_datetime(p["dates"]), "q05": p["q05"], "q50": p["q50"], "q95": p["q95"]})

    def __repr__(self):
        verdict = "reportable" if self.reportable else "NOT reportable"
        return f"<bendline fit: {verdict}; {self.summary_text}>"


def fit(data, **options):
    """Fit the trend model to a count series.

    Parameters
    ----------
    data : str, os.PathLike, bytes or pandas.DataFrame
        A CSV file (path or bytes) with a date column and a count column, or
        a DataFrame with the same (``date_column``/``count_column`` choose
        them when they are not obvious).
    **options
        The ``bendline fit`` flags' names with underscores (``segments=3``,
        ``family="poisson"``, ``change_date=["2026-03-20:10"]``, ...), and
        the reader's ``date_column``, ``count_column``, ``interval``,
        ``region``.

    Returns
    -------
    FitResult

    Raises
    ------
    InputError
        Bad data or options, with the message the command line gives.
    """
    loader = {k: options.pop(k) for k in list(options) if k in _LOADER}
    given = check_public(options)
    if hasattr(data, "to_csv"):  # a DataFrame
        buf = io.StringIO()
        data.to_csv(buf, index=False)
        data = buf.getvalue().encode()
    series = read_series(data, **loader)
    result, _ = fit_result(series, dict(engine_options(given, series), snapshot_summaries=False), given=given)
    if result is None:
        raise InputError("the fit kept no draws")
    result["spec"].pop("snapshot_summaries", None)
    return FitResult(result)
