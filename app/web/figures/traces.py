"""The trace plot: one line per chain of a reported quantity's recent draws.

The engine keeps the last draws of each chain, thinned (``traces.draw``: the
1-based draw numbers after warm-up; ``traces.thin``: one draw kept in so
many). Older snapshots had ``traces.iteration`` instead, drawn as it is.
"""

from __future__ import annotations

import plotly.graph_objects as go

from bendline.inference.wording import fmt_rhat

from .. import theme as th
from .common import empty_figure, num, nums, ordinal

HEIGHT = 380
#: Indices in ``layout.annotations``: the note under the plot (chains,
#: thinning) and the R-hat and ESS line under the title.
NOTE_ANNOTATION = 0
CONVERGENCE_ANNOTATION = 1


def _trace_parts(snapshot, parameter_name):
    traces = (snapshot or {}).get("traces") or {}
    names = traces.get("names") or []
    if parameter_name not in names:
        return None
    values = (traces.get("values") or [])[names.index(parameter_name)]
    x = list(traces.get("draw") or traces.get("iteration") or [])
    return [{"x": x, "y": nums(chain)} for chain in values]


def _convergence(snapshot, parameter_name):
    """The quantity's R-hat and ESS, as a line under the title (annotation)."""
    diag = (snapshot or {}).get("diagnostics") or {}
    bits = []
    for p in diag.get("parameters") or []:
        if p.get("name") == parameter_name:
            if num(p.get("rhat")) is not None:
                bits.append(f"R-hat {fmt_rhat(p['rhat'])}")
            if num(p.get("ess_bulk")) is not None:
                bits.append(f"bulk ESS {p['ess_bulk']:,.0f}")
            if num(p.get("ess_tail")) is not None:
                bits.append(f"tail ESS {p['ess_tail']:,.0f}")
    text = " · ".join(bits) if bits else "R-hat and ESS: not computed yet"
    return {"name": "convergence", "text": text, "xref": "paper", "x": 0, "xanchor": "left", "yref": "paper",
            "y": 1, "yshift": 10, "yanchor": "bottom", "showarrow": False, "align": "left",
            "font": {"size": th.FONT_SIZE, "color": th.INK}}


def _note(snapshot, chains):
    """'8 chains, one line style each; every 2nd draw shown' (under the plot)."""
    traces = (snapshot or {}).get("traces") or {}
    many = chains > len(th.CHAIN_COLOURS)
    text = f"{chains} chain{'s' if chains != 1 else ''}, one {'line style' if many else 'colour'} each"
    thin = traces.get("thin")
    if isinstance(thin, (int, float)) and thin > 1:
        text += f"; every {ordinal(thin)} draw shown"
    return {"name": "chains", "text": text + "<br>Hover a line to see its chain.", "xref": "paper", "x": 0,
            "xanchor": "left", "yref": "paper", "y": 0, "yshift": -52, "yanchor": "top", "showarrow": False,
            "align": "left", "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}


def _chain_line(c):
    return {"color": th.CHAIN_COLOURS[c % len(th.CHAIN_COLOURS)],
            "dash": th.CHAIN_DASHES[(c // len(th.CHAIN_COLOURS)) % len(th.CHAIN_DASHES)],
            "width": 1.4}


def trace_figure(snapshot, parameter_name):
    """Trace plot: one line per chain of a reported quantity's recent draws.

    Parameters
    ----------
    snapshot : dict or None
        Engine snapshot; ``traces`` holds ``draw`` (1-based draw numbers
        after warm-up, thinned; ``iteration`` in older snapshots), ``thin``,
        ``names`` and ``values[parameter][chain][k]``.
    parameter_name : str
        One of ``snapshot["traces"]["names"]`` (units are in the name, e.g.
        "growth rate 1 (per day)").

    Returns
    -------
    plotly.graph_objects.Figure
        One trace per chain ("chain 1", ...); chains 8 and up repeat the
        colours with the next dash pattern. The title names the quantity;
        ``layout.annotations[1]`` under it gives its R-hat and ESS. No
        legend: ``layout.annotations[0]`` under the plot says how many
        chains there are. A note instead while there are no traces
        (warm-up) or the name is unknown.
    """
    parts = _trace_parts(snapshot, parameter_name)
    if parts is None:
        if not snapshot or not snapshot.get("traces"):
            phase = (snapshot or {}).get("phase")
            if phase == "warmup":
                msg = (f"Traces appear once sampling starts (warm-up: iteration "
                       f"{snapshot.get('iteration', 0)} of {snapshot.get('warmup_iterations', '?')}).")
            elif phase == "init":
                msg = "Traces appear once sampling starts (finding starting points)."
            else:
                msg = "Traces appear once sampling starts."
        else:
            msg = f"No trace recorded for \u201c{parameter_name}\u201d."
        return empty_figure(msg)
    traces = [go.Scatter(name=f"chain {c + 1}", mode="lines", line=_chain_line(c),
                         hovertemplate=f"chain {c + 1}, draw %{{x}}: %{{y:.4g}}<extra></extra>", **p)
              for c, p in enumerate(parts)]
    layout = th.base_layout(
        height=HEIGHT,
        # aligned with the plot area, like the R-hat and ESS line under it
        title={"text": parameter_name, "xref": "paper", "pad": {"l": 0}},
        uirevision=f"trace|{parameter_name}",
        margin={"l": 76, "r": 20, "t": 66, "b": 92},
        xaxis={"title": {"text": "Draw after warm-up"}},
        yaxis={"title": {"text": parameter_name}},
        showlegend=False,
        annotations=[_note(snapshot, len(parts)), _convergence(snapshot, parameter_name)],
        hovermode="closest",
    )
    return go.Figure(data=traces, layout=layout)


def trace_updates(snapshot, parameter_name):
    """What changes in :func:`trace_figure` from one snapshot to the next.

    Returns
    -------
    dict
        ``{"trace_count": chains, "traces": {c: {"x", "y"}}, "annotations":
        {0: chains note, 1: R-hat and ESS}}``; ``trace_count`` 0 when there
        are no traces for the name.
    """
    parts = _trace_parts(snapshot, parameter_name)
    if parts is None:
        return {"trace_count": 0, "traces": {}}
    return {"trace_count": len(parts), "traces": dict(enumerate(parts)),
            "annotations": {NOTE_ANNOTATION: _note(snapshot, len(parts)),
                            CONVERGENCE_ANNOTATION: _convergence(snapshot, parameter_name)}}
