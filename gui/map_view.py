"""View (c): transfer fraction over power x waist, with the goal contour and
the operating point. Both axes are logarithmic; the image is placed in
log10 coordinates and the axes label them as powers of ten."""

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF

from . import studies
from .study_view import Plan, StudyView
from .theme import set_title


class MapView(StudyView):
    def __init__(self, parent=None):
        super().__init__(parent)
        item = self.plot.getPlotItem()
        for name in ("bottom", "left"):
            item.getAxis(name).setLogMode(True)
        self.powers = self.waists = np.array([])
        self.image = pg.ImageItem()
        self.plot.addItem(self.image)
        self.bar = pg.ColorBarItem(values=(0, 1), interactive=False, label="transfer fraction")
        self.bar.setImageItem(self.image, insert_in=item)
        self.overlays = []
        self.legend.hide()  # the caption and colour bar say what is drawn

    def make_plan(self, setup, beam):
        self.powers = studies.power_axis(setup, beam, studies.MAP_POWERS)
        self.waists = studies.waist_axis(setup, beam)
        b = setup.beam(beam)
        raw = next(d for d in setup.document["beam"] if d["name"] == beam)
        across = ("follows it" if "waist_across_mm" not in raw
                  else f"held at {b.waist_across * 1e3:.3g} mm")
        item = self.plot.getPlotItem()
        item.setLabel("bottom", f"power of laser “{beam}” (mW)")
        item.setLabel("left", f"waist along the atomic beam (mm); across: {across}")
        return Plan(setup, beam, studies.map_changes(beam, self.powers, self.waists))

    def grid(self):
        """Transfer fraction, shape (waists, powers)."""
        return self.best().reshape(len(self.waists), len(self.powers))

    def apply_theme(self, theme):
        self.bar.setColorMap(theme.colour_map())
        self.bar.getAxis("right").setTextPen(pg.mkPen(theme.text))
        super().apply_theme(theme)

    def redraw(self):
        for item in self.overlays:
            self.plot.removeItem(item)
        self.overlays = []
        if self.plan is None:
            return
        t, setup, beam = self.theme, self.plan.setup, self.plan.beam
        lp, lw = np.log10(self.powers), np.log10(self.waists)
        dp = (lp[-1] - lp[0]) / max(len(lp) - 1, 1)
        dw = (lw[-1] - lw[0]) / max(len(lw) - 1, 1)
        data = self.grid().T  # ImageItem's first index is x (power)
        self.image.setImage(data, levels=(0.0, 1.0))
        self.image.setRect(QRectF(lp[0] - dp / 2, lw[0] - dw / 2, dp * len(lp), dw * len(lw)))
        if np.isfinite(data).all():
            for curve in pg.functions.isocurve(data, self.wanted, connected=True):
                c = np.array(curve, dtype=float)  # pixel-corner coordinates
                self._overlay(lp[0] - dp / 2 + c[:, 0] * dp, lw[0] - dw / 2 + c[:, 1] * dw,
                              pen=pg.mkPen(t.target, width=2.5))
        b = setup.beam(beam)
        if b.power > 0:
            self._overlay([np.log10(b.power * 1e3)], [np.log10(b.waist * 1e3)], pen=None,
                          symbol="star", symbolSize=18, symbolBrush=t.target,
                          symbolPen=pg.mkPen(t.panel))
        set_title(self.plot, f"Power × waist: {self.progress_text()}", t)
        self.caption.setText(f"Line: the goal {self.wanted:.0%} in {setup.target}. Star: the set "
                             f"point ({b.power * 1e3:.3g} mW, {b.waist * 1e3:.3g} mm). "
                             "Colour: transfer fraction.")
        self.plot.getPlotItem().setRange(xRange=(lp[0] - dp / 2, lp[-1] + dp / 2),
                                         yRange=(lw[0] - dw / 2, lw[-1] + dw / 2), padding=0)

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
