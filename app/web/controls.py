"""The dashboard's option controls, made from the option table (:mod:`inference.options`).

Each option except the tentative change dates (which have their own list and
the chart) gets one labelled control whose id is the option's name with
dashes (``draws``, ``growth-prior-pct``). :func:`public_from_controls` and
:func:`controls_from_public` translate between the controls' values and the
public options, so Fit, "How many segments?", the board and the restore of a
reopened run all read and set the controls the same way.
"""

from __future__ import annotations

from dash import dcc, html

from bendline.inference.options import OPTIONS, label_for

#: The options with a control of their own, in the order callbacks list them.
CONTROL_OPTIONS = tuple(o for o in OPTIONS if o.kind != "change_dates")
NAMES = tuple(o.name for o in CONTROL_OPTIONS)
BY_NAME = {o.name: o for o in CONTROL_OPTIONS}
#: The weekday control's choices: the automatic rule, or forced on or off.
WEEKDAY_CHOICES = (("auto", "Automatic: on for daily series, off for weekly"), ("on", "On"), ("off", "Off"))
NUMBER_WIDTH = {"chains": "4.5em", "seed": "7em", "thin": "5em"}


def control_id(name):
    """The control's component id: the option's name with dashes."""
    return name.replace("_", "-")


def legend_id(cid):
    """Id of the legend naming a group of radio buttons (assets/a11y.js names the group by it)."""
    return f"{cid}-legend"


def control(option, interval_days=1):
    """One labelled control (a div holding the label, the input and its hint).

    Every control has a name a screen reader reads: a ``<label for=id>`` for a
    field, the legend of its fieldset for a group of radio buttons (Dash's
    RadioItems markup is repaired into a named radiogroup by assets/a11y.js),
    the option's label beside a checkbox.
    """
    cid = control_id(option.name)
    label = label_for(option, interval_days)
    hint = f"blank: {option.default_text}" if option.default is None and option.default_text else ""
    if option.kind == "choice":
        return html.Fieldset(className="field radio-field", children=[
            html.Legend(label, className="field-label", id=legend_id(cid)),
            dcc.RadioItems(id=cid, value=option.default, className="radio",
                           options=[{"label": f" {text}", "value": v}
                                    for v, text in zip(option.choices, option.choice_labels)]),
        ])
    if option.kind == "auto_bool":
        return html.Fieldset(className="field radio-field", children=[
            html.Legend(label, className="field-label", id=legend_id(cid)),
            dcc.RadioItems(id=cid, value="auto", className="radio",
                           options=[{"label": f" {text}", "value": v} for v, text in WEEKDAY_CHOICES]),
        ])
    if option.kind == "bool":
        return html.Div(className="field check-field", children=[
            dcc.Checklist(id=cid, value=[], className="check",
                          options=[{"label": f" {label}", "value": "on"}]),
        ])
    if option.kind in ("fractions", "text"):
        box = dcc.Input(id=cid, type="text", value=None, debounce=True, className="text",
                        placeholder="e.g. 0.5,0.8,0.95" if option.kind == "fractions" else "")
    else:
        # step 1 or "any": the browser marks a value off the step grid (counted from
        # min) invalid, and Dash then reports the field as empty
        box = dcc.Input(id=cid, type="number", value=option.default, min=option.lo, max=option.hi,
                        step=1 if option.kind == "int" else "any", debounce=True, className="num",
                        style={"width": NUMBER_WIDTH.get(option.name, "6em")})
    children = [html.Label(label, htmlFor=cid, className="field-label"), box]
    if hint or option.kind == "fractions":
        children.append(html.Div(hint or option.help, className="field-hint", id=f"{cid}-hint"))
    return html.Div(children, className="field")


def controls(group, interval_days=1, exclude=()):
    """The controls of one option group (``model``, ``projection``, ``sampler``), in table order."""
    return [control(o, interval_days) for o in CONTROL_OPTIONS if o.group == group and o.name not in exclude]


def public_from_controls(values):
    """Public options from the controls' values ({option name: control value}); blank ones left out."""
    out = {}
    for name, value in values.items():
        option = BY_NAME.get(name)
        if option is None or value is None or value == "":
            continue
        if option.kind == "bool":
            value = bool(value) if isinstance(value, list) else value
            if not value:
                continue
        elif option.kind == "auto_bool":
            if value == "auto":
                continue
            value = {"on": True, "off": False}.get(value, value)
        out[name] = value
    return out


def controls_from_public(public):
    """Control values ({option name: value}) that show these public options (defaults for the rest)."""
    out = {}
    for o in CONTROL_OPTIONS:
        value = public.get(o.name, o.default)
        if o.kind == "bool":
            value = ["on"] if value else []
        elif o.kind == "auto_bool":
            value = "auto" if value is None else ("on" if value else "off")
        elif o.kind == "fractions":
            value = ",".join(f"{v:g}" for v in value) if value else None
        out[o.name] = value
    return out
