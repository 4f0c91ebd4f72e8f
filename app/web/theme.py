"""Colours, font sizes and the shared Plotly layout of every Bendline figure.

Colours come from the Okabe & Ito (2008) "Color Universal Design" set, which
stays distinguishable under the common colour-vision deficiencies, plus
neutral greys for the data. Each role below names what the colour means, so
figures never pick hex codes of their own. Fonts are system fonts only (no
web fonts are fetched); the base size of 15 px reads at 1280 px wide and on a
projector.
"""

from __future__ import annotations

import copy

# -- the Okabe & Ito palette -------------------------------------------------
BLACK = "#000000"
ORANGE = "#E69F00"
SKY_BLUE = "#56B4E9"
BLUISH_GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILLION = "#D55E00"
REDDISH_PURPLE = "#CC79A7"

#: The eight colours in their published order.
OKABE_ITO = (BLACK, ORANGE, SKY_BLUE, BLUISH_GREEN, YELLOW, BLUE, VERMILLION, REDDISH_PURPLE)

# -- neutrals ----------------------------------------------------------------
WHITE = "#FFFFFF"
INK = "#1A1A1A"  # text and axis lines (contrast 17:1 on white)
MUTED_INK = "#4D4D4D"  # secondary text (8.5:1)
GRID = "#E1E1E1"
COUNT_GREY = "#BDBDBD"  # count bars: the data, kept quiet so the model reads on top
POINT_GREY = "#4D4D4D"  # count points (style="points")


def rgba(hex_colour, alpha):
    """An ``rgba(...)`` CSS colour from ``#RRGGBB`` and an opacity.

    Parameters
    ----------
    hex_colour : str
        ``"#RRGGBB"``.
    alpha : float
        Opacity from 0 (transparent) to 1 (opaque).

    Returns
    -------
    str
    """
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[i:i + 2], 16) for i in (0, 2, 4))
    return f"rgba({r},{g},{b},{alpha:g})"


def blend(hex_colour, alpha, background=WHITE):
    """The opaque ``#RRGGBB`` that ``hex_colour`` at opacity ``alpha`` shows over ``background``.

    Parameters
    ----------
    hex_colour, background : str
        ``"#RRGGBB"``.
    alpha : float

    Returns
    -------
    str
    """
    fg = [int(hex_colour.lstrip("#")[i:i + 2], 16) for i in (0, 2, 4)]
    bg = [int(background.lstrip("#")[i:i + 2], 16) for i in (0, 2, 4)]
    return "#" + "".join(f"{round(alpha * f + (1 - alpha) * b):02X}" for f, b in zip(fg, bg))


# -- roles -------------------------------------------------------------------
#: 7-day centred average of the counts.
AVERAGE_LINE = INK
#: Posterior median of the trend and its 90% interval.
TREND_LINE = BLUE
TREND_BAND = rgba(BLUE, 0.30)
#: 90% posterior predictive interval of the counts (lighter, wider).
PREDICTIVE_BAND = rgba(SKY_BLUE, 0.22)
#: "If the current trend continues": same hues as the fit, lighter, dashed.
PROJECTION_LINE = BLUE
PROJECTION_BAND = rgba(BLUE, 0.15)
PROJECTION_PREDICTIVE_BAND = rgba(SKY_BLUE, 0.12)
#: The analyst's tentative change dates (draggable lines) and their spread.
TENTATIVE_LINE = BLUISH_GREEN
TENTATIVE_SPREAD = rgba(BLUISH_GREEN, 0.10)
#: Posterior change dates, one colour per change date (cycled). Green is left
#: out so they never look like the analyst's own lines.
CHANGE_DATE_COLOURS = (VERMILLION, REDDISH_PURPLE, ORANGE, SKY_BLUE, BLACK)
#: Interval line of a posterior change date on the main chart.
CHANGE_DATE_INTERVAL = INK
#: Shading of the segment picked in any panel (and the same shade, opaque).
HIGHLIGHT_ALPHA = 0.35
HIGHLIGHT = rgba(YELLOW, HIGHLIGHT_ALPHA)
HIGHLIGHT_SOLID = blend(YELLOW, HIGHLIGHT_ALPHA)
#: Growth-rate rows: interval above zero, below zero, straddling zero.
GROWING = VERMILLION
SHRINKING = BLUE
UNCLEAR = "#6B6B6B"
#: Reference lines (zero growth, factor 1, residual 0).
REFERENCE_LINE = INK
#: Status notes: provisional / not converged.
WARNING_BORDER = VERMILLION
WARNING_FILL = "#FFF1E6"
WARNING_TEXT = INK
#: MCMC chains: seven colours (yellow is too pale for a thin line on white);
#: from the eighth chain on the colours repeat with the next dash pattern.
CHAIN_COLOURS = (BLUE, VERMILLION, BLUISH_GREEN, REDDISH_PURPLE, ORANGE, SKY_BLUE, BLACK)
CHAIN_DASHES = ("solid", "dash", "dot", "dashdot", "longdash", "longdashdot")

# -- type ----------------------------------------------------------------------
FONT_FAMILY = ("'Segoe UI', 'Helvetica Neue', Helvetica, Arial, 'Liberation Sans', "
               "'DejaVu Sans', sans-serif")
FONT_SIZE = 15  # px, body text in figures
TICK_SIZE = 14  # px, tick labels
AXIS_TITLE_SIZE = 15  # px
TITLE_SIZE = 17  # px, figure titles
SMALL_SIZE = 13  # px, annotations beside rows, legend group notes
NOTE_SIZE = 16  # px, status notes and empty-state messages

#: Thin, normal and strong line widths, px.
LINE_THIN = 1.5
LINE = 2.0
LINE_STRONG = 3.0

#: Plotly figure config the app may pass to dcc.Graph (no logo, PNG export).
GRAPH_CONFIG = {"displaylogo": False, "toImageButtonOptions": {"format": "png", "scale": 2}}


def _axis():
    return {
        "showgrid": True,
        "gridcolor": GRID,
        "zeroline": False,
        "showline": True,
        "linecolor": INK,
        "linewidth": 1,
        "ticks": "outside",
        "tickcolor": INK,
        "tickfont": {"size": TICK_SIZE, "color": INK},
        "title": {"font": {"size": AXIS_TITLE_SIZE, "color": INK}, "standoff": 8},
        "automargin": True,
    }


_BASE = {
    "font": {"family": FONT_FAMILY, "size": FONT_SIZE, "color": INK},
    "paper_bgcolor": WHITE,
    "plot_bgcolor": WHITE,
    "colorway": list(CHAIN_COLOURS),
    "margin": {"l": 70, "r": 24, "t": 56, "b": 56},
    # titles start at the figure's left edge (not the plot area's), so a long one
    # still fits a narrow panel
    "title": {"font": {"size": TITLE_SIZE, "color": INK}, "x": 0.0, "xanchor": "left",
              "xref": "container", "pad": {"l": 12, "t": 8}, "y": 1.0, "yanchor": "top",
              "yref": "container"},
    "xaxis": _axis(),
    "yaxis": _axis(),
    "legend": {"font": {"size": TICK_SIZE, "color": INK}, "bgcolor": "rgba(255,255,255,0.85)",
               "borderwidth": 0},
    "hoverlabel": {"font": {"family": FONT_FAMILY, "size": TICK_SIZE, "color": INK},
                   "bgcolor": WHITE, "bordercolor": MUTED_INK},
    "hovermode": "closest",
}


def _merge(base, extra):
    out = dict(base)
    for key, value in extra.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


def base_layout(**overrides):
    """The layout every figure starts from, with ``overrides`` merged in.

    Nested dicts are merged key by key, so ``base_layout(xaxis={"title":
    {"text": "Date"}})`` keeps the grid, ticks and fonts of the x axis; any
    other value replaces the base one.

    Parameters
    ----------
    **overrides
        Plotly layout properties (``xaxis``, ``yaxis2``, ``margin`` ...).
        An axis key absent from the base (``yaxis2``, ``xaxis3`` ...) starts
        from the base axis style.

    Returns
    -------
    dict
        A fresh dict (safe to modify) for ``go.Figure(layout=...)``.
    """
    base = copy.deepcopy(_BASE)
    for key in overrides:
        if (key.startswith("xaxis") or key.startswith("yaxis")) and key not in base:
            base[key] = _axis()
    return _merge(base, overrides)


def axis_style(**overrides):
    """The base axis style (for subplot axes), with ``overrides`` merged in.

    Returns
    -------
    dict
    """
    return _merge(_axis(), overrides)
