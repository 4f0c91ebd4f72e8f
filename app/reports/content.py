"""What the briefing view and the reports say, as plain data and text.

Pure functions shared by :mod:`app.web.brief`, :mod:`app.reports.html`,
:mod:`app.reports.tables` and the downloads: which numbers a run may show,
the short status label, the title, and the footer's assumptions. Numbers are
formatted by :mod:`app.wording` only; the few new wording functions live here
(``short_status``, ``title_text``, ``gi_note``, ``hedged_summary``,
``about_lines``) because ``app/wording.py`` belongs to another part of the
project.
"""

from __future__ import annotations

from bendline.inference import SCHEMA_VERSION
from bendline.inference.result import CAUTIONS

from .. import wording

#: Statuses whose draws may be reported when the diagnostics converged.
REPORTABLE = frozenset({"converged", "stopped"})
NOT_CONVERGED_BOX = wording.NOT_REPORTABLE


class NotAResult(ValueError):
    """The JSON is not a Bendline result this code can read (one-line message)."""


def check_result(obj):
    """Raise :class:`NotAResult` unless ``obj`` looks like a Bendline JSON result.

    Parameters
    ----------
    obj : object
        Parsed JSON.
    """
    if not isinstance(obj, dict):
        raise NotAResult("it is not a Bendline result (a JSON object with schema_version was expected)")
    if "schema_version" not in obj:
        raise NotAResult("it is not a Bendline result (it has no schema_version)")
    version = obj.get("schema_version")
    if version != SCHEMA_VERSION:
        raise NotAResult(f"it has schema version {version!r}; this Bendline reads version {SCHEMA_VERSION}")
    series = obj.get("series")
    if not isinstance(series, dict) or not isinstance(series.get("values"), list) or not series.get("start"):
        raise NotAResult("it is not a complete Bendline result (its series is missing)")
    if not isinstance(obj.get("diagnostics"), dict):
        raise NotAResult("it is not a complete Bendline result (its diagnostics are missing)")


def reportable(result):
    """The engine's verdict on a result: true when its numbers may be reported.

    ``diagnostics.reportable`` (converged, and no warning that invalidates
    the numbers); a result from before the verdict existed counts when its
    chains converged. A failed or empty result never does.
    """
    if (result or {}).get("status") == "failed":
        return False
    return wording.verdict_of((result or {}).get("diagnostics"))[0]


def warnings_of(view):
    """The warnings to show beside the numbers: [(kind, message, blocking)]."""
    diag = (view or {}).get("diagnostics") or {}
    return [(w.get("kind"), w.get("message"), bool(w.get("blocking"))) for w in diag.get("warnings") or []
            if isinstance(w, dict) and w.get("message")]


def result_view(result):
    """A result in the shape the figure builders read from a snapshot.

    The builders take a snapshot's ``phase``, ``series_end`` and
    ``interval_days``; a result keeps those in its ``series``. The
    diagnostics' ``converged`` is set to :func:`reportable`, so a figure of
    an unconverged result carries the "Not converged" note.
    """
    series = result.get("series") or {}
    diag = dict(result.get("diagnostics") or {}, converged=reportable(result))
    return dict(result, phase="done", series_end=series.get("end"),
                interval_days=series.get("interval_days") or 1, diagnostics=diag)


def series_dict(result):
    """The figure builders' ``series`` dict from a result's ``series``."""
    s = result["series"]
    return {"start": s["start"], "interval_days": int(s.get("interval_days") or 1), "name": s.get("name") or "",
            "values": list(s["values"])}


def short_status(status, view):
    """(css class, label) of the big status badge: a few words, readable across a room.

    Parameters
    ----------
    status : str
        The run's status (``queued``, ``running``, ``converged`` ...).
    view : dict or None
        The snapshot or result view shown.
    """
    diag = (view or {}).get("diagnostics") or {}
    if status == "queued":
        return "provisional", "Provisional: waiting to start"
    if status == "running":
        return "provisional", "Provisional: still sampling"
    if status == "failed":
        return "bad", "Failed: no results"
    if status in ("converged", "stopped", "unconverged") and wording.verdict_of(diag)[0]:
        return "final", wording.REPORTABLE
    return "bad", wording.NOT_REPORTABLE


def title_text(name, end):
    """'daily admissions: data through 4 Oct 2026'."""
    name = (name or "series").strip() or "series"
    return f"{name}: data through {wording.fmt_date(end)}" if end else name


def hedged_summary(view, provisional, final):
    """:func:`app.wording.summary_sentence`, prefixed while the numbers may not be reported."""
    text = wording.summary_sentence(view)
    if not view or not view.get("current"):
        return text
    if provisional:
        return "Provisional, still sampling: " + text
    if not final:
        return "Not reportable, do not report: " + text
    return text


def gi_note(gi):
    """The footer's line on the generation interval (or None without one)."""
    if not gi or gi.get("mean_days") is None:
        return None
    sd = gi.get("sd_days")
    sd_text = f", sd {sd:g} days" if sd is not None else ""
    return (f"reproduction numbers assume a generation interval of mean {gi['mean_days']:g} days{sd_text}; "
            "they depend on the interval assumed")


def gi_from_options(options):
    """The ``generation_interval`` dict a result would have, from a run's options."""
    options = options or {}
    if options.get("gi_mean") in (None, ""):
        return None
    return {"mean_days": options.get("gi_mean"), "sd_days": options.get("gi_sd")}


def assumptions_from_options(series, options):
    """The model's assumption lines for a run with no result yet.

    Built by the engine's own :func:`inference.result.assumptions` from the
    run's options, so they read exactly as the finished result's will.
    """
    from bendline.inference.errors import InputError
    from bendline.inference.model import TrendModel
    from bendline.inference.result import assumptions
    from bendline.inference.spec import spec_from_options

    try:
        model_spec, _ = spec_from_options(dict(options or {}))
        return assumptions(TrendModel(series, model_spec))
    except (InputError, ValueError, TypeError, KeyError):
        opts = options or {}
        return [f"{opts.get('segments', '?')} segments of exponential growth or decline",
                f"observation model: {opts.get('family', '?')}"]


def about_lines(*, end=None, run_id=None, seed=None, gi=None):
    """The footer's closing lines: data through, generation interval, run id and seed."""
    lines = []
    if end:
        lines.append(f"data through {wording.fmt_date(end)}")
    note = gi_note(gi)
    if note:
        lines.append(note)
    bits = []
    if run_id:
        bits.append(f"run {run_id}")
    if seed is not None:
        bits.append(f"seed {seed}")
    if bits:
        lines.append(", ".join(bits))
    return lines


def cautions_of(result):
    """The result's cautions, or the engine's when a result carries none."""
    lines = [c for c in ((result or {}).get("cautions") or []) if isinstance(c, str) and c.strip()]
    return lines or list(CAUTIONS)


def headline(view):
    """``wording.headline_stats`` of a view (an empty list before the first draws)."""
    return wording.headline_stats(view) if view else []


#: The cautions in one line, for the first screen of the briefing view (the
#: footer carries :data:`inference.result.CAUTIONS` in full).
BRIEF_CAUTION = ("Estimates depend on the model's assumptions and the data's quality; they are no substitute "
                 "for epidemiological judgement: defer to your agency's methods and qualified epidemiologists. "
                 "The projection shows what follows if the current trend continues; it is not a forecast.")
