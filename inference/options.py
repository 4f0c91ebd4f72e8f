"""Every option of a fit, in one table: the command line, the API and the dashboard are made from it.

An option is added in one place (:data:`OPTIONS`). From the table come the
``fit`` and ``batch`` flags (``--name-with-dashes``), the JSON API's spec keys
(the flags' names with underscores), its coercion and validation, the
dashboard's controls and their restore when a run is reopened, and the
README's option list (``bendline options``).

Public options (what people and scripts write) are turned into the engine's
options (:func:`inference.spec.spec_from_options`) by :func:`engine_options`,
which also turns tentative change dates into day offsets (the one place that
does) and fills the defaults that depend on the series' interval. Values are
coerced only when unambiguous (``"3"`` for a whole number, ``"0.5,0.8"`` for
fractions); anything else is refused with the option's name.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from .errors import InputError

KINDS = ("int", "float", "choice", "bool", "auto_bool", "fractions", "change_dates", "text")


@dataclass(frozen=True)
class Option:
    """One option of a fit.

    Attributes
    ----------
    name : str
        Public name: the API spec key; the command-line flag is ``--`` plus the
        name with dashes.
    kind : str
        One of :data:`KINDS`.
    label : str
        The dashboard control's label, in the analyst's words.
    help : str
        One line for ``--help`` and the control's hint.
    default : object
        The value when not given; None means unset (chosen for the series by
        the engine, or no generation interval, ...).
    default_text : str
        The default in words.
    lo, hi : float, optional
        Bounds for numbers.
    choices : tuple
        Allowed values of a choice, with ``choice_labels`` for the dashboard.
    key : str, optional
        The engine's option key when it differs from ``name``.
    group : str
        ``data`` (how to read the file), ``model``, ``projection`` or ``sampler``.
    per_interval : bool
        The value counts values of the series (days for a daily series,
        weeks for a weekly one).
    metavar : str, optional
        The value's name in ``--help``.
    """

    name: str
    kind: str
    label: str
    help: str
    default: object = None
    default_text: str = ""
    lo: float | None = None
    hi: float | None = None
    choices: tuple = ()
    choice_labels: tuple = ()
    key: str | None = None
    group: str = "model"
    per_interval: bool = False
    metavar: str | None = None

    @property
    def flag(self):
        return "--" + self.name.replace("_", "-")

    @property
    def engine_key(self):
        return self.key or self.name


OPTIONS = (
    Option("segments", "int", "Segments", "number of segments, one more than the change dates", 3, "3", 1, 12, metavar="K"),
    Option("family", "choice", "Observation model", "observation model", "negbin", "negbin",
           choices=("negbin", "poisson"),
           choice_labels=("Negative binomial (overdispersed counts)", "Poisson")),
    Option("weekday", "auto_bool", "Day-of-week reporting effect",
           "fit a day-of-week reporting effect", None, "on for daily series, off for weekly"),
    Option("jumps", "bool", "Allow a jump in level at each change date", "allow a level jump at each change date",
           False, "off"),
    Option("flat_segments", "bool", "Level shifts only (flat segments)",
           "level shifts only: each segment flat, the level jumps at each change date", False, "off"),
    Option("growth_prior_pct", "float", "Growth rates rarely exceed (% per day)",
           "growth rates rarely exceed this many percent per day", None,
           "20, wider for a series that rises or falls faster", 0.5, 2000, key="growth_rate_prior_pct_per_day", metavar="PCT"),
    Option("min_segment_days", "float", "Minimum segment length (days)", "minimum segment length in days", None,
           "14 days for daily series, 28 for weekly, shorter for a short series", 2, 3650, metavar="DAYS"),
    Option("change_date", "change_dates", "Tentative change dates",
           "a tentative change date, DATE or DATE:SPREAD_DAYS (repeat, one per change date)", None,
           "none: change dates anywhere", key="changepoint_priors"),
    Option("drop_last", "int", "Leave out the latest values as incomplete",
           "leave the last L values out of the fit as incomplete", 0, "0", 0, 60, per_interval=True, metavar="L"),
    Option("completeness", "fractions", "Share already reported of the latest values",
           "shares already reported of the latest values, latest first (e.g. 0.5,0.8,0.95)", None,
           "all values complete"),
    Option("gi_mean", "float", "Generation interval mean (days)",
           "generation interval mean in days, for reproduction numbers", None, "none: no reproduction numbers",
           0.1, 60, group="projection", metavar="DAYS"),
    Option("gi_sd", "float", "Generation interval sd (days)", "generation interval sd in days (0: fixed)", None,
           "none", 0, 60, group="projection", metavar="DAYS"),
    Option("horizon", "int", "Projection horizon", "values to project if the current trend continues", None,
           "14 days for daily series, 4 weeks for weekly", 0, 120, group="projection", per_interval=True, metavar="H"),
    Option("chains", "int", "Chains", "chains sampled together", 8, "8", 2, 64, group="sampler", metavar="C"),
    Option("draws", "int", "Draws per chain, at least",
           "draws per chain, at least; sampling goes on until the convergence criterion holds", 250, "250", 10,
           1_000_000, group="sampler", metavar="D"),
    Option("max_draws", "int", "Most draws per chain",
           "stop at this many draws per chain even if not converged", None, "20 times the draws, at least 4000",
           10, 10_000_000, group="sampler", metavar="D"),
    Option("thin", "int", "Keep every k-th draw", "keep every k-th draw", 1, "1 (keep all)", 1, 10_000,
           group="sampler", metavar="K"),
    Option("seed", "int", "Seed", "random seed; the same seed and data give the same draws", 1, "1", 0,
           2**31 - 1, group="sampler", metavar="S"),
    Option("max_seconds", "float", "Time budget (seconds)", "wall-clock budget for the whole fit, in seconds",
           600.0, "600", 1, 7 * 86400, group="sampler", metavar="SEC"),
)

#: How to read the file; flags and API keys, not model options.
LOADER_OPTIONS = (
    Option("date_column", "text", "Date column", "column holding the dates", None, "detected", group="data"),
    Option("count_column", "text", "Count column", "column holding the counts", None, "detected", group="data"),
    Option("interval", "choice", "Interval", "force daily or weekly", None, "detected", choices=("day", "week"),
           group="data"),
    Option("region", "text", "Region", "region to fit in a long-format file", None, "the only one", group="data"),
)

BY_NAME = {o.name: o for o in OPTIONS + LOADER_OPTIONS}
ENGINE_ONLY = ("snapshot_summaries", "snapshot_every", "snapshot_seconds", "warmup")
_TRUE = ("true", "yes", "on", "1")
_FALSE = ("false", "no", "off", "0")
_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
DEFAULT_SPREAD_DAYS = 14.0


def unit_word(interval_days):
    return "days" if interval_days == 1 else "weeks"


def label_for(option, interval_days=1):
    """The control's label, with the unit of per-value options in the series' terms."""
    if option.per_interval:
        return f"{option.label} ({unit_word(interval_days)})"
    return option.label


# ------------------------------------------------------------ coercion

def coerce(option, value):
    """A public value as the option's type; unambiguous strings are read, the rest refused.

    Raises
    ------
    InputError
        Naming the option, the value and what was expected.
    """
    name = option.name
    if value is None:
        return None
    kind = option.kind
    if kind == "int":
        v = _as_number(name, value, whole=True)
    elif kind == "float":
        v = _as_number(name, value, whole=False)
    elif kind in ("bool", "auto_bool"):
        if isinstance(value, bool):
            return value
        if isinstance(value, str) and value.strip().lower() in _TRUE:
            return True
        if isinstance(value, str) and value.strip().lower() in _FALSE:
            return False
        if kind == "auto_bool" and isinstance(value, str) and value.strip().lower() in ("auto", ""):
            return None
        raise InputError(f"expected true or false, got {value!r}", column=name)
    elif kind == "choice":
        if not isinstance(value, str) or value.strip().lower() not in option.choices:
            raise InputError(f"expected one of {', '.join(option.choices)}, got {value!r}", column=name)
        return value.strip().lower()
    elif kind == "fractions":
        return _fractions(name, value)
    elif kind == "change_dates":
        return _change_dates(name, value)
    else:  # text
        if not isinstance(value, str):
            raise InputError(f"expected text, got {value!r}", column=name)
        return value
    if option.lo is not None and not (option.lo <= v <= option.hi):
        raise InputError(f"expected a number from {option.lo:g} to {option.hi:g}, got {value!r}", column=name)
    return v


def _as_number(name, value, whole):
    what = "a whole number" if whole else "a number"
    if isinstance(value, bool):
        raise InputError(f"expected {what}, got {value!r}", column=name)
    if isinstance(value, str):
        text = value.strip()
        try:
            v = float(text)
        except ValueError:
            raise InputError(f"expected {what}, got {value!r}", column=name) from None
    elif isinstance(value, (int, float, np.integer, np.floating)):
        v = float(value)
    else:
        raise InputError(f"expected {what}, got {type(value).__name__} {value!r}", column=name)
    if not math.isfinite(v):
        raise InputError(f"expected {what}, got {value!r}", column=name)
    if whole:
        if not v.is_integer():
            raise InputError(f"expected a whole number, got {value!r}", column=name)
        return int(v)
    return v


def _fractions(name, value):
    if isinstance(value, str):
        parts = [p for p in value.replace(";", ",").split(",") if p.strip()]
    elif isinstance(value, (list, tuple)):
        parts = list(value)
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        parts = [value]
    else:
        raise InputError(f"expected fractions such as 0.5,0.8,0.95 or a list of numbers, got {value!r}",
                         column=name)
    out = []
    for i, p in enumerate(parts):
        try:
            f = _as_number(name, p, whole=False)
        except InputError:
            raise InputError(f"entry {i + 1} is {p!r}; each must be a fraction in (0, 1]", column=name) from None
        if not 0 < f <= 1:
            raise InputError(f"entry {i + 1} is {f:g}; each must be a fraction in (0, 1]", column=name)
        out.append(f)
    return out or None


def _change_dates(name, value):
    """['DATE:SPREAD'] (the canonical form) from 'DATE[:SPREAD]' strings or {date, spread_days} objects."""
    items = value if isinstance(value, (list, tuple)) else [value]
    out = []
    for i, item in enumerate(items):
        if isinstance(item, str):
            date, _, spread = item.strip().partition(":")
        elif isinstance(item, dict) and set(item) <= {"date", "spread_days"} and "date" in item:
            date, spread = item["date"], item.get("spread_days")
        else:
            raise InputError(f"entry {i + 1} must be a date like 2026-03-14 or 2026-03-14:10 (date and spread in "
                             f"days), or an object with 'date' and 'spread_days'; got {item!r}", column=name)
        if not isinstance(date, str) or not _DATE.match(date.strip()):
            raise InputError(f"entry {i + 1}: expected a date written YYYY-MM-DD, got {date!r}", column=name)
        try:
            np.datetime64(date.strip(), "D")
        except ValueError:
            raise InputError(f"entry {i + 1}: {date!r} is not a calendar date", column=name) from None
        spread_days = DEFAULT_SPREAD_DAYS
        if spread not in (None, ""):
            spread_days = _as_number(name, spread, whole=False)
            if not 0.5 <= spread_days <= 365:
                raise InputError(f"entry {i + 1}: the spread must be from 0.5 to 365 days, got {spread!r}",
                                 column=name)
        out.append(f"{date.strip()}:{float(spread_days):g}")
    return out


def day_of_date(series, date):
    """Days from the series start (day 0) of a calendar date, which must lie within the series.

    The one conversion of a change date into a day offset, used by the
    command line, the API and the dashboard.

    Raises
    ------
    InputError
        When the date is outside the series.
    """
    d = np.datetime64(str(date)[:10], "D")
    day = float((d - series.start) / np.timedelta64(1, "D"))
    last = float((series.end - series.start) / np.timedelta64(1, "D")) + series.interval_days - 1
    if not 0 <= day <= last:
        raise InputError(f"tentative change date {d} is outside the series ({series.start} to {series.end})",
                         column="change_date", value=str(d))
    return day


# ------------------------------------------------------------ conversion

def check_public(public):
    """Refuse unknown keys and coerce every value (no series needed).

    Returns
    -------
    dict
        Public options with typed values (None for unset ones dropped).
    """
    if not isinstance(public, dict):
        raise InputError(f"the options must be a JSON object, got {type(public).__name__}")
    out = {}
    for key, value in public.items():
        option = BY_NAME.get(key)
        if option is None:
            known = ", ".join(o.name for o in OPTIONS + LOADER_OPTIONS)
            raise InputError(f"unknown option {key!r}; known options are {known}", column=str(key))
        v = coerce(option, value)
        if v is not None:
            out[key] = v
    return out


def engine_options(public, series):
    """The engine's options (:func:`inference.spec.spec_from_options`) from public ones.

    Parameters
    ----------
    public : dict
        Public option names and values (typed or strings).
    series : Series
        For the change dates' day offsets and the interval-dependent defaults.

    Returns
    -------
    dict
        Engine keys; loader options left out.
    """
    opts = check_public(public)
    out = {}
    for option in OPTIONS:
        value = opts.get(option.name, option.default)
        if option.name == "horizon" and value is None:
            value = 14 if series.interval_days == 1 else 4
        if value is None:
            continue
        if option.kind == "change_dates":
            pairs = [item.split(":") for item in value]
            value = [{"day": day_of_date(series, d), "spread_days": float(s)} for d, s in pairs]
            if value and "segments" not in opts:
                out["segments"] = len(value) + 1
        out[option.engine_key] = value
    if out.get("changepoint_priors") and len(out["changepoint_priors"]) != out["segments"] - 1:
        raise InputError(f"{len(out['changepoint_priors'])} tentative change dates given for {out['segments']} "
                         f"segments; give one fewer change date than segments, or leave segments out",
                         column="change_date")
    return out


def public_options(engine, series):
    """Public options from the engine's (the reverse of :func:`engine_options`, for restoring controls)."""
    out = {}
    for option in OPTIONS:
        if option.engine_key not in engine:
            continue
        value = engine[option.engine_key]
        if option.kind == "change_dates":
            value = [f"{series.start + np.timedelta64(int(round(c['day'])), 'D')}:{c.get('spread_days', 14.0):g}"
                     for c in value or []]
        out[option.name] = value
    return out


def markdown_table():
    """The option list for the README: flag, API key, default, meaning."""
    lines = ["| flag (API key) | default | meaning |", "|---|---|---|"]
    for o in OPTIONS + LOADER_OPTIONS:
        lines.append(f"| `{o.flag}` (`{o.name}`) | {o.default_text or '–'} | {o.help} |")
    return "\n".join(lines)
