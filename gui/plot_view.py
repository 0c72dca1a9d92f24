"""The small contract every view tab meets, and a pyqtgraph plot to build on.

A view is a widget with:

* ``apply_theme(theme)``: restyle and redraw;
* ``curves()``: ``(header, rows)`` of what it shows, for CSV export
  (column names carry units);
* ``figure``: the widget exported to PNG and SVG (heading, plot, key and
  caption; the routes view adds its table).

Nothing in a view changes size while results stream in: the heading is one
line, shortened with "…" when it does not fit (the whole text in its tooltip),
the key sits under the plot rather than on the data, and the caption keeps
a fixed number of lines.
"""

import types

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QFontMetrics
from PySide6.QtWidgets import (QFrame, QGraphicsItem, QLabel, QScrollArea, QSizePolicy,
                               QVBoxLayout, QWidget)

from . import theme as th

CAPTION_LINES = 3
MIN_HEIGHT = 360  # below this a view scrolls rather than squeezing its plot (small screens)
STYLE_GLYPHS = {Qt.SolidLine: "━━━", Qt.DashLine: "╺━╸╺━╸", Qt.DotLine: "┅┅┅",
                Qt.DashDotLine: "━╸·╺━", Qt.DashDotDotLine: "━·:·━"}


class ElidedLabel(QLabel):
    """One line of text that never widens its parent: cut with "…" to fit, whole in
    the tooltip."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.full = ""
        self.setSizePolicy(QSizePolicy.Ignored, QSizePolicy.Fixed)
        self.setFixedHeight(QFontMetrics(self.font()).height() + 6)

    def set_full_text(self, text):
        self.full = text
        self.setToolTip(text)
        self._fit()

    def resizeEvent(self, event):
        super().resizeEvent(event)
        self._fit()

    def _fit(self):
        metrics = QFontMetrics(self.font())
        self.setText(metrics.elidedText(self.full, Qt.ElideRight, max(self.width() - 4, 10)))


class FlatColumn(QVBoxLayout):
    """A column that asks for no height-for-width: a scroll area around it then scrolls
    only below the column's minimum height, not whenever word-wrapped text would like
    more room than the plot leaves it (the wrapped labels here size themselves)."""

    def hasHeightForWidth(self):
        return False


class WrappedLabel(QLabel):
    """Word-wrapped text that keeps the height its current width needs."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setWordWrap(True)

    def resizeEvent(self, event):
        super().resizeEvent(event)
        self._fit()

    def setText(self, text):
        super().setText(text)
        self._fit()

    def _fit(self):
        need = self.heightForWidth(max(self.width(), 50))
        if need > 0 and need != self.minimumHeight():
            self.setMinimumHeight(need)


def plain_log_ticks(axis, values, scale, spacing):
    """Tick text of a log axis as plain numbers (0.01, 0.1, 1, 10, 100), not a mix
    with powers of ten. Over a few decades only 1, 2 and 5 times a decade are
    labelled, over more only the decades, so that labels never crowd."""
    span = max(values) - min(values) if len(values) else 0.0
    out = []
    for v in values:
        decade = abs(v - round(v)) < 1e-6
        x = 10.0 ** (round(v) if decade else v)
        lead = round(x / 10.0 ** np.floor(np.log10(x) + 1e-9), 6)
        shown = decade or span <= 1.0 or (span <= 2.5 and lead in (2.0, 5.0))
        if not shown:
            out.append("")
        elif 1 <= x < 1e5:
            out.append(f"{x:.0f}" if decade else f"{x:.2g}")
        else:
            out.append(f"{x:g}" if decade else f"{x:.2g}")
    return out


def fixed_lines(label, lines):
    """Give a word-wrapped label room for exactly ``lines`` lines."""
    label.setWordWrap(True)
    label.setAlignment(Qt.AlignLeft | Qt.AlignTop)
    label.setFixedHeight(QFontMetrics(label.font()).lineSpacing() * lines + 4)


SHADE_GLYPHS = {Qt.SolidPattern: "▇▇", Qt.BDiagPattern: "▨▨", Qt.FDiagPattern: "▧▧",
                Qt.DiagCrossPattern: "▩▩"}


def key_entry(text, colour, style=Qt.SolidLine, shade=None):
    """One entry of a key (rich text): a line sample, or for a shading (``shade``: its
    brush pattern, or True for solid) a block of that pattern."""
    if shade is None or shade is False:
        glyph = STYLE_GLYPHS.get(style, "━━━")
    else:
        glyph = SHADE_GLYPHS.get(Qt.SolidPattern if shade is True else shade, "▇▇")
    return (f'<span style="color:{colour}; font-weight:bold">{glyph}</span>&nbsp;'
            # entries break between each other, never inside
            f'{text.replace("<", "&lt;").replace(">", "&gt;").replace(" ", "&nbsp;")}')


class PlotView(QWidget):
    """A pyqtgraph plot with a one-line heading over it and a key and caption under it."""

    def __init__(self, parent=None, caption_lines=CAPTION_LINES, min_height=MIN_HEIGHT):
        super().__init__(parent)
        self.theme = th.LIGHT
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        scroll = QScrollArea()
        scroll.setObjectName("viewScroll")
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarAlwaysOff)
        body = QWidget()
        body.setObjectName("viewBody")
        body.setMinimumHeight(min_height)
        self.column = FlatColumn(body)
        self.column.setContentsMargins(6, 6, 6, 6)
        scroll.setWidget(body)
        outer.addWidget(scroll)
        self.figure = QWidget()
        self.figure.setObjectName("figure")
        self.figure_layout = QVBoxLayout(self.figure)
        self.figure_layout.setContentsMargins(0, 0, 0, 0)
        self.figure_layout.setSpacing(2)
        self.heading = ElidedLabel()
        self.heading.setObjectName("plotHeading")
        self.figure_layout.addWidget(self.heading)
        self.plot = pg.PlotWidget()
        self.plot.getPlotItem().setMenuEnabled(False)
        # Axes hardly change while a slider moves, yet replaying their tick text is most
        # of a plot's repaint (measured on the profile view: ~27 ms of ~33); a pixmap
        # cache, renewed whenever an axis changes, makes the repaint a few milliseconds.
        for name in ("left", "bottom", "right", "top"):
            axis = self.plot.getPlotItem().getAxis(name)
            axis.setCacheMode(QGraphicsItem.DeviceCoordinateCache)
            axis.logTickStrings = types.MethodType(plain_log_ticks, axis)
        self.figure_layout.addWidget(self.plot, 1)
        self.key = WrappedLabel()
        self.key.setObjectName("plotKey")
        self.key.setTextFormat(Qt.RichText)
        self.key.hide()
        self.figure_layout.addWidget(self.key)
        self.caption = QLabel()
        self.caption.setObjectName("hint")
        fixed_lines(self.caption, caption_lines)
        self.figure_layout.addWidget(self.caption)
        self.column.addWidget(self.figure, 1)
        self._structure = None

    def apply_theme(self, theme):
        self.theme = theme
        th.style_plot(self.plot, theme)
        self._structure = None
        self.redraw()

    def set_heading(self, text, colour=None):
        self.heading.set_full_text(text)
        style = f"color: {colour or self.theme.text}; font-weight: 600;"
        if style != self.heading.styleSheet():  # restyling costs; the colour rarely changes
            self.heading.setStyleSheet(style)

    def set_caption(self, text):
        self.caption.setText(text)
        self.caption.setToolTip(text)

    def set_key(self, entries):
        """The key under the plot: ``entries`` from :func:`key_entry`."""
        self.key.setText("&nbsp;&nbsp;&nbsp; ".join(entries))
        self.key.setVisible(bool(entries))

    def clear(self):
        self.plot.getPlotItem().clear()
        self._structure = None

    def rebuild_needed(self, structure):
        """True (after clearing the plot) when what is drawn changed shape.

        Making plot items costs far more than giving them new data, so views
        keep their items while the structure (levels, beams, theme) stays, and
        only call ``setData`` on them: a slider drag then redraws quickly.
        """
        structure = (self.theme.name, structure)
        if structure == self._structure:
            return False
        self.clear()
        self._structure = structure
        return True

    def redraw(self):
        """Draw the current data again (after a theme change)."""

    def curves(self):
        return [], []
