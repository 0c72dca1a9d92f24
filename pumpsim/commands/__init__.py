"""Subcommands of the ``pumpsim`` command, one module each.

Each module provides ``add_parser(subparsers)``, which registers the
subcommand and sets ``handler`` to a function ``handler(args) -> int``.
"""

from . import check, gui, info, run

COMMANDS = (run, info, check, gui)
