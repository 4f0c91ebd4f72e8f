"""The convergence table and its one-line summary (plain data for a Dash table).

The thresholds come from the snapshot (``diagnostics.rhat_threshold`` and
``diagnostics.ess_threshold``); older snapshots only state them in the
``criterion`` text, which is read instead.
"""

from __future__ import annotations

import re

from bendline.inference.snapshots import ESS_MIN as _ENGINE_ESS_MIN
from bendline.inference.snapshots import RHAT_MAX as _ENGINE_RHAT_MAX
from bendline.inference.wording import fmt_rhat

from .common import num

#: Default convergence thresholds (used when the snapshot states none): the engine's criterion.
RHAT_LIMIT = _ENGINE_RHAT_MAX
ESS_MIN = _ENGINE_ESS_MIN


def thresholds(diag):
    """(R-hat limit, ESS minimum) of a snapshot's ``diagnostics``.

    The engine's ``rhat_threshold`` and ``ess_threshold`` when present; else
    read off the ``criterion`` text (older snapshots); else the defaults
    :data:`RHAT_LIMIT` and :data:`ESS_MIN`.
    """
    diag = diag or {}
    crit = diag.get("criterion") or ""
    m_r = re.search(r"R-hat\s*<\s*([0-9.]+)", crit)
    m_e = re.search(r"ESS\s*>=?\s*([0-9.]+)", crit)
    rhat = num(diag.get("rhat_threshold"))
    ess = num(diag.get("ess_threshold"))
    if rhat is None:
        rhat = float(m_r.group(1)) if m_r else RHAT_LIMIT
    if ess is None:
        ess = float(m_e.group(1)) if m_e else ESS_MIN
    return rhat, ess


def diagnostics_rows(snapshot):
    """Rows of the convergence table, one per reported quantity.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    list of dict
        Keys ``parameter``, ``rhat`` (6 decimals; shown through ``fmt_rhat``), ``ess_bulk``,
        ``ess_tail`` (whole draws; None where not computed) and ``status``:
        "ok", "chains disagree (R-hat ≥ 1.01)", "too few effective draws
        (ESS < 400)" (both joined by "; " when both hold), or "not
        available". Empty before the first convergence check.
    """
    diag = (snapshot or {}).get("diagnostics")
    if not diag:
        return []
    rhat_limit, ess_min = thresholds(diag)
    rows = []
    for p in diag.get("parameters") or []:
        rhat, bulk, tail = num(p.get("rhat")), num(p.get("ess_bulk")), num(p.get("ess_tail"))
        problems = []
        if rhat is None or bulk is None or tail is None:
            problems.append("not available")
        else:
            if rhat >= rhat_limit:
                problems.append(f"chains disagree (R-hat ≥ {rhat_limit:g})")
            if min(bulk, tail) < ess_min:
                problems.append(f"too few effective draws (ESS < {ess_min:g})")
        rows.append({
            "parameter": p.get("name"),
            "rhat": None if rhat is None else round(rhat, 6),  # shown by fmt_rhat
            "ess_bulk": None if bulk is None else int(round(bulk)),
            "ess_tail": None if tail is None else int(round(tail)),
            "status": "; ".join(problems) if problems else "ok",
        })
    return rows


def diagnostics_summary(snapshot):
    """One sentence on convergence for the panel above the table.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    str
        E.g. "Converged: max R-hat 1.007, min ESS 1,410 (criterion: ...)." or
        "Not yet converged: max R-hat 1.061 (needs < 1.01), min ESS 140
        (needs ≥ 400); still sampling (99 draws per chain so far)."
    """
    if not snapshot:
        return "No fit yet."
    phase = snapshot.get("phase")
    diag = snapshot.get("diagnostics")
    if phase == "init":
        return "Not yet converged: finding starting points."
    if phase == "warmup":
        return (f"Not yet converged: warm-up, iteration {snapshot.get('iteration', 0)} of "
                f"{snapshot.get('warmup_iterations', '?')}; convergence is checked once sampling starts.")
    draws = snapshot.get("draws_per_chain")
    if not diag:
        if phase == "done":
            return "Not converged: the run ended before any convergence check. Do not report."
        return f"Not yet converged: still sampling ({draws} draws per chain so far), no check yet."
    rhat_limit, ess_min = thresholds(diag)
    rhat = num(diag.get("rhat_max"))
    ess = [v for v in (num(diag.get("ess_bulk_min")), num(diag.get("ess_tail_min"))) if v is not None]
    ess_min_seen = min(ess) if ess else None
    r_txt = "max R-hat –" if rhat is None else f"max R-hat {fmt_rhat(rhat)}"
    e_txt = "min ESS –" if ess_min_seen is None else f"min ESS {ess_min_seen:,.0f}"
    crit = diag.get("criterion") or f"max R-hat < {rhat_limit:g} and min bulk and tail ESS >= {ess_min:g}"
    if phase == "done":
        if diag.get("converged"):
            return f"Converged: {r_txt}, {e_txt} (criterion: {crit})."
        why = {"stopped": "stopped on request",
               "unconverged": "the time budget or draw limit was reached"}.get(snapshot.get("status"),
                                                                               "the run ended")
        return f"Not converged: {r_txt}, {e_txt} (criterion: {crit}); {why}. Do not report."
    if diag.get("converged"):
        return (f"Criterion met ({r_txt}, {e_txt}); still sampling to reach "
                f"{snapshot.get('draws_requested', '?')} draws per chain ({draws} so far).")
    return (f"Not yet converged: {r_txt} (needs < {rhat_limit:g}), {e_txt} (needs ≥ {ess_min:g}); "
            f"still sampling ({draws} draws per chain so far).")


def diagnostics_note(snapshot):
    """One plain line under the convergence table: what R-hat and ESS mean, and the criterion used.

    Parameters
    ----------
    snapshot : dict or None
        The thresholds are the snapshot's (:func:`thresholds`); without a
        snapshot, the engine's criterion.

    Returns
    -------
    str
        E.g. "R-hat compares the chains: below 1.01 means they agree (1 is
        perfect). ESS is the number of independent draws the chains are worth:
        at least 400 for every quantity, bulk and tail. A fit is converged when
        both hold."
    """
    rhat_limit, ess_min = thresholds((snapshot or {}).get("diagnostics"))
    return (f"R-hat compares the chains: below {rhat_limit:g} means they agree (1 is perfect). "
            f"ESS is the number of independent draws the chains are worth: at least {ess_min:,.0f} for every "
            "quantity, in the bulk and in the tails. A fit is converged when both hold.")
