"""View (a): ensemble-mean level populations along the atomic beam, with each
laser's intensity profile shaded behind them."""

import numpy as np
import pyqtgraph as pg

from pumpsim.beam_shapes import shape_of
from pumpsim.lines import line

from .plot_view import PlotView
from .theme import set_title, wavelength_colour

SHADE_POINTS = 400  # the shading is drawn from the beam shape, not the coarse result grid
SHADE_ALPHA = "40"


def stage_text(update):
    """Plain words for what a live result is: quick estimate or engine, converged or not."""
    n = update.result.numerics
    if update.stage == "quick":
        return f"Quick estimate ({n.nodes} atom classes, {n.steps} steps): converged result on its way"
    if n.converged:
        return (f"Converged: error estimate {n.error_estimate['total']:.1e} "
                f"(tolerance {n.tolerance:g}), {n.nodes} atom classes")
    return (f"Engine result NOT converged to tolerance {n.tolerance:g} "
            f"(error estimate {n.error_estimate['total']:.1e})")


class ProfileView(PlotView):
    """Populations against z (mm), laser profiles shaded, goal line for the target."""

    def __init__(self, parent=None):
        super().__init__(parent)
        item = self.plot.getPlotItem()
        item.setLabel("bottom", "position along the atomic beam, z (mm)")
        item.setLabel("left", "population (fraction of atoms)")
        item.showAxis("right")
        item.setLabel("right", "laser intensity (relative to peak)")
        item.setYRange(0, 1.02, padding=0)
        self.live, self.wanted = None, None
        self.legend.setColumnCount(2)
        self.legend.anchor(itemPos=(1, 0.5), parentPos=(1, 0.55), offset=(-12, 0))
        self.caption.setText("Lines: mean population of each level over all atoms of the beam. "
                             "Shaded: each laser's intensity along the beam axis.")

    def display(self, live, wanted=None):
        self.live, self.wanted = live, wanted
        self.redraw()

    def redraw(self):
        if self.live is None:
            self.clear()
            return
        r, t = self.live.result, self.theme
        setup = r.setup
        beams = [(b, line(setup.scheme, b.lower, b.upper).wavelength * 1e9) for b in setup.beams]
        if self.rebuild_needed((r.levels, setup.target, tuple((b.name, nm) for b, nm in beams))):
            self._build(setup, r.levels, beams)
        fine = np.linspace(r.z[0], r.z[-1], SHADE_POINTS)
        for (b, _), item in zip(beams, self.shades):
            item.setData(fine * 1e3, shape_of(b).along(fine))
        for i, item in enumerate(self.lines):
            item.setData(r.z * 1e3, r.profile[:, i])
        self.goal.setVisible(self.wanted is not None)
        if self.wanted is not None:
            self.goal.setValue(self.wanted)
            self.goal.label.setFormat(f"goal {self.wanted:.0%} in {setup.target}")
        set_title(self.plot, stage_text(self.live), t,
                  t.muted if self.live.stage == "quick" else t.text)

    def _build(self, setup, levels, beams):
        t = self.theme
        self.shades = []
        for b, nm in beams:
            colour = wavelength_colour(nm)
            item = pg.PlotDataItem(pen=pg.mkPen(colour, width=1), fillLevel=0.0,
                                   brush=pg.mkBrush(colour + SHADE_ALPHA),
                                   name=f"laser “{b.name}” {nm:.0f} nm")
            self.plot.addItem(item)
            self.shades.append(item)
        self.lines = []
        for i, lid in enumerate(levels):
            width = 3.2 if lid == setup.target else 2.0
            style = pg.QtCore.Qt.DashLine if lid == "other" else pg.QtCore.Qt.SolidLine
            pen = pg.mkPen(t.level_colour(i, len(levels)), width=width, style=style)
            self.lines.append(self.plot.plot(pen=pen, name=self._level_name(setup, lid)))
        self.goal = pg.InfiniteLine(0.0, angle=0, pen=pg.mkPen(t.target, width=1,
                                                               style=pg.QtCore.Qt.DotLine),
                                    label="goal", labelOpts={"position": 0.08, "color": t.target})
        self.plot.addItem(self.goal)

    @staticmethod
    def _level_name(setup, lid):
        if lid == "other":
            return "other (lost from the scheme)"
        suffix = " — target" if lid == setup.target else ""
        return f"{lid}{suffix}"

    def curves(self):
        if self.live is None:
            return [], []
        r = self.live.result
        shapes = [shape_of(b).along(r.z) for b in r.setup.beams]
        header = (["z_mm"] + [f"population_{lid}" for lid in r.levels]
                  + [f"relative_intensity_{b.name}" for b in r.setup.beams])
        rows = [[z * 1e3, *r.profile[k], *(s[k] for s in shapes)] for k, z in enumerate(r.z)]
        return header, rows
