"""The headline strip: transfer fraction, what is shown (quick or converged),
and per beam photons per atom, deflection, peak intensity and saturation
parameter."""

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFrame, QGridLayout, QHBoxLayout, QLabel, QVBoxLayout

from .plot_view import ElidedLabel, fixed_lines
from .profile_view import stage_text

STAGE_WORDS = {"quick": "quick estimate", "coarse": "converged to the coarse tolerance · refining",
               "engine": "converged", "unconverged": "not converged", "waiting": "computing…"}
COLUMNS = ("laser", "photons\nper atom", "deflection\n(mrad)", "peak intensity\n(mW/cm²)",
           "saturation\nparameter s₀")
DETAIL_LINES = 2  # room kept for the stage's words, so the strip never changes height


def _label(text="", name=None, align=Qt.AlignLeft):
    label = QLabel(text)
    if name:
        label.setObjectName(name)
    label.setAlignment(align | Qt.AlignVCenter)
    return label


class Readouts(QFrame):
    """Numbers of the result on show; ``live`` is the :class:`~pumpsim_gui.worker.Update`."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("headline")
        self.live = None
        grid = QGridLayout(self)
        grid.setContentsMargins(12, 6, 12, 6)
        grid.setHorizontalSpacing(20)
        grid.setVerticalSpacing(2)
        left = QVBoxLayout()
        left.setSpacing(2)
        self.title = _label("Atoms in the target", "cardTitle")
        self.fraction = _label("—", "bigNumber")
        self.added = _label("", "muted")  # what the lasers added to what was there before
        self.stage = _label("computing…", "stage")
        self.stage.setProperty("stage", "waiting")
        number = QHBoxLayout()
        number.setSpacing(12)
        number.addWidget(self.fraction)
        number.addWidget(self.stage, 0, Qt.AlignVCenter)
        number.addStretch(1)
        left.addWidget(self.title)
        left.addLayout(number)
        left.addWidget(self.added)
        grid.addLayout(left, 0, 0)
        self.table = QGridLayout()
        self.table.setHorizontalSpacing(14)
        self.table.setVerticalSpacing(2)
        for c, text in enumerate(COLUMNS):
            self.table.addWidget(_label(text, "cardTitle", Qt.AlignRight if c else Qt.AlignLeft),
                                 0, c)
        self.table.setRowStretch(8, 1)
        self.cells = []
        grid.addLayout(self.table, 0, 1)
        grid.setColumnStretch(1, 1)
        self.detail = _label("", "muted")
        fixed_lines(self.detail, DETAIL_LINES)
        grid.addWidget(self.detail, 1, 0, 1, 2)
        self.dark = ElidedLabel()  # sublevel mode: population stuck in dark sublevels
        self.dark.setObjectName("muted")
        self.dark.hide()
        self.dark_fraction = None
        grid.addWidget(self.dark, 2, 0, 1, 2)

    def display(self, live, pending=False):
        """Show an update; ``pending``: a newer change is still being computed."""
        self.live = live
        r = live.result
        self.title.setText(f"Atoms ending in {r.setup.target} (percent of all atoms)")
        self.fraction.setText(f"{r.transfer_fraction:.2%}")
        self.fraction.setToolTip(f"transfer fraction {r.transfer_fraction:.6f}")
        before = self.before_lasers(r)
        self.added.setText(f"{r.transfer_fraction - before:+.2%} pumped in · "
                           f"{before:.2%} there before the lasers")
        n = r.numerics
        kind = live.stage if live.stage == "quick" or n.converged else "unconverged"
        words = STAGE_WORDS[kind]
        if kind == "coarse":
            words = f"converged to {n.tolerance:g} · refining"
        self.set_stage(words, kind)
        self.detail.setText(stage_text(live) + (" · updating for your latest change…" if pending else ""))
        self._show_dark(r)
        summary = r.beam_summary()
        if len(self.cells) != len(r.setup.beams):
            self._make_cells(len(r.setup.beams))
        for row, b in zip(self.cells, r.setup.beams):
            s = summary[b.name]
            values = (b.name, f"{r.photons_per_atom[b.name]:.3f}",
                      f"{r.deflection[b.name] * 1e3:.4f}", f"{s['peak_intensity_mW_cm2']:.4g}",
                      f"{s['saturation_parameter']:.3g}")
            for w, v in zip(row, values):
                w.setText(v)

    def _show_dark(self, r):
        """The dark fraction of a sublevel-resolved result (docs/sublevel.md, "Results")."""
        self.dark_fraction = None if r.sublevels is None else r.sublevels.dark_fraction
        self.dark.setVisible(r.setup.mode == "sublevel")
        if r.sublevels is None:
            self.dark.set_full_text("Dark sublevels: with the engine result…")
            return
        self.dark.set_full_text(f"Dark sublevels (light hardly excites them; more power will "
                                f"not move them) hold {self.dark_fraction:.2%} of the atoms")

    @staticmethod
    def before_lasers(r):
        """The target's mean population where the integration starts, before any laser
        (the source's own share, e.g. thermal)."""
        return float(r.profile[0, list(r.levels).index(r.setup.target)])

    def _make_cells(self, n_beams):
        for row in self.cells:
            for w in row:
                self.table.removeWidget(w)
                w.deleteLater()
        self.cells = [[_label("", None, Qt.AlignRight if c else Qt.AlignLeft)
                       for c in range(len(COLUMNS))] for _ in range(n_beams)]
        for i, row in enumerate(self.cells, start=1):
            for c, w in enumerate(row):
                self.table.addWidget(w, i, c)

    def set_stage(self, text, kind):
        self.stage.setText(text)
        self.stage.setProperty("stage", kind)
        self.stage.style().polish(self.stage)
