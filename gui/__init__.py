"""Desktop window for pumpsim (PySide6 + pyqtgraph); a client of the engine's API.

Installed under the import name ``pumpsim_gui``. The window itself is built in its
own issue; this package is a placeholder until then.
"""
