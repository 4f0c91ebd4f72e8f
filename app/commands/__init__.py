"""Subcommands of the ``bendline`` command line, one module each."""

from __future__ import annotations


def register_all(sub):
    """Add every subcommand to an argparse subparsers object."""
    from . import fit, serve

    fit.register(sub)
    serve.register(sub)
