"""``pumpsim gui [SETUP]``: the desktop window (needs the ``gui`` extra).

The window lives in the separate package ``pumpsim_gui``; it is imported
here only when the command runs, so the engine never imports Qt.
"""

import importlib.util
import os
import sys

from ..demo import demo_setup_path
from ..setup_file import load_setup

NEEDS = ("PySide6", "pyqtgraph", "pumpsim_gui")


def add_parser(sub):
    p = sub.add_parser("gui", help="open the desktop window (the bundled demo if no setup is given)",
                       description="Open the desktop window on a setup: live sliders, results "
                                   "streamed as they are computed, power and route studies.")
    p.add_argument("setup", nargs="?", help="setup TOML file (default: the bundled demo)")
    p.add_argument("--screenshot", metavar="FILE.png",
                   help="render the window offscreen after the first converged result, save it "
                        "as FILE.png and exit")
    p.add_argument("--theme", choices=("light", "dark"), default="light",
                   help="colour theme (default: light)")
    p.set_defaults(handler=handle)


def handle(args):
    missing = [m for m in NEEDS if importlib.util.find_spec(m) is None]
    if missing:
        print(f"pumpsim: error: the window needs {', '.join(missing)}; install them with "
              "pip install 'pumpsim[gui]'", file=sys.stderr)
        return 1
    setup = load_setup(args.setup or demo_setup_path())
    if args.screenshot:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    import pumpsim_gui

    return pumpsim_gui.run(setup, screenshot=args.screenshot, theme=args.theme)
