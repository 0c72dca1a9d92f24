"""Options shared by the commands that run many simulations: executor, ranges, plots."""

import logging
import os

from ..errors import InputError
from ..executors import make_executor
from ..executors.cluster import NO_WORKERS_TIMEOUT
from ..outpaths import check_output
from ..progress import Progress


def add_executor_arguments(p):
    """``--workers N`` and ``--scheduler ADDRESS``."""
    g = p.add_argument_group("where the simulations run")
    g.add_argument("--workers", type=int, metavar="N",
                   help="local worker processes (default: all cores; 1 runs everything in "
                        "this process)")
    g.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on a Dask distributed cluster through its scheduler, e.g. "
                        "tcp://10.0.0.5:8786 (needs the optional extra: pip install "
                        "'pumpsim[dask]')")
    g.add_argument("--worker-wait", type=float, metavar="SECONDS",
                   help="with --scheduler: how long the cluster may have no worker (all "
                        "died, or none has started yet) before the work stops, keeping what "
                        f"is done (default {NO_WORKERS_TIMEOUT:g})")


def add_batch_arguments(p, handler):
    """``--plot FILE`` and the executor options, and the subcommand's handler."""
    p.add_argument("--plot", metavar="FILE", help="also draw a figure: .png, .svg or .pdf")
    add_executor_arguments(p)
    p.set_defaults(handler=handler)


PLOT_BYTES = 4 << 20  # room a figure may take on the disk


def check_plot_path(args, setup):
    """Refuse a ``--plot`` file the figure cannot be written to, before any work."""
    if args.plot:
        from ..plots import check_path

        check_path(args.plot, setup.path)
        check_output(args.plot, PLOT_BYTES, setup.path, "--plot")


def executor_from_args(args, file=None):
    """The executor the options ask for (``file``: the setup, for messages)."""
    if args.workers is not None and args.workers < 1:
        raise InputError(f"must be at least 1, got {args.workers}", file, "--workers")
    if args.worker_wait is not None and not args.worker_wait > 0:
        raise InputError(f"must be more than 0 s, got {args.worker_wait:g}", file,
                         "--worker-wait")
    executor = make_executor(args.workers, args.scheduler, args.worker_wait)
    if args.scheduler and not os.environ.get("PUMPSIM_DEBUG"):
        # Dask logs its reconnection attempts with tracebacks; the executor reports a
        # lost scheduler or lost workers itself, in one line. Dask's configuration gives
        # some of its loggers their own levels, so each is silenced.
        names = [n for n in logging.root.manager.loggerDict if n.startswith("distributed.")]
        for name in ["distributed", *names]:
            logging.getLogger(name).setLevel(logging.CRITICAL + 1)
    return executor


def parse_range(text, option, scale, file=None):
    """``"MIN:MAX"`` in file units -> ``(min, max)`` in SI (times ``scale``), or ``None``."""
    if text is None:
        return None
    lo, sep, hi = text.partition(":")
    try:
        if not sep:
            raise ValueError
        return (float(lo) * scale, float(hi) * scale)
    except ValueError:
        raise InputError(f"needs MIN:MAX, got {text!r}", file, option) from None


def pick_beam(setup, name):
    """The beam named on the command line, or the setup's only beam."""
    names = [b.name for b in setup.beams]
    if name is None:
        if len(names) == 1:
            return names[0]
        raise InputError(f"choose the beam with --beam ({', '.join(names) or 'no beams'})",
                         setup.path, "--beam")
    if name not in names:
        raise InputError(f"no beam named {name!r} (beams: {', '.join(names) or 'none'})",
                         setup.path, "--beam")
    return name


def progress(label):
    """A progress bar on stderr for this command."""
    return Progress(label)
