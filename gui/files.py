"""Writing what the window shows: setups (TOML), results (HDF5), curves (CSV)
and figures (PNG, SVG). No dialogs here; the window asks for the paths."""

import contextlib
import copy
import csv
import os
from pathlib import Path

import pyqtgraph.exporters as exporters
from PySide6.QtCore import QRect, QSize
from PySide6.QtGui import QPainter
from PySide6.QtSvg import QSvgGenerator
from PySide6.QtWidgets import QGraphicsItem

import pumpsim
from pumpsim.h5out import write_result
from pumpsim.setup_file import setup_from_document

PNG_SCALE = 2  # exported PNGs at twice the on-screen size, for print


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
    return setup_from_document(doc, str(path), scheme=setup.scheme)


def save_setup_file(setup, path):
    """Save ``setup`` as TOML at ``path``; returns the setup as saved (path and text set)."""
    out = rebased(setup, path)
    pumpsim.save_setup(out, path)
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


def export_figure(widget, path):
    """Save a view's figure as PNG or SVG, chosen by the file's suffix.

    PNG goes through pyqtgraph's image exporter (scene at ``PNG_SCALE``); SVG
    is painted straight into Qt's SVG generator, because pyqtgraph's SVG
    exporter (0.14.0) cannot parse the path data Qt 6.12 writes.
    """
    suffix = Path(path).suffix.lower()
    with uncached(widget):
        _export(widget, path, suffix)


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


def _export(widget, path, suffix):
    if suffix == ".png":
        exporter = exporters.ImageExporter(widget.getPlotItem().scene())
        exporter.parameters()["width"] = int(widget.width() * PNG_SCALE)
        exporter.export(str(path))
    elif suffix == ".svg":
        gen = QSvgGenerator()
        gen.setFileName(str(path))
        size = QSize(widget.width(), widget.height())
        gen.setSize(size)
        gen.setViewBox(QRect(0, 0, size.width(), size.height()))
        gen.setTitle("pumpsim figure")
        painter = QPainter(gen)
        widget.render(painter)
        painter.end()
    else:
        raise ValueError(f"export a figure as .png or .svg, not {suffix or 'no suffix'!r}")
