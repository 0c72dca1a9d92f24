"""View (d): every line out of the study beam's lower level as a candidate
route, in a ranked table and as transfer-against-power curves."""

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QHBoxLayout, QHeaderView, QPushButton,
                               QSplitter, QTableWidget, QTableWidgetItem)

from pumpsim.safety import cautions

from . import studies
from .plot_view import key_entry
from .study_view import Plan, StudyView
from .theme import readable, wavelength_colour

HEADER = ("route", "λ\n(nm)", "σ₀\n(m²)", "decays to\ntarget", "decays to\nother",
          "transfer at\nset power", "power for\ngoal (mW)", "photons\nper atom",
          "deflection\n(mrad)")
TABLE_ROWS_SHOWN = 4  # rows the table shows without scrolling
STYLES = (Qt.SolidLine, Qt.DashLine, Qt.DashDotLine, Qt.DotLine)


class RoutesView(StudyView):
    """Signals: ``use_route(beam, lower, upper)`` when the user picks a route."""

    use_route = Signal(str, str, str)

    def __init__(self, parent=None):
        super().__init__(parent, caption_lines=6, min_height=620)
        item = self.plot.getPlotItem()
        item.setLogMode(x=True, y=False)
        item.setLabel("left", "transfer fraction into the target")
        item.setYRange(0, 1.02, padding=0)
        self.table = QTableWidget(0, len(HEADER))
        self.table.setHorizontalHeaderLabels(HEADER)
        self.table.verticalHeader().setVisible(False)
        self.table.setSelectionBehavior(QAbstractItemView.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.NoEditTriggers)
        # every column shares the width (none hides behind a scrollbar); the table and
        # the plot share the height through a splitter the user can move
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.Stretch)
        self.table.horizontalHeader().setMinimumSectionSize(40)
        self.table.setHorizontalScrollBarPolicy(Qt.ScrollBarAlwaysOff)
        self.table.setWordWrap(True)
        self.split = QSplitter(Qt.Vertical)
        self.split.setChildrenCollapsible(False)
        self.figure_layout.removeWidget(self.plot)
        self.split.addWidget(self.table)
        self.split.addWidget(self.plot)
        self.plot.setMinimumHeight(240)
        self.split.setStretchFactor(0, 2)
        self.split.setStretchFactor(1, 3)
        self.figure_layout.insertWidget(1, self.split, 1)
        buttons = QHBoxLayout()
        self.use_button = QPushButton("Drive the selected route with this laser")
        self.use_button.clicked.connect(self._use_selected)
        buttons.addWidget(self.use_button)
        buttons.addStretch(1)
        self.column.insertLayout(0, buttons)
        self.routes, self.powers, self.ranked = [], np.array([]), []

    def make_plan(self, setup, beam):
        self.routes = studies.route_list(setup, beam)
        self.powers = studies.power_axis(setup, beam)
        self.plot.getPlotItem().setLabel("bottom", f"power of laser “{beam}” (mW)")
        return Plan(setup, beam, studies.route_changes(beam, self.routes, self.powers))

    def per_route(self, quantity="fraction"):
        return self.best(quantity).reshape(len(self.routes), len(self.powers))

    def rows(self):
        """Route figures, ranked: reachable routes by least power, then by transfer at the set power."""
        setup, beam = self.plan.setup, self.plan.beam
        p_now = setup.beam(beam).power * 1e3
        out = []
        for k, r in enumerate(self.routes):
            f = self.per_route()[k]
            need = studies.least_power(self.powers, f, self.wanted)
            at = {q: self._interp(p_now, self.per_route(q)[k])
                  for q in ("fraction", "photons", "deflection")}
            out.append((r, need, at))
        return sorted(out, key=lambda x: (x[1] is None, x[1] or 0.0, -np.nan_to_num(x[2]["fraction"])))

    def _interp(self, p, f):
        ok = np.isfinite(f)
        if not ok.any() or p <= 0:
            return np.nan
        return float(np.interp(np.log(p), np.log(self.powers[ok]), f[ok]))

    def redraw(self):
        self.clear()
        if self.plan is None:
            return
        t, setup, beam = self.theme, self.plan.setup, self.plan.beam
        now = setup.beam(beam)
        key = []
        for k, r in enumerate(self.routes):
            f = self.per_route()[k]
            ok = np.isfinite(f)
            current = r.upper == now.upper
            colour = readable(wavelength_colour(r.wavelength * 1e9), t)
            style = STYLES[k % len(STYLES)]
            if ok.any():
                self.plot.plot(self.powers[ok], f[ok], pen=pg.mkPen(colour, width=3 if current
                                                                     else 2, style=style))
            key.append(key_entry(f"{r.lower} → {r.upper} {r.wavelength * 1e9:.1f} nm"
                                 + (" (set)" if current else ""), colour, style))
        self.set_key(key)
        self.plot.addItem(pg.InfiniteLine(self.wanted, angle=0, pen=pg.mkPen(t.target, style=Qt.DotLine),
                                          label=f"goal {self.wanted:.0%}",
                                          labelOpts={"position": 0.06, "color": t.target}))
        if now.power > 0:
            self.plot.addItem(pg.InfiniteLine(np.log10(now.power * 1e3), angle=90,
                                              pen=pg.mkPen(t.rule, style=Qt.DashLine)))
        self.set_heading(f"Routes out of {now.lower} · {self.progress_text()}")
        self._fill_table(setup, beam)

    def _fill_table(self, setup, beam):
        self.ranked = self.rows()
        self.table.setRowCount(len(self.ranked))
        shown = min(len(self.ranked), TABLE_ROWS_SHOWN)
        self.table.setMinimumHeight(self.table.horizontalHeader().sizeHint().height() + 4
                                    + shown * self.table.verticalHeader().defaultSectionSize())
        warnings = []
        for i, (r, need, at) in enumerate(self.ranked):
            cells = (f"{r.lower} → {r.upper}", f"{r.wavelength * 1e9:.2f}", f"{r.sigma0:.3g}",
                     f"{r.branching_target:.1%}", f"{r.branching_other:.1%}",
                     "…" if np.isnan(at["fraction"]) else f"{at['fraction']:.2%}",
                     self._need_text(need, self.per_route()[self.routes.index(r)]),
                     "…" if np.isnan(at["photons"]) else f"{at['photons']:.3f}",
                     "…" if np.isnan(at["deflection"]) else f"{at['deflection']:.4f}")
            for c, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setTextAlignment((Qt.AlignLeft if c == 0 else Qt.AlignRight) | Qt.AlignVCenter)
                self.table.setItem(i, c, item)
            routed = setup.with_value(f"beam.{beam}.transition", [r.lower, r.upper])
            powers = None if need is None else {beam: need * 1e-3}
            warnings += [w for w in cautions(routed, powers) if w.startswith(f"{beam}: ")]
        unreached = [f"{r.lower} → {r.upper}" for r, need, _ in self.ranked
                     if need is None and np.isfinite(self.per_route()[self.routes.index(r)]).all()]
        text = ("Ranked by the least power that reaches the goal (interpolated on the curves), "
                "then by the transfer at the set power. ")
        if unreached:
            text += (f"Not reached up to {self.powers[-1]:.4g} mW: {', '.join(unreached)}. ")
        self.set_caption(text + "\n" + "\n".join(f"⚠ {w}" for w in dict.fromkeys(warnings)))

    @staticmethod
    def _need_text(need, curve):
        if need is not None:
            return f"{need:.3g}"
        return "not reached" if np.isfinite(curve).all() else "…"

    def _use_selected(self):
        row = self.table.currentRow()
        if self.plan is not None and 0 <= row < len(self.ranked):
            r = self.ranked[row][0]
            self.use_route.emit(self.plan.beam, r.lower, r.upper)

    def curves(self):
        header = ["lower", "upper", "wavelength_nm", "power_mW", "fraction_quick",
                  "fraction_engine"]
        if self.plan is None:
            return header, []
        q = self.values["quick"]["fraction"].reshape(len(self.routes), len(self.powers))
        e = self.values["engine"]["fraction"].reshape(len(self.routes), len(self.powers))
        return header, [[r.lower, r.upper, r.wavelength * 1e9, p, q[k, j], e[k, j]]
                        for k, r in enumerate(self.routes) for j, p in enumerate(self.powers)]
