"""What the three study views share: a sweep over setups in two passes.

Every point waits for the live result first (see
:class:`~pumpsim_gui.worker.StudyCompute`). Pass ``"quick"`` evaluates every point with the quick estimate, so the whole
picture appears in seconds; pass ``"engine"`` then evaluates the same points
with :func:`pumpsim.simulate` at a coarse tolerance and replaces them as
they arrive. The view's title says which pass each number comes from.

The job (:meth:`StudyView.job`) runs on a worker thread and touches no
widget: it only emits :class:`Point` records, which :meth:`StudyView.receive`
takes on the window's thread, ignoring records from a superseded job.
"""

import itertools
from dataclasses import dataclass

import numpy as np
from PySide6.QtCore import QTimer

from . import studies
from .evaluate import Superseded, quick_estimate
from .plot_view import PlotView

ENGINE_TOLERANCE = 1e-2  # studies compare points; 1e-2 in population is enough to rank them
PASSES = ("quick", "engine")
REDRAW_MS = 120  # points can arrive faster than it is worth redrawing
_JOB_IDS = itertools.count(1)  # shared by all views: a point names the one job it belongs to


@dataclass(frozen=True)
class Point:
    """One evaluated point of a study (file units)."""

    job: int
    stage: str
    index: int
    transfer_fraction: float
    photons_per_atom: float
    deflection_mrad: float


@dataclass(frozen=True)
class Plan:
    """What a study job computes: the setup, the study beam and one edit list per point."""

    setup: object
    beam: str
    changes: list


def evaluator(stage, superseded, compute):
    """``evaluate(setup) -> Result`` for one pass; ``compute`` is the StudyCompute.

    Every point first waits for the live result (``compute.wait_turn``); an
    engine run that a new live request interrupts is run again once that is in.
    """
    if stage == "quick":
        def quick(setup):
            compute.wait_turn(superseded)
            return quick_estimate(setup)
        return quick

    def engine(setup):
        while True:
            compute.wait_turn(superseded)
            try:
                return compute.engine.simulate(
                    setup, lambda: superseded() or compute.live_busy(),
                    tolerance=ENGINE_TOLERANCE)
            except Superseded:
                if superseded():
                    raise

    return engine


class StudyView(PlotView):
    """Base of the power, map and route views.

    Subclasses implement :meth:`make_plan` (grids and edits for a setup) and
    :meth:`redraw`; values arrive in :attr:`values` (pass -> quantity -> array).
    """

    def __init__(self, parent=None, **kw):
        kw.setdefault("caption_lines", 5)
        kw.setdefault("min_height", 380)
        super().__init__(parent, **kw)
        self.job_id, self.plan, self.wanted = 0, None, 0.9
        self.values = {}
        self.done = set()
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(REDRAW_MS)
        self._timer.timeout.connect(self.redraw)

    def make_plan(self, setup, beam) -> Plan:
        raise NotImplementedError

    def start(self, setup, beam):
        """Reset for ``setup`` and return the job to run on the study lane."""
        self.job_id = next(_JOB_IDS)
        self.plan = self.make_plan(setup, beam)
        n = len(self.plan.changes)
        self.values = {s: {q: np.full(n, np.nan) for q in ("fraction", "photons", "deflection")}
                       for s in PASSES}
        self.done = set()
        self.redraw()
        plan, job_id = self.plan, self.job_id

        def job(emit, superseded, compute):
            for stage in PASSES:
                for i, r in studies.sweep(plan.setup, plan.changes,
                                          evaluator(stage, superseded, compute)):
                    if superseded():
                        return
                    emit(Point(job_id, stage, i, r.transfer_fraction,
                               r.photons_per_atom[plan.beam], r.deflection[plan.beam] * 1e3))
                emit(Point(job_id, stage, -1, np.nan, np.nan, np.nan))

        return job

    def receive(self, point):
        if point.job != self.job_id:
            return
        if point.index < 0:
            self.done.add(point.stage)
        else:
            v = self.values[point.stage]
            v["fraction"][point.index] = point.transfer_fraction
            v["photons"][point.index] = point.photons_per_atom
            v["deflection"][point.index] = point.deflection_mrad
        if not self._timer.isActive():
            self._timer.start()

    def set_wanted(self, wanted):
        self.wanted = wanted
        self.redraw()

    def best(self, quantity="fraction"):
        """Engine values where computed, quick estimates elsewhere."""
        e, q = self.values["engine"][quantity], self.values["quick"][quantity]
        return np.where(np.isfinite(e), e, q)

    def progress_text(self):
        """Which pass the numbers come from, in plain words."""
        if self.plan is None:
            return ""
        n = len(self.plan.changes)
        got = {s: int(np.isfinite(self.values[s]["fraction"]).sum()) for s in PASSES}
        if "engine" in self.done:
            return f"engine results (tolerance {ENGINE_TOLERANCE:g}) at all {n} points"
        if "quick" in self.done:
            return (f"quick estimate; engine pass (tolerance {ENGINE_TOLERANCE:g}) "
                    f"{got['engine']} of {n} points done")
        return f"quick estimate: {got['quick']} of {n} points"

    @property
    def complete(self):
        return "engine" in self.done
