"""A progress bar with time remaining, on stderr, for work longer than a second.

Nothing is drawn for work that finishes within :data:`DELAY` seconds. On a
terminal the bar redraws in place; into a file or pipe it writes a plain line
every :data:`LOG_EVERY` seconds, so logs of cluster jobs stay readable.
"""

import sys
import time

DELAY = 1.0  # s before anything is shown
REDRAW = 0.2  # s between redraws on a terminal
LOG_EVERY = 10.0  # s between lines when stderr is not a terminal
WIDTH = 28  # characters of bar


def clock(seconds) -> str:
    """``75`` -> ``"1m15s"``; ``4000`` -> ``"1h06m"``."""
    s = int(round(seconds))
    if s < 60:
        return f"{s}s"
    if s < 3600:
        return f"{s // 60}m{s % 60:02d}s"
    return f"{s // 3600}h{s % 3600 // 60:02d}m"


class Progress:
    """Count finished simulations and show how long the rest will take.

    Parameters
    ----------
    label : str
        What is being done (``"map"``, ``"least power"``).
    total : int, optional
        Expected number of simulations; may grow with :meth:`remaining_at_least`.
    stream : file, optional
        Where to draw (stderr by default).
    enabled : bool
        ``False`` draws nothing (library use, tests).
    """

    def __init__(self, label, total=None, stream=None, enabled=True):
        self.label, self.total, self.done = label, total, 0
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.tty = enabled and hasattr(self.stream, "isatty") and self.stream.isatty()
        self.start = time.monotonic()
        self.last = None  # time of the last drawing

    def remaining_at_least(self, n):
        """At least ``n`` simulations are still to come: raise the total if needed."""
        if self.total is None or self.total < self.done + n:
            self.total = self.done + n
            self._draw()

    def advance(self, n=1):
        self.done += n
        self._draw()

    def line(self) -> str:
        elapsed = time.monotonic() - self.start
        if not self.total:
            return f"{self.label}: {self.done} simulations, {clock(elapsed)}"
        frac = min(self.done / self.total, 1.0)
        bar = "#" * int(WIDTH * frac) + "." * (WIDTH - int(WIDTH * frac))
        if self.done:
            left = f"{clock(elapsed * (self.total - self.done) / self.done)} left"
        else:
            left = "estimating"
        return f"{self.label}: [{bar}] {self.done}/{self.total}, {clock(elapsed)}, {left}"

    def _draw(self, final=False):
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self.start < DELAY:
            return
        wait = REDRAW if self.tty else LOG_EVERY
        if not final and self.last is not None and now - self.last < wait:
            return
        self.last = now
        if self.tty:  # redraw in place, clear the rest of the line
            self.stream.write("\r" + self.line() + "\x1b[K" + ("\n" if final else ""))
        else:
            self.stream.write(self.line() + "\n")
        self.stream.flush()

    def close(self):
        """Draw the final state, if the work took longer than :data:`DELAY`."""
        self._draw(final=True)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, *exc):
        if exc_type is None and self.total:  # estimates done: the work is complete
            self.total = self.done
        self.close()
        return False
