"""View (b): transfer fraction against one beam's power, with the operating
point and the goal line."""

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt

from pumpsim.safety import cautions

from . import studies
from .plot_view import key_entry
from .study_view import ENGINE_TOLERANCE, Plan, StudyView


class PowerView(StudyView):
    def __init__(self, parent=None):
        super().__init__(parent)
        item = self.plot.getPlotItem()
        item.setLogMode(x=True, y=False)
        item.setLabel("left", "transfer fraction into the target")
        item.setYRange(0, 1.02, padding=0)
        self.powers = np.array([])

    def make_plan(self, setup, beam):
        self.powers = studies.power_axis(setup, beam)
        self.plot.getPlotItem().setLabel("bottom", f"power of laser “{beam}” (mW)")
        return Plan(setup, beam, studies.power_changes(beam, self.powers))

    def least_power(self):
        return studies.least_power(self.powers, self.best(), self.wanted)

    def redraw(self):
        self.clear()
        if self.plan is None:
            return
        t, setup, beam = self.theme, self.plan.setup, self.plan.beam
        quick, eng = self.values["quick"]["fraction"], self.values["engine"]["fraction"]
        ok = np.isfinite(quick)
        if ok.any():
            colour = t.muted if np.isfinite(eng).any() else t.accent
            self.plot.plot(self.powers[ok], quick[ok], pen=pg.mkPen(colour, width=2,
                                                                    style=Qt.DashLine))
        ok = np.isfinite(eng)
        if ok.any():
            self.plot.plot(self.powers[ok], eng[ok], pen=pg.mkPen(t.accent, width=2.5),
                           symbol="o", symbolSize=6, symbolBrush=t.accent, symbolPen=None)
        p_now = setup.beam(beam).power * 1e3
        self.plot.addItem(pg.InfiniteLine(self.wanted, angle=0, pen=pg.mkPen(t.target, style=Qt.DotLine),
                                          label=f"goal {self.wanted:.0%}",
                                          labelOpts={"position": 0.06, "color": t.target}))
        if p_now > 0:
            self.plot.addItem(pg.InfiniteLine(np.log10(p_now), angle=90,
                                              pen=pg.mkPen(t.rule, style=Qt.DashLine)))
            f_now = self._at(p_now)
            if f_now is not None:
                self.plot.plot([p_now], [f_now], pen=None, symbol="star", symbolSize=16,
                               symbolBrush=t.target, symbolPen=pg.mkPen(t.panel))
        self.set_key([key_entry("quick estimate", t.muted if np.isfinite(eng).any() else t.accent,
                                Qt.DashLine),
                      key_entry(f"engine (tolerance {ENGINE_TOLERANCE:g})", t.accent),
                      key_entry(f"set point {p_now:.3g} mW", t.target, shade=True),
                      key_entry(f"goal {self.wanted:.0%}", t.target, Qt.DotLine)])
        self.set_heading(f"Transfer against power · {self.progress_text()}")
        self.set_caption(self._caption(setup, beam))

    def _at(self, power):
        f = self.best()
        ok = np.isfinite(f)
        if not ok.any():
            return None
        return float(np.interp(np.log(power), np.log(self.powers[ok]), f[ok]))

    def _caption(self, setup, beam):
        p, top = self.least_power(), float(self.powers[-1])
        if p is None:
            best = np.nanmax(self.best()) if np.isfinite(self.best()).any() else np.nan
            head = (f"The goal {self.wanted:.0%} is not reached up to {top:.4g} mW "
                    f"(best {best:.1%}).")
            warn = cautions(setup, powers={beam: top * 1e-3})
        else:
            head = f"Least power for {self.wanted:.0%}: {p:.3g} mW (interpolated on this curve)."
            warn = cautions(setup, powers={beam: p * 1e-3})
            warn += [f"up to {top:.4g} mW on this axis: {w}"
                     for w in cautions(setup, powers={beam: top * 1e-3})]
        mine = [w for w in warn if w.startswith(f"{beam}: ") or f" mW on this axis: {beam}: " in w]
        return head + "\n" + "\n".join("⚠ " + w for w in mine)

    def curves(self):
        header = ["power_mW", "fraction_quick", "fraction_engine", "photons_per_atom",
                  "deflection_mrad"]
        if self.plan is None:
            return header, []
        q, e = self.values["quick"], self.values["engine"]
        return header, [[p, q["fraction"][i], e["fraction"][i], self.best("photons")[i],
                         self.best("deflection")[i]] for i, p in enumerate(self.powers)]
