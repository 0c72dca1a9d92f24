"""Subcommands of the ``pumpsim`` command, one module each.

Each module provides ``add_parser(subparsers)``, which registers the
subcommand and sets ``handler`` to a function ``handler(args) -> int``.
"""

from . import check, compare, fit, gui, info, probe, run, scan, size

COMMANDS = (run, info, check, size, compare, scan, probe, fit, gui)
