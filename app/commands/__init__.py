"""Subcommands of the ``bendline`` command line, one module each."""

from __future__ import annotations


def register_all(sub):
    """Add every subcommand to an argparse subparsers object."""
    from . import batch, fit, options_cmd, report, serve, users, worker

    fit.register(sub)
    options_cmd.register(sub)
    batch.register(sub)
    report.register(sub)
    serve.register(sub)
    worker.register(sub)
    users.register(sub)
