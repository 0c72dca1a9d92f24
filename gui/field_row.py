"""One control for one setup field, built from its :class:`pumpsim.schema.Field`.

A number field gets an exact entry with its unit and, when the schema gives
it a slider span, a slider (logarithmic if the schema says so). A text
field with choices gets a drop-down list. The row never changes the setup
itself: it emits ``edited(key, value)`` with the ``--set`` key and a
file-unit value, and the window decides.
"""

import math
import tomllib

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QComboBox, QGridLayout, QLabel, QLineEdit, QSlider, QWidget)

from pumpsim.schema import SIMPLE

SLIDER_STEPS = 1000
LOG_DIGITS = 3  # a log slider proposes values with 3 significant digits


def format_value(field, value):
    """A file-unit value as text for an entry."""
    if value is None:
        return ""
    if field.kind is int:
        return str(int(value))
    if field.kind is str:
        return value
    if isinstance(value, list):  # a compound value such as reference_F = [F, F']
        return "[" + ", ".join(f"{x:g}" for x in value) + "]"
    if isinstance(value, dict):  # an inline table such as polarization = { linear_deg = 30 }
        return "{ " + ", ".join(f"{k} = {x:g}" for k, x in value.items()) + " }"
    return f"{value:.6g}"


class SliderScale:
    """Maps slider positions to file-unit values and back.

    Parameters
    ----------
    field : Field
        Must have a ``span``.
    value : float or None
        The current value; the range widens to include it.
    """

    def __init__(self, field, value):
        lo, hi = field.span
        if value is not None and (value > 0 or not field.log):
            lo, hi = min(lo, value), max(hi, value)
        self.field, self.lo, self.hi = field, lo, hi
        self.integer = field.kind is int
        self.positions = (int(lo), int(hi)) if self.integer else (0, SLIDER_STEPS)

    def to_position(self, value):
        if value is None:
            return self.positions[0]
        if self.integer:
            return int(round(value))
        if self.field.log:
            if value <= 0:
                return 0
            t = math.log(value / self.lo) / math.log(self.hi / self.lo)
        else:
            t = (value - self.lo) / (self.hi - self.lo)
        return int(round(min(max(t, 0.0), 1.0) * SLIDER_STEPS))

    def to_value(self, position):
        """The value a position stands for, rounded so files stay readable."""
        if self.integer:
            return int(position)
        t = position / SLIDER_STEPS
        if self.field.log:
            return float(f"{self.lo * (self.hi / self.lo) ** t:.{LOG_DIGITS}g}")
        step = (self.hi - self.lo) / SLIDER_STEPS
        return float(f"{round((self.lo + t * (self.hi - self.lo)) / step) * step:.6g}")


class FieldRow(QWidget):
    """Label, entry (or choice) with unit, optional slider, and an error line.

    Parameters
    ----------
    field : Field
    key : str
        The ``--set`` key, e.g. ``"beam.pump.power_mW"``.
    value : object
        Effective file-unit value (the default when the file omits it).
    is_set : bool
        Whether the file gives the value; an optional field left unset shows
        its effective value greyed, and clearing the entry unsets it.
    labels : dict, optional
        Text shown for each choice.

    Signals
    -------
    edited(str, object)
        Key and the new file-unit value (``None``: remove the key).
    """

    edited = Signal(str, object)

    def __init__(self, field, key, value, is_set=True, labels=None, parent=None):
        super().__init__(parent)
        self.field, self.key = field, key
        self.slider = self.entry = self.choice = None
        grid = QGridLayout(self)
        grid.setContentsMargins(0, 2, 0, 2)
        grid.setHorizontalSpacing(6)
        grid.setVerticalSpacing(1)
        label = QLabel(field.label[0].upper() + field.label[1:])
        label.setObjectName("fieldLabel")
        label.setWordWrap(True)  # a long label wraps rather than widening the panel
        label.setToolTip(f"{key}" + (f"  [{field.unit}]" if field.unit else ""))
        grid.addWidget(label, 0, 0)
        if field.choices:
            self.choice = QComboBox()
            for c in field.choices:
                self.choice.addItem((labels or {}).get(c, c), c)
            self.choice.activated.connect(self._choice_made)
            grid.addWidget(self.choice, 0, 1, 1, 2)
        else:
            self.entry = QLineEdit()
            self.entry.setAlignment(Qt.AlignRight)
            self.entry.setMaximumWidth(96)
            self.entry.editingFinished.connect(self._typed)
            grid.addWidget(self.entry, 0, 1)
            unit = QLabel(field.unit or "(number)")
            unit.setObjectName("unit")
            unit.setMinimumWidth(44)
            grid.addWidget(unit, 0, 2)
        if field.span and not field.choices:
            self.slider = QSlider(Qt.Horizontal)
            self.slider.valueChanged.connect(self._slid)
            grid.addWidget(self.slider, 1, 0, 1, 3)
        self.error = QLabel()
        self.error.setObjectName("fieldError")
        self.error.setWordWrap(True)
        self.error.hide()
        grid.addWidget(self.error, 2, 0, 1, 3)
        grid.setColumnStretch(0, 1)
        self.scale = None
        self._changing = None  # "slider", "entry" or "choice" while its change is handled
        self.set_value(value, is_set)

    def set_value(self, value, is_set=True):
        """Show ``value`` without emitting ``edited``; it becomes the value the row
        compares new entries with. A slider being dragged is left where the user
        holds it; an entry just typed in shows the value as it is now written."""
        self.value, self.is_set = value, is_set
        if self.choice is not None and self._changing != "choice":
            self._show_choice(value)
        if self.entry is not None:
            text = format_value(self.field, value)
            if self._changing != "slider":  # a drag has already written the entry
                self.entry.setText(text if is_set else "")
            # the default greyed, whole: "(default)" would not fit beside a long number
            self.entry.setPlaceholderText("" if is_set else text)
            self.entry.setToolTip("" if is_set else f"Default {text}: not in the file; "
                                                    "type a value to set it")
        if self.slider is not None and self._changing != "slider":
            self.scale = SliderScale(self.field, value)
            self.slider.blockSignals(True)
            self.slider.setRange(*self.scale.positions)
            self.slider.setValue(self.scale.to_position(value))
            self.slider.blockSignals(False)

    def _emit(self, control, value):
        """Ask for ``value``; while the window answers (it calls :meth:`set_value`
        back if it takes it), ``control`` is the one the user is working."""
        self._changing = control
        try:
            self.edited.emit(self.key, value)
        finally:
            self._changing = None

    def _show_choice(self, value):
        """Select ``value``; a value outside the list (``{ linear_deg = 30 }``) is shown
        as an entry of its own, kept only while it is the value."""
        listed = len(self.field.choices)
        while self.choice.count() > listed:
            self.choice.removeItem(listed)
        index = self.choice.findData(value) if isinstance(value, str) else -1
        if index < 0 and isinstance(value, dict):
            self.choice.addItem(format_value(self.field, value), value)
            index = listed
        self.choice.setCurrentIndex(max(index, 0))

    def show_error(self, message):
        self.error.setText(message)
        self.error.show()
        if self.entry is not None:
            self.entry.setProperty("invalid", True)
            self.entry.style().polish(self.entry)

    def clear_error(self):
        if self.error.isHidden():
            return
        self.error.hide()
        if self.entry is not None and self.entry.property("invalid"):
            self.entry.setProperty("invalid", False)
            self.entry.style().polish(self.entry)

    def move_slider(self, position):
        """Move the slider as a user would (emits ``edited``)."""
        self.slider.setValue(position)

    def _slid(self, position):
        value = self.scale.to_value(position)
        if self.entry is not None:
            self.entry.setText(format_value(self.field, value))
        self._emit("slider", value)

    def _typed(self):
        text = self.entry.text().strip()
        if text == format_value(self.field, self.value) and self.is_set:
            self.clear_error()  # back to the value in force: nothing to apply
            return
        if not text:
            if self.is_set:
                self._emit("entry", None)
            return
        if self.field.kind not in SIMPLE:  # compound: typed as its TOML value, e.g. [2, 3]
            try:
                value = tomllib.loads(f"value = {text}")["value"]
            except tomllib.TOMLDecodeError:
                self.show_error(f"'{text}' is not a value such as [2, 3]; nothing was changed.")
                return
            self._emit("entry", value)
            return
        try:
            number = float(text.replace("−", "-"))
        except ValueError:
            self.show_error(f"'{text}' is not a number; nothing was changed.")
            return
        if self.field.kind is int and number.is_integer():
            number = int(number)
        self._emit("entry", number)

    def _choice_made(self, index):
        value = self.choice.itemData(index)
        if value != self.value:
            self._emit("choice", value)
        if index < len(self.field.choices):  # a listed value replaces an unlisted one
            while self.choice.count() > len(self.field.choices):
                self.choice.removeItem(len(self.field.choices))
