"""The level scheme as an energy ladder, to scale in energy.

Each level is a horizontal bar at its energy. Each transition has its own
column: the lasers' driven lines as thick arrows up in the light's colour,
the decay branches as thin arrows down (thickness grows with the branching
ratio, labelled with it), and decays the scheme does not list as a short
arrow to "other".
"""

import pyqtgraph as pg
from PySide6.QtCore import Qt

from pumpsim import constants as K
from pumpsim.lines import line

from .plot_view import PlotView
from .theme import base_font, readable, wavelength_colour

LABEL_GAP = 0.045  # least vertical distance between level labels, fraction of the energy range
LABEL_ROOM = 10.0  # x room right of the last column for the level labels (column widths)
LEAK_DROP = 0.07  # length of an arrow to "other", fraction of the energy range


def energy_cm(level):
    return level.energy / (100 * K.h * K.c)


def columns(setup):
    """Transitions in drawing order: per upper level (by energy), lasers, decays, leak.

    Returns
    -------
    list of tuple
        ``(kind, upper, lower, value)``: kind ``"laser"`` (value: Beam),
        ``"decay"`` (value: branching) or ``"leak"`` (value: branching to other).
    """
    scheme = setup.scheme
    out = []
    for up in sorted(scheme.levels, key=lambda lv: lv.energy):
        G = scheme.total_rate(up.id)
        group = [("laser", b.upper, b.lower, b) for b in setup.beams if b.upper == up.id]
        decays = sorted(scheme.decays_from(up.id), key=lambda d: scheme.level(d.lower).energy)
        group += [("decay", up.id, d.lower, d.rate / G) for d in decays]
        if G > 0 and scheme.unlisted_rate(up.id) > 0:
            group.append(("leak", up.id, None, scheme.unlisted_rate(up.id) / G))
        if group:
            out.append(group)
    return out


def spread_labels(energies, gap):
    """Label heights: the energies, pushed apart upwards to at least ``gap``."""
    order = sorted(range(len(energies)), key=lambda i: energies[i])
    heights = list(energies)
    last = None
    for i in order:
        if last is not None and heights[i] < last + gap:
            heights[i] = last + gap
        last = heights[i]
    return heights


class LevelsView(PlotView):
    """The scheme's levels, lasers and decay branches."""

    def __init__(self, parent=None):
        super().__init__(parent, caption_lines=2)
        item = self.plot.getPlotItem()
        item.setLabel("left", "energy above the lowest level (cm⁻¹)")
        item.hideAxis("bottom")
        item.setMouseEnabled(False, False)
        item.hideButtons()
        self.setup = None
        self.set_caption("Drawn to scale in energy. Thick arrows up: the lasers' driven lines. "
                             "Thin arrows down: decay branches with their branching ratio. "
                             "Dotted: decays the scheme does not list (lost to “other”).")

    def display(self, setup):
        self.setup = setup
        self.redraw()

    def redraw(self):
        self.clear()
        if self.setup is None:
            return
        setup, t = self.setup, self.theme
        scheme = setup.scheme
        index = {lv.id: i for i, lv in enumerate(scheme.levels)}
        n = len(scheme.levels) + 1
        E = {lv.id: energy_cm(lv) for lv in scheme.levels}
        top = max(E.values()) or 1.0
        groups = columns(setup)
        x, slots = 0.0, []
        for group in groups:
            for col in group:
                slots.append((x, col))
                x += 1.0
            x += 0.6
        right = x
        for lv in scheme.levels:
            is_target = lv.id == setup.target
            pen = pg.mkPen(t.target if is_target else t.text, width=3.5 if is_target else 2)
            self.plot.plot([-0.8, right - 0.2], [E[lv.id]] * 2, pen=pen)
        heights = spread_labels([E[lv.id] for lv in scheme.levels], LABEL_GAP * top)
        for lv, h in zip(scheme.levels, heights):
            text = f"{lv.id}  J={lv.J:g}" + (f"  {lv.label}" if lv.label else "")
            colour = t.target if lv.id == setup.target else t.text
            label = pg.TextItem(text, color=colour, anchor=(0, 0.5))
            label.setFont(base_font(-0.5, bold=lv.id == setup.target))
            label.setPos(right, h)
            self.plot.addItem(label)
            if abs(h - E[lv.id]) > 1e-9:
                self.plot.plot([right - 0.2, right], [E[lv.id], h], pen=pg.mkPen(t.rule))
        for xs, (kind, up, lo, value) in slots:
            if kind == "laser":
                nm = line(scheme, lo, up).wavelength * 1e9
                colour = wavelength_colour(nm)
                self._arrow(xs, E[lo], E[up], colour, 5.0, "t1")
                self._text(xs, 0.5 * (E[lo] + E[up]), f"{value.name}  {nm:.1f} nm",
                           readable(colour, t), bold=True)
            elif kind == "decay":
                colour = t.level_colour(index[up], n)
                self._arrow(xs, E[up], E[lo], colour, 1.0 + 3.0 * value, "t")
                self._text(xs, E[lo] + 0.5 * (E[up] - E[lo]), f"{up}→{lo}  {value:.0%}", colour)
            else:
                colour = t.other
                end = E[up] - LEAK_DROP * top
                self._arrow(xs, E[up], end, colour, 1.5, "x", Qt.DotLine)
                self._text(xs + 0.35, end, f"other {value:.0%}", colour, rotate=False)
        self.plot.getPlotItem().setXRange(-1.0, right + LABEL_ROOM, padding=0)
        self.plot.getPlotItem().setYRange(-0.04 * top, 1.06 * top, padding=0)
        self.set_heading(f"{scheme.name}: levels to scale in energy")

    def _arrow(self, x, y0, y1, colour, width, symbol, style=Qt.SolidLine):
        self.plot.plot([x, x], [y0, y1], pen=pg.mkPen(colour, width=width, style=style))
        self.plot.plot([x], [y1], pen=None, symbol=symbol, symbolSize=11,
                       symbolBrush=colour, symbolPen=pg.mkPen(colour))

    def _text(self, x, y, text, colour, bold=False, rotate=True):
        label = pg.TextItem(text, color=colour, anchor=(0.5, 1.0) if rotate else (0, 0.5),
                            angle=90 if rotate else 0)
        label.setFont(base_font(-1.5, bold=bold))
        label.setPos(x, y)
        self.plot.addItem(label)

    def curves(self):
        if self.setup is None:
            return [], []
        header = ["kind", "upper", "lower", "wavelength_nm", "branching", "beam"]
        rows = []
        for group in columns(self.setup):
            for kind, up, lo, value in group:
                nm = line(self.setup.scheme, lo, up).wavelength * 1e9 if lo else ""
                if kind == "laser":
                    rows.append([kind, up, lo, nm, "", value.name])
                else:
                    rows.append([kind, up, lo or "other", nm, value, ""])
        return header, rows
