"""Options and output shared by the subcommands."""

import json
import math
import shlex
import sys

from ..demo import demo_setup_path
from ..setup_file import load_setup


def add_setup_arguments(p, optional=False):
    """SETUP (optional: the bundled demo), repeatable ``--set KEY=VALUE`` and ``--json``."""
    if optional:
        p.add_argument("setup", nargs="?", help="setup TOML file (default: the bundled demo)")
    else:
        p.add_argument("setup", help="setup TOML file")
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help="override one setup value for this run, e.g. beam.pump.power_mW=25 "
                        "(repeatable)")
    p.add_argument("--json", action="store_true", help="print one JSON object on stdout")


def setup_from_args(args):
    """Load the setup named on the command line and apply every ``--set``."""
    from ..errors import InputError

    path = args.setup or demo_setup_path()
    setup = load_setup(path)
    for item in args.set:
        key, sep, value = item.partition("=")
        if not sep or not key:
            raise InputError(f"--set needs KEY=VALUE, got {item!r}", file=str(path), table="--set")
        setup = setup.with_value(key.strip(), value.strip())
    return setup


def _clean(obj):
    """JSON-safe: non-finite floats become null (JSON has no NaN)."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item"):  # numpy scalar
        return _clean(obj.item())
    return obj


def print_json(obj):
    json.dump(_clean(obj), sys.stdout, indent=2, allow_nan=False)
    sys.stdout.write("\n")


def status(message):
    """Progress and notes go to stderr, never stdout."""
    print(message, file=sys.stderr, flush=True)


def command_line():
    """The command as typed, for storing with results."""
    return "pumpsim " + " ".join(shlex.quote(a) for a in sys.argv[1:])
