"""The ``fit`` and ``batch`` flags, made from the option table (:mod:`inference.options`).

Every flag is an option of the table (``--name-with-dashes``); argparse only
collects strings, and :func:`inference.options.engine_options` coerces and
validates them, so the command line, the API and the dashboard refuse the
same values with the same messages.
"""

from __future__ import annotations

from bendline.inference.options import LOADER_OPTIONS, OPTIONS, check_public, engine_options


def _add(p, option):
    help_text = f"{option.help} (default: {option.default_text})" if option.default_text else option.help
    help_text = help_text.replace("%", "%%")
    dest = option.name
    if option.kind == "auto_bool":
        group = p.add_mutually_exclusive_group()
        group.add_argument(option.flag, dest=dest, action="store_true", default=None, help=help_text)
        group.add_argument("--no-" + option.flag[2:], dest=dest, action="store_false")
    elif option.kind == "bool":
        p.add_argument(option.flag, dest=dest, action="store_true", default=None, help=help_text)
    elif option.kind == "change_dates":
        p.add_argument(option.flag, dest=dest, action="append", metavar="DATE[:SPREAD]", help=help_text)
    elif option.kind == "choice":
        p.add_argument(option.flag, dest=dest, choices=option.choices, help=help_text)
    else:
        metavar = option.metavar or {"fractions": "F,F,...", "text": "NAME"}.get(option.kind, "VALUE")
        p.add_argument(option.flag, dest=dest, metavar=metavar, help=help_text)


def add_input_arguments(p):
    """Flags that say how to read the file (region is added by the commands that take one)."""
    for option in LOADER_OPTIONS:
        if option.name != "region":
            _add(p, option)


def add_model_arguments(p):
    """Flags that set the model, its priors, the projection and the sampler."""
    for option in OPTIONS:
        _add(p, option)


def public_from_args(args):
    """The options the flags gave (public names; flags left out are not in the dict)."""
    return {o.name: getattr(args, o.name) for o in OPTIONS if getattr(args, o.name, None) is not None}


def options_from_args(args, series):
    """The engine's options from parsed flags (change dates turned into days here, where the series is known)."""
    return engine_options(public_from_args(args), series)


def check_args(args):
    """Coerce and validate the flags that need no series (InputError names the flag's option)."""
    return check_public(public_from_args(args))
