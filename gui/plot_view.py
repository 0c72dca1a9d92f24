"""The small contract every view tab meets, and a pyqtgraph plot to build on.

A view is a widget with:

* ``apply_theme(theme)``: restyle and redraw;
* ``curves()``: ``(header, rows)`` of what it shows, for CSV export
  (column names carry units);
* ``figure``: the widget exported to PNG and SVG.
"""

import pyqtgraph as pg
from PySide6.QtWidgets import QGraphicsItem, QLabel, QVBoxLayout, QWidget

from . import theme as th


class PlotView(QWidget):
    """A titled pyqtgraph plot with a caption line under it."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.theme = th.LIGHT
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        self.plot = pg.PlotWidget()
        self.plot.getPlotItem().setMenuEnabled(False)
        # Axes hardly change while a slider moves, yet replaying their tick text is most
        # of a plot's repaint (measured on the profile view: ~27 ms of ~33); a pixmap
        # cache, renewed whenever an axis changes, makes the repaint a few milliseconds.
        for name in ("left", "bottom", "right", "top"):
            self.plot.getPlotItem().getAxis(name).setCacheMode(
                QGraphicsItem.DeviceCoordinateCache)
        self.legend = self.plot.getPlotItem().addLegend(offset=(-10, 10))
        layout.addWidget(self.plot, 1)
        self.caption = QLabel()
        self.caption.setObjectName("hint")
        self.caption.setWordWrap(True)
        layout.addWidget(self.caption)
        self.figure = self.plot
        self._structure = None

    def apply_theme(self, theme):
        self.theme = theme
        th.style_plot(self.plot, theme)
        self.legend.setLabelTextColor(theme.text)
        self.legend.setBrush(pg.mkBrush(theme.panel + "d8"))
        self.legend.setPen(pg.mkPen(theme.rule))
        self._structure = None
        self.redraw()

    def clear(self):
        self.plot.getPlotItem().clear()
        self.legend.clear()
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
