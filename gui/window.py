"""The main window: setup panel on the left, results on the right.

The window owns the current setup and nothing computes on its thread:
every change goes through :func:`~pumpsim_gui.edits.apply_edit` (the
``--set`` keys and checks) and is handed to the worker lanes; results come
back as :class:`~pumpsim_gui.worker.Update` records and are shown only if
:class:`~pumpsim_gui.worker.Freshness` says they are newer than what is on
screen.
"""

import copy
import time
from pathlib import Path

from PySide6.QtCore import QTimer, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (QApplication, QComboBox, QDoubleSpinBox, QFileDialog, QHBoxLayout,
                               QLabel, QMainWindow, QMessageBox, QSplitter, QTabWidget,
                               QVBoxLayout, QWidget)

import pumpsim
from pumpsim.errors import InputError

from . import files
from . import theme as th
from .banners import CautionBar, MessageBar
from .controls import PANEL_WIDTH, SetupPanel
from .edits import apply_edit
from .levels_view import LevelsView
from .map_view import MapView
from .power_view import PowerView
from .profile_view import ProfileView
from .readouts import Readouts
from .routes_view import RoutesView
from .study_view import StudyView
from .worker import Freshness, LiveCompute, StudyCompute

STUDY_DELAY_MS = 400  # a visible study restarts once the setup has stood still this long
DEFAULT_GOAL = 0.9
PANEL_SHARE = PANEL_WIDTH + 30  # the setup panel's starting width (px); the splitter moves it
STATUS_WORDS = {"quick": "Quick estimate", "coarse": "Engine (coarse tolerance)", "engine": "Engine"}


class MainWindow(QMainWindow):
    """The desktop window on one setup.

    Parameters
    ----------
    setup : Setup
    theme : str
        ``"light"`` or ``"dark"``.
    live : LiveCompute, optional
        Supplied by tests to control the computations.

    Signals
    -------
    displayed(Update)
        After a live result has been put on screen.
    """

    displayed = Signal(object)

    def __init__(self, setup, theme="light", live=None, parent=None):
        super().__init__(parent)
        self.theme = th.THEMES[theme]
        th.apply(QApplication.instance(), self.theme)  # before the widgets: cheaper
        self.setup, self.saved_document = setup, copy.deepcopy(setup.document)
        self.live = live or LiveCompute()
        self.live.setParent(self)
        self.studies = StudyCompute(self, live_idle=self.live.idle)
        self.freshness = Freshness()
        self.shown = None
        self.failure = None  # (generation, message) of the newest request that raised
        self.study_keys, self.study_running = {}, None
        self.undone, self.redone = [], []  # setups before each edit, and those undone

        self.message = MessageBar()
        self.panel = SetupPanel()
        self.readouts = Readouts()
        self.caution = CautionBar()
        self.profile, self.power, self.map = ProfileView(), PowerView(), MapView()
        self.routes, self.levels = RoutesView(), LevelsView()
        self.tabs = QTabWidget()
        for view, name in ((self.profile, "Along the beam"), (self.power, "Transfer vs power"),
                           (self.map, "Power × waist"), (self.routes, "Routes"),
                           (self.levels, "Level scheme")):
            self.tabs.addTab(view, name)
        self._layout()
        self._menus()

        self.study_timer = QTimer(self)
        self.study_timer.setSingleShot(True)
        self.study_timer.setInterval(STUDY_DELAY_MS)
        self.study_timer.timeout.connect(self._refresh_tab)
        self.panel.edited.connect(self.apply_edit)
        self.live.updated.connect(self._on_update)
        self.live.failed.connect(self._on_failed)
        self.studies.progressed.connect(self._on_study_point)
        self.studies.failed.connect(self.message.show_message)
        self.routes.use_route.connect(
            lambda beam, lo, up: self.apply_edit(f"beam.{beam}.transition", [lo, up]))
        self.tabs.currentChanged.connect(self._tab_changed)
        self.goal.valueChanged.connect(self._goal_changed)
        self.study_beam.activated.connect(lambda _: self._refresh_tab())

        self.apply_theme(self.theme.name)
        self.set_setup(setup)

    # -- layout ---------------------------------------------------------------
    def _layout(self):
        right = QWidget()
        column = QVBoxLayout(right)
        column.setContentsMargins(0, 0, 0, 0)
        column.addWidget(self.readouts)
        bar = QHBoxLayout()
        bar.addWidget(QLabel("Goal: transfer fraction of at least"))
        self.goal = QDoubleSpinBox()
        self.goal.setRange(0.01, 0.999)
        self.goal.setSingleStep(0.01)
        self.goal.setDecimals(3)
        self.goal.setValue(DEFAULT_GOAL)
        bar.addWidget(self.goal)
        bar.addSpacing(24)
        bar.addWidget(QLabel("Studies vary the laser"))
        self.study_beam = QComboBox()
        bar.addWidget(self.study_beam)
        bar.addStretch(1)
        column.addLayout(bar)
        column.addWidget(self.tabs, 1)
        split = QSplitter()
        split.addWidget(self.panel)
        split.addWidget(right)
        split.setStretchFactor(1, 1)
        split.setSizes([PANEL_SHARE, 1000])
        root = QWidget()
        root.setObjectName("root")
        outer = QVBoxLayout(root)
        outer.setContentsMargins(8, 6, 8, 6)
        outer.addWidget(self.message)
        outer.addWidget(split, 1)
        outer.addWidget(self.caution)
        self.setCentralWidget(root)

    def _menus(self):
        m = self.menuBar().addMenu("&File")
        self.menu_actions = {}
        for text, slot, key in (("&Open setup…", self._ask_open, QKeySequence.Open),
                                ("&Save setup", self._save, QKeySequence.Save),
                                ("Save setup &as…", self._ask_save_as, QKeySequence.SaveAs),
                                (None, None, None),
                                ("Export result as &HDF5…", self._ask_export_result, None),
                                ("Export shown &curves as CSV…", self._ask_export_curves, None),
                                ("Export shown &plot as PNG or SVG…", self._ask_export_plot, None),
                                (None, None, None),
                                ("&Quit", self.close, QKeySequence.Quit)):
            if text is None:
                m.addSeparator()
                continue
            action = QAction(text, self)
            if key is not None:
                action.setShortcut(key)
            action.triggered.connect(slot)
            m.addAction(action)
            self.menu_actions[text.replace("&", "").rstrip("…")] = action
        self.export_result_action = self.menu_actions["Export result as HDF5"]
        e = self.menuBar().addMenu("&Edit")
        for text, slot, key in (("&Undo change", self.undo, QKeySequence.Undo),
                                ("&Redo change", self.redo, QKeySequence.Redo)):
            action = QAction(text, self)
            action.setShortcut(key)
            action.triggered.connect(slot)
            e.addAction(action)
            self.menu_actions[text.replace("&", "")] = action
        v = self.menuBar().addMenu("&View")
        self.dark_action = QAction("&Dark theme", self, checkable=True)
        self.dark_action.toggled.connect(lambda on: self.apply_theme("dark" if on else "light"))
        v.addAction(self.dark_action)

    def apply_theme(self, name):
        self.theme = th.THEMES[name]
        th.apply(QApplication.instance(), self.theme)
        self.dark_action.blockSignals(True)
        self.dark_action.setChecked(name == "dark")
        self.dark_action.blockSignals(False)
        for view in self._views():
            view.apply_theme(self.theme)

    def _views(self):
        return [self.tabs.widget(i) for i in range(self.tabs.count())]

    # -- the setup --------------------------------------------------------------
    @property
    def dirty(self):
        """Whether the setup differs from the file it was read from or saved to."""
        return self.setup.document != self.saved_document

    def set_setup(self, setup):
        """Show and compute ``setup`` (already validated)."""
        self.setup = setup
        self.live.request(setup)  # first: the quick estimate starts while the panel catches up
        self.panel.load(setup)
        self.caution.display(setup)
        names = [b.name for b in setup.beams]
        if [self.study_beam.itemText(i) for i in range(self.study_beam.count())] != names:
            current = self.study_beam.currentText()
            self.study_beam.clear()
            self.study_beam.addItems(names)
            if current in names:
                self.study_beam.setCurrentText(current)
        self._set_title()
        self.export_result_action.setEnabled(False)
        self.study_timer.start()

    def apply_edit(self, key, value):
        """Change one value (``--set`` key, file units); a bad value changes nothing.

        Returns
        -------
        bool
            Whether the setup changed.
        """
        try:
            new = apply_edit(self.setup, key, value)
        except InputError as exc:
            # said under the control; a status-bar line would outlive the next change
            self.panel.show_error(key, f"{exc.reason} — nothing was changed.")
            return False
        self.undone.append(self.setup)
        self.redone.clear()
        self.set_setup(new)
        return True

    def undo(self):
        """Go back to the setup before the last change; False if there is none."""
        if not self.undone:
            return False
        self.redone.append(self.setup)
        self.set_setup(self.undone.pop())
        return True

    def redo(self):
        """Make the last undone change again; False if there is none."""
        if not self.redone:
            return False
        self.undone.append(self.setup)
        self.set_setup(self.redone.pop())
        return True

    def _set_title(self):
        name = Path(self.setup.path).name if self.setup.path else "unsaved setup"
        self.setWindowTitle(f"{name}{' •' if self.dirty else ''} — pumpsim")

    # -- live results -------------------------------------------------------------
    def _on_update(self, update):
        if not self.freshness.accept(update):
            return
        self.shown = update
        pending = update.generation < self.live.generation
        self.readouts.display(update, pending)
        # a newer request's result, or the engine result of the request whose quick stage failed
        if self.failure is not None and (update.generation, update.stage == "engine") > (
                self.failure[0], False):
            if self.message.text == self.failure[1]:  # it no longer describes what is shown
                self.message.hide()
            self.failure = None
        self._mark_failure()
        self.profile.display(update, self.goal.value())
        if update.stage != "quick":
            self.panel.show_ran(update.result.numerics)
        done = update.stage == "engine" and not pending
        self.export_result_action.setEnabled(done)
        n = update.result.numerics
        self.statusBar().showMessage(
            f"{STATUS_WORDS[update.stage]}: computed in "
            f"{n.seconds * 1e3:.0f} ms, on screen "
            f"{(time.perf_counter() - update.requested) * 1e3:.0f} ms after the change")
        self.displayed.emit(update)

    def _on_failed(self, generation, text):
        """A computation raised: say so in the window; the setup and its edits stay."""
        if generation < self.live.generation:
            return  # a newer request is under way and answers for itself
        self.failure = (generation, f"{text} — the setup and your unsaved changes are kept; "
                                    "change a value to compute again.")
        self.message.show_message(self.failure[1])
        self._mark_failure()

    def _mark_failure(self):
        """The readout of a request that failed must not promise a converged result."""
        if self.failure is not None and self.shown is not None \
                and self.shown.generation == self.failure[0] and self.shown.stage == "quick":
            self.readouts.set_stage("computation failed", "unconverged")
            self.readouts.detail.setText("Quick estimate only: the engine run failed (see the "
                                         "message above)")

    # -- studies ----------------------------------------------------------------
    def _tab_changed(self, _index):
        self.studies.cancel()
        self.study_running = None
        self._refresh_tab()

    def _refresh_tab(self):
        view = self.tabs.currentWidget()
        if view is self.levels:
            self.levels.display(self.setup)
        if not isinstance(view, StudyView) or not self.setup.beams:
            return
        key = (self.live.generation, self.study_beam.currentText())
        if self.study_keys.get(view) == key and (view.complete or self.study_running is view):
            return  # done, or under way for this very setup
        self.study_keys[view] = key
        self.study_running = view
        view.wanted = self.goal.value()
        self.studies.submit(view.start(self.setup, self.study_beam.currentText()))

    def _on_study_point(self, point):
        for view in (self.power, self.map, self.routes):
            view.receive(point)

    def _goal_changed(self, value):
        for view in (self.power, self.map, self.routes):
            view.set_wanted(value)
        if self.shown is not None:
            self.profile.display(self.shown, value)

    # -- files ------------------------------------------------------------------
    def open_path(self, path):
        """Load a setup file; on any problem, say so and change nothing."""
        try:
            setup = pumpsim.load_setup(path)
        except InputError as exc:
            self.message.show_message(f"Could not open the setup: {exc}. Nothing was changed.")
            return False
        except OSError as exc:
            self.message.show_message(f"Could not read {path}: {exc.strerror or exc}. "
                                      "Nothing was changed.")
            return False
        self.saved_document = copy.deepcopy(setup.document)
        self.message.hide()
        self.undone.clear()
        self.redone.clear()
        self.set_setup(setup)
        return True

    def save_to(self, path):
        try:
            saved = files.save_setup_file(self.setup, path)
        except (OSError, InputError) as exc:
            self.message.show_message(f"Could not save {path}: {exc}")
            return False
        self.saved_document = copy.deepcopy(saved.document)
        self.setup = saved
        self._set_title()
        self.statusBar().showMessage(f"Saved {path}", 5000)
        return True

    def export_result(self, path):
        if self.shown is None or self.shown.stage != "engine":
            self.message.show_message("The engine result is still being computed; export it "
                                      "once the readout says “Converged”.", "info")
            return False
        return self._write(path, lambda: files.write_result_file(self.shown.result, path))

    def export_curves(self, path):
        header, rows = self.tabs.currentWidget().curves()
        return self._write(path, lambda: files.write_csv(path, header, rows))

    def export_plot(self, path):
        return self._write(path, lambda: files.export_figure(
            self.tabs.currentWidget().figure, path, files.context_text(self.setup)))

    def _write(self, path, write):
        try:
            write()
        except (OSError, ValueError) as exc:
            self.message.show_message(f"Could not write {path}: {exc}")
            return False
        self.statusBar().showMessage(f"Wrote {path}", 5000)
        return True

    def _folder(self):
        return str(Path(self.setup.path).parent) if self.setup.path else ""

    def _ask_open(self):
        if self.dirty and not self._settle_changes():
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open setup", self._folder(),
                                              "Setup files (*.toml);;All files (*)")
        if path:
            self.open_path(path)

    def _save(self):
        if self.setup.path:
            return self.save_to(self.setup.path)
        return self._ask_save_as()

    def _ask_save_as(self):
        path, _ = QFileDialog.getSaveFileName(self, "Save setup as", self._folder(),
                                              "Setup files (*.toml)")
        return bool(path) and self.save_to(path)

    def _ask_export_result(self):
        path, _ = QFileDialog.getSaveFileName(self, "Export result", self._folder(),
                                              "HDF5 files (*.h5)")
        if path:
            self.export_result(path)

    def _ask_export_curves(self):
        path, _ = QFileDialog.getSaveFileName(self, "Export curves", self._folder(),
                                              "CSV files (*.csv)")
        if path:
            self.export_curves(path)

    def _ask_export_plot(self):
        path, _ = QFileDialog.getSaveFileName(self, "Export plot", self._folder(),
                                              "PNG image (*.png);;SVG drawing (*.svg)")
        if path:
            self.export_plot(path)

    # -- closing ------------------------------------------------------------------
    def confirm_discard(self):
        """Ask what to do with unsaved changes: ``"save"``, ``"discard"`` or ``"cancel"``."""
        answer = QMessageBox.question(
            self, "Unsaved changes", "The setup has changes that are not saved. Save them?",
            QMessageBox.Save | QMessageBox.Discard | QMessageBox.Cancel, QMessageBox.Save)
        return {QMessageBox.Save: "save", QMessageBox.Discard: "discard"}.get(answer, "cancel")

    def _settle_changes(self):
        """True once unsaved changes are saved or knowingly dropped."""
        choice = self.confirm_discard()
        if choice == "save":
            return bool(self._save())
        return choice == "discard"

    def closeEvent(self, event):
        if self.dirty and not self._settle_changes():
            event.ignore()
            return
        self.hide()
        self.live.stop()
        self.studies.stop()
        event.accept()

