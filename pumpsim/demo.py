"""Where the bundled demo lives (the project's ``demo_data/`` and ``schemes/``)."""

from pathlib import Path

from .errors import InputError

ROOT = Path(__file__).resolve().parent.parent


def demo_setup_path() -> Path:
    """Path of the bundled demo setup."""
    p = ROOT / "demo_data" / "demo_setup.toml"
    if not p.is_file():
        raise InputError("the bundled demo is not here; install pumpsim from its source tree "
                         "with 'pip install -e .'", file=str(p))
    return p
