"""Where the bundled demo lives: ``demo_data/`` and ``schemes/``, installed as package
data (``pumpsim.demo_data``, ``pumpsim.schemes``) so that a wheel carries them."""

from importlib import resources
from pathlib import Path

from .errors import InputError


def demo_setup_path() -> Path:
    """Path of the bundled demo setup."""
    p = Path(str(resources.files("pumpsim.demo_data") / "demo_setup.toml"))
    if not p.is_file():
        raise InputError("the bundled demo is missing from this installation; reinstall "
                         "pumpsim", file=str(p))
    return p
