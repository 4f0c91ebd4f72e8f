"""``bendline options``: every fit option with its flag, API key, default and meaning."""

from __future__ import annotations

import sys

from .common import EXIT_OK


def register(sub):
    p = sub.add_parser("options", help="list every fit option (flag, API key, default, meaning)",
                       description="Print the option table the command line, the API and the dashboard share, "
                                   "as a Markdown table (the README's option list).")
    p.set_defaults(handler=run_options)


def run_options(_args):
    from bendline.inference.options import markdown_table

    sys.stdout.write(markdown_table() + "\n")
    return EXIT_OK
