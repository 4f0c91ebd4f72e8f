"""The ``bendline`` command line.

``bendline fit FILE ...`` runs the engine headless and writes the JSON result.
Exit statuses: :mod:`app.commands.common`.
"""

from __future__ import annotations

import argparse
import sys

from .commands.common import EXIT_ERROR, EXIT_INPUT, EXIT_OK, EXIT_UNCONVERGED, emit_json  # noqa: F401


#: Packages only team mode needs (the ``team`` extra).
TEAM_MODULES = ("celery", "redis", "gunicorn", "kombu")


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
    except ModuleNotFoundError as exc:
        if (exc.name or "").split(".")[0] in TEAM_MODULES:
            sys.stderr.write(f"bendline {args.command}: team mode needs its extra packages ({exc.name} is not "
                             "installed): pip install 'bendline[team]'\n")
            return EXIT_ERROR
        sys.stderr.write(f"bendline {args.command}: a package Bendline needs is missing ({exc.name}); "
                         "reinstall Bendline\n")
        return EXIT_ERROR
    except Exception as exc:  # a bug of ours: say so in one line, no traceback
        sys.stderr.write(
            f"bendline {args.command}: internal error ({type(exc).__name__}: {exc}); "
            "please report it with the command you ran\n"
        )
        return EXIT_ERROR


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
