"""Two strips of text: the message bar (what went wrong, in the window, not
in a pop-up that blocks it) and the laser caution bar (always on show,
since every layout of the window shows a beam power)."""

from PySide6.QtWidgets import QFrame, QHBoxLayout, QLabel, QPushButton

from pumpsim.safety import GENERAL, cautions


class MessageBar(QFrame):
    """A dismissable message; ``kind`` ``"error"`` or ``"info"``."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("messageBar")
        layout = QHBoxLayout(self)
        layout.setContentsMargins(10, 4, 6, 4)
        self.label = QLabel()
        self.label.setWordWrap(True)
        layout.addWidget(self.label, 1)
        close = QPushButton("Dismiss")
        close.clicked.connect(self.hide)
        layout.addWidget(close)
        self.hide()

    def show_message(self, text, kind="error"):
        self.label.setText(text)
        self.setProperty("kind", kind)
        self.style().polish(self)
        self.label.style().polish(self.label)
        self.show()

    @property
    def text(self):
        return self.label.text() if self.isVisible() else ""


class CautionBar(QFrame):
    """The general laser caution; beam-specific ones sit by each power control."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("caution")
        layout = QHBoxLayout(self)
        layout.setContentsMargins(10, 4, 10, 4)
        self.label = QLabel()
        self.label.setWordWrap(True)
        layout.addWidget(self.label, 1)

    def display(self, setup):
        general = [c for c in cautions(setup) if c == GENERAL]
        self.label.setText("⚠ " + " ".join(general) if general else "")
        self.setVisible(bool(general))
