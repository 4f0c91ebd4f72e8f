"""The ``bendline`` command line.

``bendline fit FILE ...`` runs the engine headless and writes the JSON result.
Exit status: 0 when the fit converged; 3 when it finished unconverged (the
result is still written, with ``diagnostics.converged = false``); 2 for bad
input (a one-paragraph message on stderr naming file, row, column, value and
what was expected); 1 for anything else (a message, never a traceback);
130 when interrupted.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

EXIT_OK = 0
EXIT_ERROR = 1
EXIT_INPUT = 2
EXIT_UNCONVERGED = 3  # finished, but not reportable (unconverged, or a warning invalidates the numbers)


class _Parser(argparse.ArgumentParser):
    """argparse that reports errors as one paragraph with exit status 2."""

    def error(self, message):
        self.print_usage(sys.stderr)
        sys.stderr.write(f"bendline: {message}\n")
        raise SystemExit(EXIT_INPUT)


def build_parser():
    """The argument parser for every subcommand."""
    parser = _Parser(prog="bendline", description=__doc__.split("\n\n")[0])
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    from .commands import register_all

    register_all(sub)
    return parser


def main(argv=None):
    """Entry point of the ``bendline`` script."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.handler(args) or 0)
    except KeyboardInterrupt:
        sys.stderr.write("bendline: interrupted\n")
        return 130
    except BrokenPipeError:
        return EXIT_ERROR
    except Exception as exc:  # a bug of ours: say so in one line, no traceback
        sys.stderr.write(
            f"bendline {args.command}: internal error ({type(exc).__name__}: {exc}); "
            "please report it with the command you ran\n"
        )
        return EXIT_ERROR


def emit_json(obj, path):
    """Write ``obj`` as JSON to ``path``, or to stdout when path is None or '-'."""
    text = json.dumps(obj, indent=1, allow_nan=False)
    if path in (None, "-"):
        sys.stdout.write(text + "\n")
    else:
        tmp = f"{path}.tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text + "\n")
        os.replace(tmp, path)


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
