"""Progress with time remaining, on stderr: a bar for many simulations (shown for work
longer than a second), and notes for one simulation that refines (:class:`RunProgress`).

Nothing is drawn for work that finishes within :data:`DELAY` seconds. On a
terminal the bar redraws in place; into a file or pipe it writes a plain line
every :data:`LOG_EVERY` seconds, so logs of cluster jobs stay readable.
"""

import math
import re
import sys
import threading
import time

DELAY = 1.0  # s before anything is shown
REDRAW = 0.2  # s between redraws on a terminal
LOG_EVERY = 10.0  # s between lines when stderr is not a terminal
WIDTH = 28  # characters of bar
RUN_DELAY = 3.0  # s of one simulation before its notes carry the time left
# an engine note: the part refined, then its error ("grid: 8 steps per waist, error
# estimate 6.4e-06", "offset rule 4 -> 8 nodes: change 3e-05")
NOTE = re.compile(r"(?P<part>[^\d:]+).*(?:error estimate|change) (?P<error>[0-9.]+(?:e[-+]?\d+)?)")


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


class RunProgress:
    """Refinement notes of one simulation on stderr, with the time it may still take.

    Called with each note the engine makes (``"offset rule 4 -> 8 nodes: change
    3e-05"``). Once the run has taken :data:`RUN_DELAY` seconds, each note also
    says the time so far and, when it can be told, about how long is left. The
    estimate assumes the error falls as a power of the work done, as adaptive
    quadrature's does: the latest error of each part refined (grid, angle,
    offset, speed) is summed, the power is fitted to the first and the latest
    sums, and the time at which the sum would reach the tolerance is
    extrapolated. It is rough; it is left out while the error is not falling.
    Used as a context manager it also writes a line every :data:`LOG_EVERY`
    seconds without a note, so a long round never looks frozen.

    Parameters
    ----------
    tolerance : float
    stream : file, optional
        Where to write (stderr by default).
    """

    def __init__(self, tolerance, stream=None):
        self.tol, self.stream = tolerance, stream or sys.stderr
        self.start = time.monotonic()
        self.parts = {}  # part refined -> its latest error
        self.first = None  # (elapsed, summed error) at the first note
        self.last = self.start  # time of the last line written
        self.lock = threading.Lock()
        self.stop = threading.Event()

    def __call__(self, message):
        elapsed = time.monotonic() - self.start
        found = NOTE.match(message)
        if found:
            self.parts[found["part"].strip()] = float(found["error"])
        if self.first is None and self.total() > 0:
            self.first = (elapsed, self.total())
        self.write(message, elapsed)

    def total(self):
        return sum(self.parts.values())

    def write(self, message, elapsed):
        tail = ""
        if elapsed >= RUN_DELAY:
            left = self.left(elapsed, self.total())
            tail = f"  [{clock(elapsed)}" + (f", about {clock(left)} left]" if left else "]")
        with self.lock:
            self.stream.write(f"  {message}{tail}\n")
            self.stream.flush()
            self.last = time.monotonic()

    def _beat(self):
        while not self.stop.wait(1.0):
            self._beat_once()

    def _beat_once(self):
        """A line if none was written for :data:`LOG_EVERY` seconds."""
        if time.monotonic() - self.last >= LOG_EVERY:
            self.write("still computing", time.monotonic() - self.start)

    def __enter__(self):
        threading.Thread(target=self._beat, daemon=True, name="pumpsim-run-progress").start()
        return self

    def __exit__(self, *exc):
        self.stop.set()
        return False

    def left(self, elapsed, total):
        """Seconds still needed by the power-law extrapolation, or ``None``."""
        if self.first is None or total <= self.tol:
            return None
        t0, e0 = self.first
        if not (elapsed > t0 > 0 and 0 < total < e0):
            return None
        power = math.log(e0 / total) / math.log(elapsed / t0)
        return elapsed * ((total / self.tol) ** (1 / power) - 1)
