"""The ``pumpsim`` command: one program, one subcommand per job.

Exit codes (``files.md``): 0 success, 2 bad input (the message names file,
table and key), 1 anything else. No traceback reaches the user unless
``PUMPSIM_DEBUG=1`` is set.
"""

import argparse
import os
import signal
import sys
import threading
import warnings

from . import __version__
from .commands import COMMANDS
from .errors import InputError
from .executors import ExecutorLost
from .outpaths import OutputError


class Terminated(KeyboardInterrupt):
    """SIGTERM (``kill``, a batch system's time limit), raised in the main thread so that
    the work stops as for Ctrl-C: finished scan points kept, worker processes ended."""


def _terminate(signum, frame):
    raise Terminated


def build_parser():
    parser = argparse.ArgumentParser(
        prog="pumpsim",
        description="Optical pumping of atomic beams: multilevel rate equations averaged "
                    "over the beam's speeds, angles and offsets.")
    parser.add_argument("--version", action="version", version=f"pumpsim {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMANDS:
        module.add_parser(sub)
    return parser


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    # the window's event loop would hold the exception back: it keeps the default
    catch_term = (threading.current_thread() is threading.main_thread()
                  and args.command != "gui")
    previous = signal.signal(signal.SIGTERM, _terminate) if catch_term else None
    try:
        with warnings.catch_warnings():
            if not os.environ.get("PUMPSIM_DEBUG"):
                # numpy's overflow/underflow notes (e.g. a far-detuned Lorentzian going to
                # zero) are not for users; non-finite results are refused by simulate()
                warnings.simplefilter("ignore", RuntimeWarning)
            return args.handler(args) or 0
    except InputError as exc:
        print(f"pumpsim: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into e.g. `head`, which stopped reading
        sys.stdout = open(os.devnull, "w")
        return 0
    except KeyboardInterrupt as exc:
        stop = "terminated (SIGTERM)" if isinstance(exc, Terminated) else "interrupted"
        print(f"pumpsim: {stop}", file=sys.stderr)
        return 1
    except (OutputError, ExecutorLost) as exc:  # messages written for users as they are
        if os.environ.get("PUMPSIM_DEBUG"):
            raise
        print(f"pumpsim: failed: {exc}", file=sys.stderr)
        return 1
    except Exception as exc:  # the contract: exit 1, a message, no traceback
        if os.environ.get("PUMPSIM_DEBUG"):
            raise
        print(f"pumpsim: failed: {type(exc).__name__}: {exc}", file=sys.stderr)
        return 1
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


if __name__ == "__main__":
    sys.exit(main())
