"""View (c): transfer fraction over power x waist, with the goal contour and
the operating point.

Both axes are logarithmic and the grid is uneven (it includes the set point),
so each cell is drawn as its own rectangle around its grid point, bounded
half-way (in log) to its neighbours, and the contour is traced between grid
points interpolating linearly in log power and log waist, the same
interpolation as the least power of the power tab. The colour scale is
centred on the goal, where the decisions are made; its span is the user's.
"""

import numpy as np
import pyqtgraph as pg
from PySide6.QtWidgets import QComboBox, QHBoxLayout, QLabel

from pumpsim.safety import cautions

from . import studies
from .study_view import Plan, StudyView

SPANS = ((0.02, "goal ± 2 %"), (0.05, "goal ± 5 %"), (0.1, "goal ± 10 %"),
         (0.25, "goal ± 25 %"), (None, "0 to 1 (whole range)"))
DEFAULT_SPAN = 0.1


def cell_edges(centres):
    """Edges of the cells around increasing ``centres`` (log10 values): half-way
    between neighbours, the outer ones as far out as the inner half-cells."""
    c = np.asarray(centres, dtype=float)
    if len(c) == 1:
        return np.array([c[0] - 0.05, c[0] + 0.05])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def index_to_axis(index, centres):
    """Positions (log10) of fractional grid indices, linear between grid points."""
    return np.interp(index, np.arange(len(centres)), centres)


def colour_levels(wanted, span):
    """``(low, high)`` of the colour scale: the goal at its centre, clipped to 0...1."""
    if span is None:
        return 0.0, 1.0
    half = min(span, wanted, 1.0 - wanted) if 0.0 < wanted < 1.0 else span
    return wanted - half, wanted + half


class MapView(StudyView):
    def __init__(self, parent=None):
        super().__init__(parent)
        item = self.plot.getPlotItem()
        for name in ("bottom", "left"):
            item.getAxis(name).setLogMode(True)
        self.powers = self.waists = np.array([])
        self.mesh = pg.PColorMeshItem(enableAutoLevels=False, levels=(0.0, 1.0))
        self.plot.addItem(self.mesh)
        self.bar = pg.ColorBarItem(values=(0, 1), interactive=False,
                                   label="transfer fraction into the target")
        self.bar.setImageItem(self.mesh, insert_in=item)
        self.overlays, self.across = [], ""
        bar = QHBoxLayout()
        bar.addWidget(QLabel("Colour scale"))
        self.span_choice = QComboBox()
        for span, text in SPANS:
            self.span_choice.addItem(text, span)
        self.span_choice.setCurrentIndex([s for s, _ in SPANS].index(DEFAULT_SPAN))
        self.span_choice.currentIndexChanged.connect(lambda _: self.redraw())
        bar.addWidget(self.span_choice)
        bar.addStretch(1)
        self.column.insertLayout(0, bar)

    def make_plan(self, setup, beam):
        # the power tab's own axis: the map's row at the set waist is then its curve
        self.powers = studies.power_axis(setup, beam)
        self.waists = studies.waist_axis(setup, beam)
        b = setup.beam(beam)
        raw = next(d for d in setup.document["beam"] if d["name"] == beam)
        across = ("follows it" if "waist_across_mm" not in raw
                  else f"held at {b.waist_across * 1e3:.3g} mm")
        item = self.plot.getPlotItem()
        item.setLabel("bottom", f"power of laser “{beam}” (mW)")
        item.setLabel("left", "waist along the atomic beam (mm)")
        self.across = across
        return Plan(setup, beam, studies.map_changes(beam, self.powers, self.waists))

    def grid(self):
        """Transfer fraction, shape (waists, powers)."""
        return self.best().reshape(len(self.waists), len(self.powers))

    def levels(self):
        return colour_levels(self.wanted, self.span_choice.currentData())

    def apply_theme(self, theme):
        self.bar.setColorMap(theme.colour_map())
        self.mesh.setColorMap(theme.colour_map())
        self.bar.getAxis("right").setTextPen(pg.mkPen(theme.text))
        super().apply_theme(theme)
        self.plot.getPlotItem().showGrid(x=False, y=False)  # grid lines would cross the cells

    def contour_lines(self):
        """The goal contour as ``[(log10 power, log10 waist), ...]`` polylines, traced
        on the grid points with linear interpolation in log power and log waist."""
        data = self.grid().T  # first index: power
        if not np.isfinite(data).all():
            return []
        lp, lw = np.log10(self.powers), np.log10(self.waists)
        out = []
        for curve in pg.functions.isocurve(data, self.wanted, connected=True):
            c = np.array(curve, dtype=float) - 0.5  # isocurve puts sample i at i + 0.5
            out.append((index_to_axis(c[:, 0], lp), index_to_axis(c[:, 1], lw)))
        return out

    def redraw(self):
        for item in self.overlays:
            self.plot.removeItem(item)
        self.overlays = []
        if self.plan is None:
            return
        t, setup, beam = self.theme, self.plan.setup, self.plan.beam
        lp, lw = np.log10(self.powers), np.log10(self.waists)
        x, y = np.meshgrid(cell_edges(lp), cell_edges(lw), indexing="ij")
        low, high = self.levels()
        self.mesh.setLevels((low, high))
        self.mesh.setData(x, y, self.grid().T)
        self.bar.setLevels((low, high))
        for px, wy in self.contour_lines():
            self._overlay(px, wy, pen=pg.mkPen(t.target, width=2.5))
        b = setup.beam(beam)
        if b.power > 0:
            self._overlay([np.log10(b.power * 1e3)], [np.log10(b.waist * 1e3)], pen=None,
                          symbol="star", symbolSize=18, symbolBrush=t.target,
                          symbolPen=pg.mkPen(t.panel))
        self.set_heading(f"Power × waist · {self.progress_text()}")
        top = float(self.powers[-1])
        warn = [w for w in cautions(setup, powers={beam: top * 1e-3}) if w.startswith(f"{beam}: ")]
        self.set_caption(
            f"Line: the goal {self.wanted:.0%} in {setup.target}. Star: the set point "
            f"({b.power * 1e3:.3g} mW, {b.waist * 1e3:.3g} mm); the waist across "
            f"{self.across}. Each cell is centred on its "
            f"computed point; colour: transfer fraction, {low:.2f} to {high:.2f} (beyond: "
            "the end colours)."
            + "".join(f"\n⚠ up to {top:.4g} mW: {w}" for w in warn))
        self.plot.getPlotItem().setRange(xRange=(x[0, 0], x[-1, 0]), yRange=(y[0, 0], y[0, -1]),
                                         padding=0)

    def _overlay(self, x, y, **style):
        self.overlays.append(self.plot.plot(x, y, **style))

    def curves(self):
        header = ["power_mW", "waist_mm", "fraction_quick", "fraction_engine"]
        if self.plan is None:
            return header, []
        q = self.values["quick"]["fraction"].reshape(len(self.waists), len(self.powers))
        e = self.values["engine"]["fraction"].reshape(len(self.waists), len(self.powers))
        return header, [[p, w, q[i, j], e[i, j]] for i, w in enumerate(self.waists)
                        for j, p in enumerate(self.powers)]
