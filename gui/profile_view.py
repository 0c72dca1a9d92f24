"""View (a): ensemble-mean level populations along the atomic beam, with each
laser's intensity profile shaded behind them. A sublevel-resolved result
(setup ``mode = "sublevel"``) can show one curve per magnetic sublevel instead."""

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QGraphicsItem, QHBoxLayout, QLabel

from pumpsim.beam_shapes import shape_of
from pumpsim.lines import line

from .plot_view import PlotView, key_entry
from .theme import readable, shade, wavelength_colour

SHADE_POINTS = 400  # the shading is drawn from the beam shape, not the coarse result grid
SHADE_ALPHA = {"light": "40", "dark": "70"}
# one fill pattern per laser, so two lasers of near colours stay apart
SHADE_PATTERNS = (Qt.SolidPattern, Qt.BDiagPattern, Qt.FDiagPattern, Qt.DiagCrossPattern)
LEGEND_FLOOR = 1e-3  # sublevels that never hold this much are drawn but left out of the key
SUBLEVEL_STYLES = (Qt.SolidLine, Qt.DashLine, Qt.DotLine, Qt.DashDotLine, Qt.DashDotDotLine)
SHOW = (("levels", "levels"), ("sublevels", "magnetic sublevels"))
CAPTIONS = {False: "Lines: mean population of each level over all atoms of the beam. "
                   "Shaded: each laser's intensity along the beam axis.",
            True: "Lines: mean population of each magnetic sublevel over all atoms of the beam, "
                  "in a shade of its level's colour per F, one line style per m (the key lists "
                  "those that reach 0.1%). Shaded: each laser's intensity along the beam axis."}


def sublevel_name(label, level):
    """A sublevel as a ket: ``"5S1/2 F=2 m=+2"`` -> ``"|F=2, m_F=+2⟩ 5S1/2"``, and without
    hyperfine structure ``"g m=-1/2"`` -> ``"|m_J=-1/2⟩ g"`` (labels as
    :class:`pumpsim.basis.SublevelBasis` makes them)."""
    numbers = label[len(level) + 1:].split()
    m = "m_F=" if len(numbers) > 1 else "m_J="
    return f"|{', '.join(m + q[2:] if q.startswith('m=') else q for q in numbers)}⟩ {level}"


def stage_text(update):
    """Plain words for what a live result is: quick estimate or engine (coarse or at the
    setup's tolerance), converged or not, always naming the tolerance of an engine result."""
    n = update.result.numerics
    if update.stage == "quick":
        return f"Quick estimate ({n.nodes} atom classes, {n.steps} steps); engine result on its way"
    if update.stage == "coarse" and n.converged:
        return (f"Converged to {n.tolerance:g} (error estimate "
                f"{n.error_estimate['total']:.1e}, {n.nodes} atom classes); refining to the "
                "setup's tolerance")
    if n.converged:
        return (f"Converged: error estimate {n.error_estimate['total']:.1e} "
                f"(tolerance {n.tolerance:g}), {n.nodes} atom classes")
    return (f"Engine result NOT converged to tolerance {n.tolerance:g} "
            f"(error estimate {n.error_estimate['total']:.1e})")


class ProfileView(PlotView):
    """Populations against z (mm), laser profiles shaded, goal line for the target."""

    def __init__(self, parent=None):
        super().__init__(parent, caption_lines=2)
        item = self.plot.getPlotItem()
        item.setLabel("bottom", "position along the atomic beam, z (mm)")
        item.setLabel("left", "population (fraction of atoms)")
        item.showAxis("right")
        item.setLabel("right", "laser intensity (relative to peak)")
        item.setYRange(0, 1.02, padding=0)
        self.live, self.wanted, self.shaded = None, None, None
        # what to draw for a sublevel-resolved result; shown only for sublevel setups
        bar = QHBoxLayout()
        self.show_label = QLabel("Show populations of")
        self.show_choice = QComboBox()
        for key, text in SHOW:
            self.show_choice.addItem(text, key)
        self.show_choice.currentIndexChanged.connect(lambda _: self.redraw())
        bar.addWidget(self.show_label)
        bar.addWidget(self.show_choice)
        bar.addStretch(1)
        self.column.insertLayout(0, bar)
        for w in (self.show_label, self.show_choice):
            w.setVisible(False)
        self.set_caption(CAPTIONS[False])

    def display(self, live, wanted=None):
        self.live, self.wanted = live, wanted
        self.redraw()

    @property
    def showing_sublevels(self):
        """Whether the curves drawn are per sublevel (asked for, and the result has them)."""
        return (self.live is not None and self.live.result.sublevels is not None
                and self.show_choice.currentData() == "sublevels")

    def curve_data(self):
        """``(names, populations (k, curves))`` of the curves drawn: each level, or each
        sublevel then ``other``."""
        r = self.live.result
        if not self.showing_sublevels:
            return [self._level_name(r.setup, lid) for lid in r.levels], r.profile
        sub = r.sublevels
        names = [sublevel_name(lab, r.levels[k]) for lab, k in zip(sub.labels, sub.level_of)]
        return names + [self._level_name(r.setup, "other")], np.column_stack(
            [sub.profile, r.profile[:, -1]])

    def redraw(self):
        if self.live is None:
            self.clear()
            return
        r, t = self.live.result, self.theme
        setup = r.setup
        sublevel_setup = setup.mode == "sublevel"
        for w in (self.show_label, self.show_choice):
            w.setVisible(sublevel_setup)
        self.show_choice.setEnabled(r.sublevels is not None)
        self.show_choice.setToolTip("" if r.sublevels is not None else
                                    "Sublevel populations come with the engine result")
        names, pops = self.curve_data()
        self.set_caption(CAPTIONS[self.showing_sublevels])
        legend = tuple(bool(np.max(pops[:, i]) >= LEGEND_FLOOR) or not self.showing_sublevels
                       for i in range(len(names)))
        beams = [(b, line(setup.scheme, b.lower, b.upper).wavelength * 1e9) for b in setup.beams]
        if self.rebuild_needed((tuple(names), legend, setup.target,
                                tuple((b.name, nm) for b, nm in beams))):
            self._build(setup, r, names, legend, beams)
            self.shaded = None
        # The shading is relative intensity (a power change leaves it alone): new data only
        # when it changed, and painted from a cache meanwhile (filling it is a third of a
        # repaint).
        fine = np.linspace(r.z[0], r.z[-1], SHADE_POINTS)
        shaded = np.stack([fine] + [shape_of(b).along(fine) for b, _ in beams])
        if self.shaded is None or not np.array_equal(shaded, self.shaded):
            self.shaded = shaded
            for along, item in zip(shaded[1:], self.shades):
                item.setData(fine * 1e3, along)
        for i, item in enumerate(self.lines):
            item.setData(r.z * 1e3, pops[:, i])
        self.goal.setVisible(self.wanted is not None)
        if self.wanted is not None:
            self.goal.setValue(self.wanted)
            self.goal.label.setFormat(f"goal {self.wanted:.0%} in {setup.target}")
        self.set_heading("Populations along the beam · " + stage_text(self.live),
                         t.muted if self.live.stage == "quick" else t.text)

    def _build(self, setup, r, names, legend, beams):
        t = self.theme
        levels = r.levels
        self.shades, key = [], []
        for i, (b, nm) in enumerate(beams):
            colour = readable(wavelength_colour(nm), t)
            brush = pg.mkBrush(colour + SHADE_ALPHA[t.name])
            brush.setStyle(SHADE_PATTERNS[i % len(SHADE_PATTERNS)])
            item = pg.PlotDataItem(pen=pg.mkPen(colour, width=1), fillLevel=0.0, brush=brush)
            item.curve.setCacheMode(QGraphicsItem.DeviceCoordinateCache)  # the painting child
            self.plot.addItem(item)
            self.shades.append(item)
            key.append(key_entry(f"laser “{b.name}” {nm:.0f} nm", colour,
                                 shade=SHADE_PATTERNS[i % len(SHADE_PATTERNS)]))
        self.lines = []
        if self.showing_sublevels:
            pens = self._sublevel_pens(r)
        else:
            pens = [pg.mkPen(t.level_colour(i, len(levels)),
                             width=3.2 if lid == setup.target else 2.0,
                             style=Qt.DashLine if lid == "other" else Qt.SolidLine)
                    for i, lid in enumerate(levels)]
        for pen, name, named in zip(pens, names, legend):
            self.lines.append(self.plot.plot(pen=pen, name=name if named else None))
            if named:
                key.append(key_entry(name, pen.color().name(), pen.style()))
        self.set_key(key)
        self.goal = pg.InfiniteLine(0.0, angle=0, pen=pg.mkPen(t.target, width=1, style=Qt.DotLine),
                                    label="goal", labelOpts={"position": 0.08, "color": t.target})
        self.plot.addItem(self.goal)

    def _sublevel_pens(self, r):
        """One pen per sublevel curve (then ``other``): the level's colour, a lighter or
        darker shade of it per hyperfine level F, and a line style per m within that F,
        so that no two sublevels of a level look alike."""
        t, levels = self.theme, self.live.result.levels
        level_of = list(r.sublevels.level_of) + [len(levels) - 1]
        groups = [" ".join(q for q in lab.split() if not q.startswith("m="))
                  for lab in r.sublevels.labels] + ["other"]
        pens = []
        for i, (k, g) in enumerate(zip(level_of, groups)):
            same_level = list(dict.fromkeys(x for x, j in zip(groups, level_of) if j == k))
            f_index = same_level.index(g)
            m_index = groups[:i].count(g)
            colour = shade(t.level_colour(k, len(levels)), f_index, t)
            style = SUBLEVEL_STYLES[m_index % len(SUBLEVEL_STYLES)]
            width = 1.6 if m_index < len(SUBLEVEL_STYLES) else 2.8
            pens.append(pg.mkPen(colour, width=width, style=style))
        return pens

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
        pops, names = r.profile, [f"population_{lid}" for lid in r.levels]
        if self.showing_sublevels:  # the levels, then the sublevels shown
            pops = np.column_stack([pops, r.sublevels.profile])
            names += [f"population_{lab}" for lab in r.sublevels.labels]
        header = ["z_mm"] + names + [f"relative_intensity_{b.name}" for b in r.setup.beams]
        rows = [[z * 1e3, *pops[k], *(s[k] for s in shapes)] for k, z in enumerate(r.z)]
        return header, rows
