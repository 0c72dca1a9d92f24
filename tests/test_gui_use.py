"""The window used as a physicist uses it (pytest-qt, offscreen): the map puts
each value where it belongs, every way of changing a value is applied, the
live result comes before the studies, saving keeps the file's comments, and
nothing moves while results stream in.

Tests wait on signals and states, never on sleeps.
"""

import os
import threading
import tomllib

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402
import pytest  # noqa: E402

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

import pumpsim  # noqa: E402
from PySide6.QtCore import QPoint, Qt  # noqa: E402
from PySide6.QtWidgets import QLayout, QStyle, QStyleOptionSlider  # noqa: E402
from pumpsim_gui import study_view  # noqa: E402
from pumpsim_gui.evaluate import Superseded, quick_estimate  # noqa: E402
from pumpsim_gui.window import MainWindow  # noqa: E402
from pumpsim_gui.worker import LiveCompute  # noqa: E402
from test_gui import CHEAP, WAIT_MS, cheap_path, open_window, wait_engine  # noqa: E402,F401

STUDY_WAIT_MS = 240_000  # a study's engine pass over every point, on a loaded machine


def power_mW(w):
    return w.setup.beam("pump").power * 1e3


# -- 1. the power x waist map --------------------------------------------------------

def crossings(x, y, level):
    """x where the polyline (x, y) crosses y = level, linear between its points."""
    out = []
    for i in range(len(x) - 1):
        if y[i] != y[i + 1] and (y[i] - level) * (y[i + 1] - level) <= 0:
            out.append(x[i] + (level - y[i]) * (x[i + 1] - x[i]) / (y[i + 1] - y[i]))
    return out


def test_map_contour_meets_the_set_waist_at_the_power_tabs_least_power(open_window, qtbot,
                                                                        cheap_path):
    """The goal contour drawn on the map, read at the set waist, must give the least
    power the power tab gives for the same goal: both interpolate the same engine
    values linearly in log power (the map's row at the set waist is the power curve)."""
    w = open_window(pumpsim.load_setup(cheap_path))
    w.goal.setValue(0.5)
    w.tabs.setCurrentWidget(w.power)
    qtbot.waitUntil(lambda: w.power.complete, timeout=STUDY_WAIT_MS)
    least = w.power.least_power()
    assert least is not None
    w.tabs.setCurrentWidget(w.map)
    qtbot.waitUntil(lambda: w.map.complete, timeout=STUDY_WAIT_MS)
    w.map.redraw()
    waist = np.log10(w.setup.beam("pump").waist * 1e3)
    drawn = []  # what is on the plot: every polyline item with more than one point
    for item in w.map.plot.getPlotItem().listDataItems():
        x, y = item.getData()
        if x is not None and len(x) > 1:
            drawn += crossings(np.asarray(x), np.asarray(y), waist)
    assert drawn, "no contour crosses the set waist"
    assert 10 ** min(drawn) == pytest.approx(least, rel=1e-9)


def test_cells_are_bounded_half_way_between_uneven_points():
    from pumpsim_gui.map_view import cell_edges

    centres = np.log10([1.0, 10.0, 30.0, 100.0])  # uneven in log, as with the set point added
    edges = cell_edges(centres)
    np.testing.assert_allclose(edges[1:-1], 0.5 * (centres[1:] + centres[:-1]))
    np.testing.assert_allclose(0.5 * (edges[:-1] + edges[1:])[[0, -1]], centres[[0, -1]])


# -- 2. every way of changing a value ------------------------------------------------

def slider_handle(slider):
    opt = QStyleOptionSlider()
    slider.initStyleOption(opt)
    return slider.style().subControlRect(QStyle.CC_Slider, opt, QStyle.SC_SliderHandle,
                                         slider).center()


def drag_slider(qtbot, slider, dx):
    """Press on the handle, move by ``dx`` pixels in steps, release, as a mouse does."""
    start = slider_handle(slider)
    qtbot.mousePress(slider, Qt.LeftButton, pos=start)
    for k in range(1, 6):
        qtbot.mouseMove(slider, QPoint(start.x() + dx * k // 5, start.y()))
    qtbot.mouseRelease(slider, Qt.LeftButton, pos=QPoint(start.x() + dx, start.y()))


def type_value(qtbot, entry, text):
    entry.setFocus()
    entry.selectAll()
    qtbot.keyClicks(entry, text)
    qtbot.keyClick(entry, Qt.Key_Return)


def test_every_way_of_changing_a_value_is_applied(open_window, qtbot, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    row = w.panel.row("beam.pump.power_mW")
    first = power_mW(w)

    drag_slider(qtbot, row.slider, 120)  # slider, dragged with the mouse
    dragged = power_mW(w)
    assert dragged != pytest.approx(first)
    assert row.entry.text() == f"{dragged:.6g}"

    type_value(qtbot, row.entry, f"{first:g}")  # typing the value from before the drag
    assert power_mW(w) == pytest.approx(first)
    assert row.slider.value() == row.scale.to_position(first)  # the slider follows

    row.slider.setFocus()
    qtbot.keyClick(row.slider, Qt.Key_PageUp)  # arrow / page keys on the slider
    keyed = power_mW(w)
    assert keyed > first and row.entry.text() == f"{keyed:.6g}"
    type_value(qtbot, row.entry, f"{first:g}")
    assert power_mW(w) == pytest.approx(first)

    assert w.undo()  # undo brings the keyed value back, and the row knows it
    assert power_mW(w) == pytest.approx(keyed) and row.entry.text() == f"{keyed:.6g}"
    type_value(qtbot, row.entry, f"{first:g}")
    assert power_mW(w) == pytest.approx(first)
    assert w.undo() and w.redo() and power_mW(w) == pytest.approx(first)

    drag_slider(qtbot, row.slider, -80)  # open a file after a drag
    assert w.open_path(cheap_path)
    assert power_mW(w) == pytest.approx(first) and row.entry.text() == f"{first:.6g}"
    assert row.slider.value() == row.scale.to_position(first)
    type_value(qtbot, row.entry, f"{dragged:.6g}")
    assert power_mW(w) == pytest.approx(dragged)
    # whatever the route, what is shown is what is computed
    shown = wait_engine(qtbot, w)
    assert shown.result.setup.beam("pump").power * 1e3 == pytest.approx(dragged)


# -- 3. the live result comes first ---------------------------------------------------

def test_studies_wait_while_the_live_result_is_computed(qtbot, cheap_path, monkeypatch):
    """With a study tab open, no study point is computed while a live request is
    under way; the study goes on once the live result is in (project design: the
    live answer first, studies with what is left)."""
    log, release, running = [], threading.Event(), threading.Event()

    def live_engine(setup, superseded):
        running.set()
        while not release.wait(0.01):  # held until the test lets it finish
            if superseded():
                raise Superseded("test")
        log.append("live engine")
        return pumpsim.simulate(setup)

    def study_quick(setup):
        log.append("study point")
        return quick_estimate(setup)

    monkeypatch.setattr(study_view, "quick_estimate", study_quick)
    w = MainWindow(pumpsim.load_setup(cheap_path), live=LiveCompute(full=live_engine))
    w.confirm_discard = lambda: "discard"
    qtbot.addWidget(w)
    try:
        qtbot.waitUntil(running.is_set, timeout=WAIT_MS)
        w.tabs.setCurrentWidget(w.power)  # the study starts; the live engine is still busy
        # the study has either given way (it waits) or, wrongly, computed a point
        qtbot.waitUntil(lambda: getattr(w.studies, "held", False) or "study point" in log,
                        timeout=WAIT_MS)
        assert "study point" not in log
        release.set()
        qtbot.waitUntil(lambda: w.shown is not None and w.shown.stage == "engine",
                        timeout=WAIT_MS)
        qtbot.waitUntil(lambda: "quick" in w.power.done, timeout=WAIT_MS)
        assert log[0] == "live engine" and log.count("study point") == len(w.power.powers)
    finally:
        release.set()
        w.close()


# -- 5. saving keeps the user's comments ------------------------------------------------

def test_saving_from_the_window_keeps_comments_and_order(open_window, qtbot, cheap_path, tmp_path):
    text = "# pump test bench, invented\n" + CHEAP.replace(
        "power_mW = 0.02", "power_mW = 0.02  # measured at the fibre output")
    cheap_path.write_text(text, encoding="utf-8")
    w = open_window(pumpsim.load_setup(cheap_path))
    row = w.panel.row("beam.pump.power_mW")
    drag_slider(qtbot, row.slider, 60)
    assert w.dirty and w.save_to(cheap_path)
    saved = cheap_path.read_text(encoding="utf-8")
    assert saved.startswith("# pump test bench, invented\n")
    assert "# measured at the fibre output" in saved
    assert tomllib.loads(saved)["beam"][0]["power_mW"] == pytest.approx(power_mW(w))
    old, new = text.splitlines(), saved.splitlines()
    assert len(old) == len(new) and sum(a != b for a, b in zip(old, new)) == 1
    other = tmp_path / "elsewhere" / "copy.toml"  # another folder: the scheme line changes too
    other.parent.mkdir()
    assert w.save_to(other)
    copy = other.read_text(encoding="utf-8")
    assert "# measured at the fibre output" in copy and copy.startswith("# pump test bench")
    assert pumpsim.load_setup(other).beam("pump").power == pytest.approx(w.setup.beam("pump").power)


# -- 6. nothing moves while results stream ---------------------------------------------

def geometry(w):
    """Where the parts of the window are, in window coordinates, once every layout
    has caught up with the texts just set."""
    for layout in w.findChildren(QLayout):
        layout.activate()
    parts = [w.readouts, w.tabs, w.profile.plot]
    vb = w.profile.plot.getPlotItem().vb.sceneBoundingRect()  # the data area of the plot
    return [(p.mapTo(w, QPoint(0, 0)), p.size()) for p in parts] + [vb]


def test_nothing_moves_while_results_stream(open_window, qtbot, cheap_path):
    """A request streams a quick estimate, the engine at the coarse tolerance and the
    converged engine result; the layout must be the same for each."""
    setup = pumpsim.load_setup(cheap_path).with_value("numerics.tolerance", 1e-4)
    w = open_window(setup, live=LiveCompute(full=lambda s, superseded: pumpsim.simulate(s)))
    w.resize(1280, 720)
    wait_engine(qtbot, w)
    # the worker records the run's time after sending its result: wait for that record,
    # or it could overwrite ours
    qtbot.waitUntil(lambda: w.live.last_engine_s > 0, timeout=WAIT_MS)
    w.live.last_engine_s = 10.0  # as if runs had proved slow: the coarse pass is taken
    seen = {}

    def record(update):
        seen[update.stage] = geometry(w)

    w.displayed.connect(record)
    w.apply_edit("beam.pump.power_mW", 0.05)
    qtbot.waitUntil(lambda: "engine" in seen, timeout=WAIT_MS)
    assert set(seen) == {"quick", "coarse", "engine"}
    assert seen["quick"] == seen["coarse"] == seen["engine"]
