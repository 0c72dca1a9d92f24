"""The setup panel: one :class:`~pumpsim_gui.field_row.FieldRow` per field of
:data:`pumpsim.schema.FIELDS`, grouped by table (source, each laser beam,
numerics), plus the target level. Nothing here names a field: adding one to
the schema adds its control.
"""

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QGroupBox, QLabel, QScrollArea, QVBoxLayout, QWidget

from pumpsim.lines import line
from pumpsim.safety import cautions
from pumpsim.schema import REQUIRED, Field, fields_of

from .edits import field_key, field_state, shown_fields
from .field_row import FieldRow

PANEL_WIDTH = 350  # narrow enough for a 1280 px screen beside the results; labels wrap
POWER_KEY = "power_mW"  # the beam field under which that beam's laser cautions sit


def target_field(scheme):
    """The target level as a choice field (the schema covers tables, not the top level)."""
    return Field("", "target", "target", "", 1, str, REQUIRED, "target level",
                 choices=scheme.ids)


def beam_cautions(setup, name):
    """The cautions that name beam ``name`` (the general one is shown window-wide)."""
    return [c for c in cautions(setup) if c.startswith(f"{name}: ")]


class SetupPanel(QScrollArea):
    """Scrollable column of grouped controls.

    Signals
    -------
    edited(str, object)
        A control asks for ``key`` to become ``value`` (file units).
    """

    edited = Signal(str, object)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setWidgetResizable(True)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarAlwaysOff)
        self.setMinimumWidth(PANEL_WIDTH)
        self.rows, self.caution_labels, self.structure = {}, {}, None
        self.body = self.ran = None

    def load(self, setup):
        """Show ``setup``; rebuild only if its beams, scheme or source kind changed.

        Every row learns the value in force, even the one whose control made the
        change (it leaves that control as the user has it): a row comparing a new
        entry with a value it remembered wrongly would drop the entry.
        """
        structure = (setup.scheme.path, setup.scheme.ids, setup.source.kind, setup.mode,
                     tuple((b.name, b.lower, b.upper) for b in setup.beams))
        if structure != self.structure:
            self.structure = structure
            self._build(setup)
        else:
            for key, (row, field, beam) in self.rows.items():
                stale = not row.error.isHidden()  # it may still show the refused text
                row.clear_error()
                state = self._state(setup, field, beam)
                if stale or state != (row.value, row.is_set):
                    row.set_value(*state)
        for name, label in self.caution_labels.items():
            text = beam_cautions(setup, name)
            label.setText("⚠ " + "\n⚠ ".join(text) if text else "")
            label.setVisible(bool(text))

    def show_ran(self, numerics):
        """What the engine actually ran for the result on show (sublevel mode may pick
        another integrator than the solver set here)."""
        self.ran.setText(f"Last engine run: {numerics.solver} integrator, {numerics.nodes} "
                         f"atom classes, {numerics.steps} steps, {numerics.seconds:.2g} s")

    def show_error(self, key, message):
        if key in self.rows:
            self.rows[key][0].show_error(message)

    def row(self, key):
        """The control of a ``--set`` key."""
        return self.rows[key][0]

    @staticmethod
    def _state(setup, field, beam):
        if field.key == "target":
            return setup.target, True
        return field_state(setup, field, beam)

    def _build(self, setup):
        self.rows, self.caution_labels = {}, {}
        self.body = QWidget()
        self.body.setObjectName("setupPanel")
        column = QVBoxLayout(self.body)
        column.setContentsMargins(6, 0, 6, 6)
        column.setSpacing(8)
        scheme = setup.scheme
        group = self._group(column, f"Atoms · {scheme.name}")
        labels = {lv.id: f"{lv.id} — {lv.label}" if lv.label else lv.id for lv in scheme.levels}
        self._add(group, setup, target_field(scheme), None, labels)
        for f in shown_fields(setup, fields_of("source")):
            self._add(group, setup, f, None)
        for b in setup.beams:
            nm = line(scheme, b.lower, b.upper).wavelength * 1e9
            group = self._group(column, f"Laser “{b.name}” · {b.lower} → {b.upper} · {nm:.1f} nm")
            for f in shown_fields(setup, fields_of("beam")):
                self._add(group, setup, f, b.name)
                if f.key == POWER_KEY:
                    label = QLabel()
                    label.setObjectName("beamCaution")
                    label.setWordWrap(True)
                    group.addWidget(label)
                    self.caution_labels[b.name] = label
        group = self._group(column, "States · levels or magnetic sublevels")
        for f in shown_fields(setup, fields_of("") + fields_of("field")):
            self._add(group, setup, f, None)
        group = self._group(column, "Numerics")
        for f in fields_of("numerics"):
            self._add(group, setup, f, None)
        self.ran = QLabel("The engine has not run yet.")
        self.ran.setObjectName("hint")
        self.ran.setWordWrap(True)
        group.addWidget(self.ran)
        column.addStretch(1)
        old = self.takeWidget()
        if old is not None:
            old.deleteLater()  # a control of it may be emitting the change that got us here
        self.setWidget(self.body)

    @staticmethod
    def _group(column, title):
        box = QGroupBox(title)
        layout = QVBoxLayout(box)
        layout.setSpacing(2)
        column.addWidget(box)
        return layout

    def _add(self, layout, setup, field, beam, labels=None):
        key = "target" if field.key == "target" else field_key(field, beam)
        row = FieldRow(field, key, *self._state(setup, field, beam), labels=labels)
        row.edited.connect(self.edited)
        layout.addWidget(row)
        self.rows[key] = (row, field, beam)
