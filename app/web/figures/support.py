"""How many segments the data support: stacking weights by segment count."""

from __future__ import annotations

import plotly.graph_objects as go

from .. import theme as th


def support_figure(support):
    """Bar chart of stacking weights per K, the recommended K marked.

    Parameters
    ----------
    support : list of dict
        The result's ``segment_support`` (segments, feasible, score, se,
        elpd_diff, se_diff, weight, recommended, ...).

    Returns
    -------
    plotly.graph_objects.Figure
    """
    rows = [s for s in support or [] if s.get("feasible")]
    ks = [s["segments"] for s in rows]
    colours = [th.BLUE if s.get("recommended") else th.COUNT_GREY for s in rows]
    text = [f"{100 * s['weight']:.0f}%" for s in rows]
    hover = [
        (f"K = {s['segments']}<br>stacking weight {100 * s['weight']:.1f}%<br>elpd_loo {s['score']:.1f} "
         f"(se {s['se']:.1f})<br>below the best by {s['elpd_diff']:.1f} (se {s['se_diff']:.1f})"
         + ("" if s.get("converged") else "<br>this fit did not converge"))
        for s in rows
    ]
    fig = go.Figure(go.Bar(x=ks, y=[s["weight"] for s in rows], marker={"color": colours}, text=text,
                           textposition="outside", hovertext=hover, hoverinfo="text", cliponaxis=False))
    fig.update_layout(**th.base_layout(
        height=230,
        margin={"l": 48, "r": 12, "t": 30, "b": 44},
        showlegend=False,
        xaxis={"title": {"text": "Segments (K)"}, "tickmode": "array", "tickvals": ks},
        yaxis={"title": {"text": "Stacking weight"}, "range": [0, 1.15], "tickformat": ".0%"},
        title={"text": "Support by PSIS-LOO (blue: advised)", "font": {"size": th.FONT_SIZE}},
    ))
    return fig
