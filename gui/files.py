"""Writing what the window shows: setups (TOML), results (HDF5), curves (CSV)
and figures (PNG, SVG). No dialogs here; the window asks for the paths."""

import contextlib
import copy
import csv
import os
from pathlib import Path

from PySide6.QtCore import QPoint, QRect, QSize, Qt
from PySide6.QtGui import QFont, QFontMetrics, QImage, QPainter, QPalette, QRegion
from PySide6.QtSvg import QSvgGenerator
from PySide6.QtWidgets import QGraphicsItem, QGraphicsView, QWidget

import pumpsim
from pumpsim.h5out import write_result
from pumpsim.setup_file import setup_from_document

PNG_SCALE = 2  # exported PNGs at twice the on-screen size, for print
CONTEXT_MARGIN = 6  # pixels around the exported caption


def rebased(setup, path):
    """The setup as it will be once saved at ``path``.

    The scheme is named relative to the setup file, so saving into another
    folder rewrites that one key to keep pointing at the same scheme file;
    saving beside the original leaves the document exactly as it was.
    """
    path = Path(path).resolve()
    doc = copy.deepcopy(setup.document)
    scheme = Path(setup.scheme.path).resolve()
    if (path.parent / doc["scheme"]).resolve() != scheme:
        try:
            doc["scheme"] = Path(os.path.relpath(scheme, path.parent)).as_posix()
        except ValueError:  # another drive: only an absolute path works
            doc["scheme"] = scheme.as_posix()
    return setup_from_document(doc, str(path), scheme=setup.scheme, text_=setup.text)


def save_setup_file(setup, path):
    """Save ``setup`` as TOML at ``path``; returns the setup as saved (path and text set)."""
    out = rebased(setup, path)
    pumpsim.save_setup(out, path)  # into the file's own text: its comments stay
    return pumpsim.load_setup(path)


def write_result_file(result, path):
    """The full result as HDF5 (layout of ``pumpsim run --out``)."""
    write_result(path, result, command="pumpsim gui")


def write_csv(path, header, rows):
    """A table with a header row; numbers written with full precision."""
    tmp = Path(str(path) + ".partial")
    with open(tmp, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(header)
        w.writerows([[repr(float(x)) if isinstance(x, float) else x for x in row] for row in rows])
    os.replace(tmp, path)


def context_text(setup):
    """The caption an exported figure carries: setup file, key values, tool version."""
    from pumpsim.schema import fields_of

    from .edits import field_state

    name = Path(setup.path).name if setup.path else "unsaved setup"
    beams = []
    for b in setup.beams:
        values = ", ".join(f"{f.label} {field_state(setup, f, b.name)[0]:.4g} {f.unit}"
                           for f in fields_of("beam") if f.key in CONTEXT_BEAM_KEYS)
        beams.append(f"laser “{b.name}” {b.lower} → {b.upper}: {values}")
    src = setup.source
    source = f"source {src.kind}" + (f" {src.temperature:.4g} K" if src.temperature else "")
    return (f"pumpsim {pumpsim.__version__} · setup {name} · target {setup.target} · {source} · "
            f"{setup.mode} mode · tolerance {setup.numerics.tolerance:g}\n" + "\n".join(beams))


CONTEXT_BEAM_KEYS = ("power_mW", "waist_mm", "waist_across_mm", "detuning_MHz")


def export_figure(figure, path, context):
    """Save a view's figure (a widget: heading, plot, key, caption) as PNG or SVG,
    chosen by the file's suffix, with ``context`` as a small caption under it.

    Both are painted by Qt: the PNG at ``PNG_SCALE`` times the on-screen size
    (text and lines drawn at that size, not enlarged pixels), the SVG into Qt's
    SVG generator (pyqtgraph's SVG exporter, 0.14.0, cannot parse the path data
    Qt 6 writes).
    """
    suffix = Path(path).suffix.lower()
    if suffix not in (".png", ".svg"):
        raise ValueError(f"export a figure as .png or .svg, not {suffix or 'no suffix'!r}")
    with contextlib.ExitStack() as stack:
        for view in figure.findChildren(QGraphicsView):
            stack.enter_context(uncached(view))
        _export(figure, path, suffix, context)


@contextlib.contextmanager
def uncached(view):
    """Items of a graphics view painted afresh for an export, not from their on-screen
    pixmap caches (which would put screen-resolution bitmaps into a PNG at twice
    the size, or into an SVG)."""
    items = [i for i in view.scene().items() if i.cacheMode() != QGraphicsItem.NoCache]
    modes = [i.cacheMode() for i in items]
    for i in items:
        i.setCacheMode(QGraphicsItem.NoCache)
    try:
        yield
    finally:
        for i, mode in zip(items, modes):
            i.setCacheMode(mode)


def _paint(painter, figure, context, height):
    """The figure, then the context caption under it, in figure pixels."""
    painter.fillRect(QRect(0, 0, figure.width(), height),
                     figure.palette().color(figure.backgroundRole()))
    figure.render(painter, QPoint(0, 0), QRegion(), QWidget.DrawChildren)
    painter.setPen(figure.palette().color(QPalette.PlaceholderText))
    painter.setFont(context_font(figure))
    painter.drawText(QRect(CONTEXT_MARGIN, figure.height() + CONTEXT_MARGIN,
                           figure.width() - 2 * CONTEXT_MARGIN, height - figure.height()),
                     Qt.TextWordWrap, context)


def context_font(figure):
    font = QFont(figure.font())
    font.setPointSizeF(font.pointSizeF() - 1)
    return font


def _export(figure, path, suffix, context):
    metrics = QFontMetrics(context_font(figure))
    box = metrics.boundingRect(QRect(0, 0, figure.width() - 2 * CONTEXT_MARGIN, 10_000),
                               Qt.TextWordWrap, context)
    height = figure.height() + box.height() + 2 * CONTEXT_MARGIN
    if suffix == ".png":
        image = QImage(figure.width() * PNG_SCALE, height * PNG_SCALE, QImage.Format_ARGB32)
        painter = QPainter(image)
        painter.setRenderHint(QPainter.Antialiasing)
        painter.scale(PNG_SCALE, PNG_SCALE)
        _paint(painter, figure, context, height)
        painter.end()
        if not image.save(str(path)):
            raise OSError(f"could not write {path}")
    else:
        gen = QSvgGenerator()
        gen.setFileName(str(path))
        gen.setSize(QSize(figure.width(), height))
        gen.setViewBox(QRect(0, 0, figure.width(), height))
        gen.setTitle("pumpsim figure")
        gen.setDescription(context)
        painter = QPainter(gen)
        _paint(painter, figure, context, height)
        painter.end()
