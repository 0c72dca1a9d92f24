"""Colours and fonts: a light ("paper") and a dark ("slate") theme.

Every colour the window uses lives here, so both themes stay readable.
Contrast ratios (WCAG 2.1 definition, https://www.w3.org/TR/WCAG21/#dfn-contrast-ratio)
on the panel colour: body, caution and error text at least 7:1 (success
criterion 1.4.6), secondary text at least 4.5:1 (1.4.3), plot and level
colours at least 3:1 (1.4.11, non-text contrast); ``tests/test_gui.py``
checks them.
"""

from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtGui import QColor, QFont, QPalette

FONT_FAMILIES = ["Inter", "Noto Sans", "Segoe UI", "Helvetica Neue", "DejaVu Sans", "Arial"]
BASE_POINT_SIZE = 10


@dataclass(frozen=True)
class Theme:
    """One set of colours (``#rrggbb`` strings)."""

    name: str
    window: str
    panel: str
    sunken: str
    text: str
    muted: str
    rule: str
    accent: str
    accent_text: str
    target: str
    caution_bg: str
    caution_text: str
    caution_edge: str
    error_bg: str
    error_text: str
    good: str
    levels: tuple
    other: str
    map_stops: tuple

    def level_colour(self, index, n_levels):
        """Colour of level ``index``; the last of ``n_levels`` is the ``other`` sink."""
        if index == n_levels - 1:
            return self.other
        return self.levels[index % len(self.levels)]

    def colour_map(self):
        """Diverging: one hue below the goal, another above, neutral at the goal
        (the centre of the map's colour scale)."""
        return pg.ColorMap(np.linspace(0.0, 1.0, len(self.map_stops)), list(self.map_stops))


LIGHT = Theme(
    name="light", window="#efece4", panel="#fbfaf6", sunken="#e4e0d5", text="#1b1f27",
    muted="#525866", rule="#c8c2b4", accent="#1d5f86", accent_text="#ffffff",
    target="#a8401c", caution_bg="#fff1c9", caution_text="#4a3600", caution_edge="#c99a1b",
    error_bg="#f9dfdb", error_text="#7d1a10", good="#2a7a4f",
    levels=("#1f66a8", "#b8412b", "#24805f", "#7d4fae", "#9c6c0c", "#1d8aa0", "#a63d74",
            "#58682f"),
    other="#6e727a",
    map_stops=("#4b2378", "#a58bd0", "#f4f0e4", "#72b89a", "#145c43"))

DARK = Theme(
    name="dark", window="#161a20", panel="#1e232b", sunken="#272d37", text="#ece7dc",
    muted="#a9afba", rule="#3b4350", accent="#79b8e3", accent_text="#0f1318",
    target="#f2916b", caution_bg="#3b3013", caution_text="#ffe3a1", caution_edge="#b8902c",
    error_bg="#4a2320", error_text="#ffc9c0", good="#7fd6a4",
    levels=("#72aef0", "#f2866d", "#62cfa4", "#bf98ea", "#e8bd55", "#62cde3", "#ea86b8",
            "#aec272"),
    other="#9aa0a8",
    map_stops=("#d2b6ff", "#6e4f9c", "#262b33", "#3f8f6f", "#9fe8c2"))

THEMES = {t.name: t for t in (LIGHT, DARK)}

STYLE = """
QWidget {{ color: {text}; }}
QMainWindow, QWidget#root {{ background: {window}; }}
QScrollArea, QScrollArea > QWidget > QWidget#setupPanel {{ background: {window}; border: none; }}
QScrollArea#viewScroll, QWidget#viewBody {{ background: {panel}; }}
QGroupBox {{
    background: {panel}; border: 1px solid {rule}; border-radius: 6px;
    margin-top: 1.6em; padding: 8px 8px 6px 8px; font-weight: 600;
}}
QGroupBox::title {{
    subcontrol-origin: margin; left: 8px; padding: 0 4px; color: {accent};
}}
QLabel#fieldLabel {{ font-weight: normal; }}
QLabel#unit {{ color: {muted}; font-weight: normal; }}
QLabel#hint, QLabel#muted {{ color: {muted}; font-weight: normal; }}
QLabel#fieldError {{ color: {error_text}; background: {error_bg}; border-radius: 3px;
    padding: 2px 4px; font-weight: normal; }}
QLineEdit, QComboBox, QDoubleSpinBox {{
    background: {sunken}; border: 1px solid {rule}; border-radius: 4px; padding: 2px 4px;
    selection-background-color: {accent}; selection-color: {accent_text};
}}
QLineEdit[invalid="true"] {{ border: 1px solid {error_text}; }}
QSlider::groove:horizontal {{ height: 4px; background: {rule}; border-radius: 2px; }}
QSlider::sub-page:horizontal {{ background: {accent}; border-radius: 2px; }}
QSlider::handle:horizontal {{
    background: {panel}; border: 2px solid {accent}; width: 12px; margin: -6px 0;
    border-radius: 8px;
}}
QTabWidget::pane {{ border: 1px solid {rule}; border-radius: 6px; background: {panel}; top: -1px; }}
QTabBar::tab {{
    background: {window}; color: {muted}; padding: 6px 14px; border: 1px solid transparent;
    border-top-left-radius: 6px; border-top-right-radius: 6px;
}}
QTabBar::tab:selected {{ background: {panel}; color: {text}; border: 1px solid {rule};
    border-bottom-color: {panel}; font-weight: 600; }}
QFrame#headline {{ background: {panel}; border: 1px solid {rule}; border-radius: 6px; }}
QLabel#bigNumber {{ font-size: {big}pt; font-weight: 600; color: {target}; }}
QLabel#cardTitle {{ color: {muted}; }}
QLabel#stage {{ border-radius: 9px; padding: 2px 10px; font-weight: 600; }}
QLabel#stage[stage="quick"] {{ background: {caution_bg}; color: {caution_text}; }}
QLabel#stage[stage="engine"] {{ background: {good}; color: {panel}; }}
QLabel#stage[stage="coarse"] {{ background: {sunken}; color: {good}; border: 1px solid {good}; }}
QLabel#stage[stage="unconverged"] {{ background: {error_bg}; color: {error_text}; }}
QLabel#stage[stage="waiting"] {{ background: {sunken}; color: {muted}; }}
QFrame#caution {{ background: {caution_bg}; border: 1px solid {caution_edge}; border-radius: 6px; }}
QFrame#caution QLabel {{ color: {caution_text}; background: transparent; }}
QLabel#beamCaution {{ color: {caution_text}; background: {caution_bg};
    border-left: 3px solid {caution_edge}; padding: 3px 6px; font-weight: normal; }}
QFrame#messageBar {{ background: {error_bg}; border: 1px solid {error_text}; border-radius: 6px; }}
QFrame#messageBar QLabel {{ color: {error_text}; background: transparent; }}
QFrame#messageBar[kind="info"] {{ background: {sunken}; border-color: {rule}; }}
QFrame#messageBar[kind="info"] QLabel {{ color: {text}; }}
QPushButton {{ background: {sunken}; border: 1px solid {rule}; border-radius: 4px; padding: 3px 10px; }}
QPushButton:hover {{ border-color: {accent}; }}
QTableWidget {{ background: {panel}; gridline-color: {rule}; border: none;
    selection-background-color: {accent}; selection-color: {accent_text}; }}
QHeaderView::section {{ background: {sunken}; color: {text}; border: none;
    border-right: 1px solid {rule}; padding: 4px; font-weight: 600; }}
QMenuBar {{ background: {window}; }}
QMenuBar::item:selected, QMenu::item:selected {{ background: {accent}; color: {accent_text}; }}
QMenu {{ background: {panel}; border: 1px solid {rule}; }}
QStatusBar {{ background: {window}; color: {muted}; }}
QToolTip {{ background: {panel}; color: {text}; border: 1px solid {rule}; }}
"""


def base_font(delta=0, bold=False):
    """The window's font, ``delta`` points larger than the base size."""
    f = QFont()
    f.setFamilies(FONT_FAMILIES)
    f.setPointSizeF(BASE_POINT_SIZE + delta)
    f.setBold(bold)
    return f


def apply(app, theme):
    """Apply ``theme`` to the whole application (palette, style sheet, plot defaults).

    Restyling costs a second or two once widgets exist, so this is skipped
    when the application already wears ``theme``.
    """
    if app.property("pumpsim_theme") == theme.name:
        return
    app.setProperty("pumpsim_theme", theme.name)
    app.setFont(base_font())
    pal = QPalette()
    for role, colour in ((QPalette.Window, theme.window), (QPalette.Base, theme.sunken),
                         (QPalette.AlternateBase, theme.panel), (QPalette.Text, theme.text),
                         (QPalette.WindowText, theme.text), (QPalette.Button, theme.sunken),
                         (QPalette.ButtonText, theme.text), (QPalette.Highlight, theme.accent),
                         (QPalette.HighlightedText, theme.accent_text),
                         (QPalette.ToolTipBase, theme.panel), (QPalette.ToolTipText, theme.text),
                         (QPalette.PlaceholderText, theme.muted)):
        pal.setColor(role, QColor(colour))
    app.setPalette(pal)
    app.setStyleSheet(STYLE.format(big=BASE_POINT_SIZE + 12, **theme.__dict__))
    pg.setConfigOptions(antialias=True, background=theme.panel, foreground=theme.text)


def style_plot(plot_widget, theme, grid=True):
    """Colours and fonts of one pyqtgraph plot for ``theme``."""
    plot_widget.setBackground(theme.panel)
    item = plot_widget.getPlotItem()
    for name in ("left", "bottom", "right", "top"):
        ax = item.getAxis(name)
        ax.setPen(pg.mkPen(theme.rule))
        ax.setTextPen(pg.mkPen(theme.text))
        ax.setTickFont(base_font(-1))
        ax.label.setFont(base_font())
    item.showGrid(x=grid, y=grid, alpha=0.18 if theme.name == "light" else 0.22)


# Approximate colour of light of a given wavelength: hue anchors of the
# visible spectrum (common practice, no source), linear in between, faded
# towards the edges of vision; ultraviolet and infrared get muted stand-ins.
_SPECTRUM = ((380, (0.38, 0.0, 0.55)), (420, (0.42, 0.0, 0.95)), (440, (0.15, 0.1, 1.0)),
             (490, (0.0, 0.75, 1.0)), (510, (0.0, 0.85, 0.3)), (560, (0.55, 0.9, 0.0)),
             (580, (0.95, 0.85, 0.0)), (610, (1.0, 0.45, 0.0)), (645, (0.95, 0.05, 0.05)),
             (700, (0.8, 0.0, 0.0)), (780, (0.45, 0.0, 0.0)))


def wavelength_colour(wavelength_nm):
    """``#rrggbb`` for light of this vacuum wavelength (nm)."""
    nm = min(max(wavelength_nm, _SPECTRUM[0][0]), _SPECTRUM[-1][0])
    for (a, ca), (b, cb) in zip(_SPECTRUM, _SPECTRUM[1:]):
        if a <= nm <= b:
            t = (nm - a) / (b - a)
            rgb = [x + t * (y - x) for x, y in zip(ca, cb)]
            break
    return "#" + "".join(f"{round(255 * c):02x}" for c in rgb)


def readable(colour, theme, share=0.45):
    """``colour`` moved ``share`` of the way to the theme's text colour, for text
    in a spectral colour (deep blue or violet is too dark to read on slate)."""
    return colour if theme.name == "light" else _mix(colour, theme.text, share)


def _mix(colour, other, share):
    a = [int(colour[i:i + 2], 16) for i in (1, 3, 5)]
    b = [int(other[i:i + 2], 16) for i in (1, 3, 5)]
    return "#" + "".join(f"{round(x + share * (y - x)):02x}" for x, y in zip(a, b))


SHADE_STEPS = ((None, 0.0), ("text", 0.5), ("panel", 0.4), ("text", 0.75))


def shade(colour, index, theme):
    """The ``index``-th shade of ``colour``: itself, then moved towards the text and
    towards the panel colour in turn (distinct sublevel groups of one level)."""
    towards, share = SHADE_STEPS[index % len(SHADE_STEPS)]
    return colour if towards is None else _mix(colour, getattr(theme, towards), share)
