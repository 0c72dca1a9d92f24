"""pumpsim: optical pumping of atomic beams with multilevel rate equations.

>>> import pumpsim
>>> setup = pumpsim.load_setup("demo_data/demo_setup.toml")
>>> result = pumpsim.simulate(setup.with_value("beam.pump.power_mW", 25))
>>> result.transfer_fraction
"""

from importlib.metadata import PackageNotFoundError, version

from .errors import InputError
from .scheme_file import load_scheme
from .setup_file import load_setup, save_setup, setup_to_toml
from .simulate import simulate

try:
    __version__ = version("pumpsim")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = ["InputError", "load_scheme", "load_setup", "save_setup", "setup_to_toml",
           "simulate", "__version__"]
