"""How many segments the data support: each K's PSIS-LOO score against the best, with its uncertainty."""

from __future__ import annotations

import plotly.graph_objects as go

from .. import theme as th


def support_figure(support):
    """Each K's elpd below the best converged fit, ± 2 standard errors, the advised K marked.

    Fits that did not converge are drawn apart (grey crosses at their raw
    score's place, no error bar, no weight): their scores are not reliable
    and take no part in the weights or the advice.

    Parameters
    ----------
    support : list of dict
        The result's ``segment_support`` (segments, feasible, score, se,
        elpd_diff, se_diff, weight, recommended, converged, ...).

    Returns
    -------
    plotly.graph_objects.Figure
    """
    rows = [s for s in support or [] if s.get("feasible")]
    scored = [s for s in rows if s.get("elpd_diff") is not None]
    unscored = [s for s in rows if s.get("elpd_diff") is None]
    best_score = max((s["score"] for s in scored), default=None)
    traces = []
    if scored:
        traces.append(go.Scatter(
            name="converged fits", x=[s["segments"] for s in scored], y=[-s["elpd_diff"] for s in scored],
            mode="markers+text", text=[f"{100 * s['weight']:.0f}%" for s in scored], textposition="top center",
            error_y={"type": "data", "array": [2 * s["se_diff"] for s in scored], "visible": True,
                     "color": th.MUTED_INK},
            marker={"size": 12, "symbol": ["star" if s.get("recommended") else "circle" for s in scored],
                    "color": [th.BLUE if s.get("recommended") else th.COUNT_GREY for s in scored]},
            hovertext=[(f"K = {s['segments']}{' (advised)' if s.get('recommended') else ''}<br>"
                        f"below the best by {s['elpd_diff']:.1f} (standard error {s['se_diff']:.1f})<br>"
                        f"stacking weight {100 * s['weight']:.0f}%<br>elpd_loo {s['score']:.1f} (se {s['se']:.1f})")
                       for s in scored],
            hoverinfo="text", cliponaxis=False))
    if unscored:
        y = [(s["score"] - best_score) if best_score is not None else 0.0 for s in unscored]
        traces.append(go.Scatter(
            name="did not converge (not scored)", x=[s["segments"] for s in unscored], y=y,
            mode="markers+text", text=["not converged"] * len(unscored), textposition="bottom center",
            marker={"size": 11, "symbol": "x", "color": th.MUTED_INK},
            hovertext=[f"K = {s['segments']}: did not converge; its score is not reliable and takes no part "
                       "in the weights or the advice" for s in unscored],
            hoverinfo="text", cliponaxis=False))
    ks = [s["segments"] for s in rows]
    fig = go.Figure(traces)
    fig.update_layout(**th.base_layout(
        height=250,
        margin={"l": 56, "r": 12, "t": 34, "b": 44},
        showlegend=bool(unscored),
        legend={"orientation": "h", "y": -0.32, "x": 0, "font": {"size": th.SMALL_SIZE}},
        xaxis={"title": {"text": "Segments (K)"}, "tickmode": "array", "tickvals": ks},
        yaxis={"title": {"text": "elpd vs best"}, "zeroline": True},
        title={"text": "PSIS-LOO: score below the best, ±2 SE (star: advised; % stacking weight)",
               "font": {"size": th.SMALL_SIZE}},
    ))
    return fig
