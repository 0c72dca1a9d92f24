"""Desktop window for pumpsim (PySide6 + pyqtgraph), a client of the engine's API.

Installed under the import name ``pumpsim_gui``; the engine never imports it.
Start it with ``pumpsim gui [SETUP]`` or :func:`run`. Modules:

``window``      the main window (owns the setup, wires the rest)
``controls``    the setup panel, generated from ``pumpsim.schema.FIELDS``
``field_row``   one control for one schema field (slider, entry, unit)
``edits``       changing a setup through ``--set`` keys (no Qt)
``worker``      worker threads, request generations, streamed results
``evaluate``    the quick estimate (no Qt)
``engine_process``  ``pumpsim.simulate`` in a child process that can be ended (no Qt)
``studies``     power, power x waist and route sweeps (no Qt)
``plot_view``, ``study_view``  what the tabs share; ``*_view`` one module per tab
``readouts``, ``banners``  the numbers above the tabs, the message and caution bars
``theme``       the light and dark themes
``files``       open, save and export
``app``         start-up and the screenshot mode
"""


def run(setup, screenshot=None, theme="light"):
    """Open the window on ``setup``; see :func:`pumpsim_gui.app.run`."""
    from .app import run as _run

    return _run(setup, screenshot, theme)
