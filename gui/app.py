"""Starting the window, and the offscreen screenshot mode."""

import sys

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication

from .window import MainWindow

WINDOW_SIZE = (1480, 940)
SCREENSHOT_SETTLE_MS = 300  # let the last repaint land before grabbing
SCREENSHOT_TIMEOUT_S = 900  # give up if the engine has not answered by then


def application():
    """The running QApplication, created if needed."""
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("pumpsim")
    return app


def fit_screen(window, app):
    """No larger than the screen's free area (a 1280 x 720 laptop screen works: the
    setup panel and the tabs scroll)."""
    screen = app.primaryScreen()
    if screen is not None:
        free = screen.availableGeometry()
        window.resize(min(window.width(), free.width()), min(window.height(), free.height()))


def run(setup, screenshot=None, theme="light"):
    """Open the window on ``setup`` and run until it closes.

    Parameters
    ----------
    setup : Setup
    screenshot : str, optional
        Instead of waiting for the user: save the window as this PNG once the
        first converged result is on screen, then quit.
    theme : str
        ``"light"`` or ``"dark"``.

    Returns
    -------
    int
        Exit code: 0, or 1 if the screenshot could not be made.
    """
    app = application()
    window = MainWindow(setup, theme)
    window.resize(*WINDOW_SIZE)
    if screenshot is None:
        fit_screen(window, app)
        window.show()
        return app.exec()
    window.show()
    outcome = {"code": 1}

    def shoot():
        ok = window.grab().save(str(screenshot))
        if ok:
            outcome["code"] = 0
        else:
            print(f"pumpsim: error: could not write {screenshot}", file=sys.stderr)
        window.close()

    def on_display(update):
        if update.stage == "engine" and update.generation == window.live.generation:
            window.displayed.disconnect(on_display)
            QTimer.singleShot(SCREENSHOT_SETTLE_MS, shoot)

    def on_failure(_gen, text):
        print(f"pumpsim: failed: {text}", file=sys.stderr)
        window.close()

    def on_timeout():
        print(f"pumpsim: failed: no converged result within {SCREENSHOT_TIMEOUT_S} s",
              file=sys.stderr)
        window.close()

    window.displayed.connect(on_display)
    window.live.failed.connect(on_failure)
    QTimer.singleShot(SCREENSHOT_TIMEOUT_S * 1000, on_timeout)
    app.exec()
    return outcome["code"]
