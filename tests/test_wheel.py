"""A built wheel is a working installation: it carries the demo setups and schemes, and
`pumpsim run` runs the bundled demo from it, with no source tree in sight.

The wheel is installed into a fresh virtual environment (no pip, no copy of the source);
the dependencies (numpy, scipy, h5py, matplotlib) are borrowed from the environment
running the tests through a path file, which does not execute that environment's own path
files, so the editable install of the source tree stays invisible."""

import shutil
import subprocess
import sys
import sysconfig
import venv
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    # built from a copy: an in-tree build would leave build/ in the checkout, whose stale
    # modules a later build would carry into its wheel
    src = tmp_path_factory.mktemp("src") / "pumpsim"
    shutil.copytree(ROOT, src, ignore=shutil.ignore_patterns(
        ".git", ".venv", "build", "dist", "*.egg-info", "__pycache__", ".pytest_cache",
        ".hypothesis"))
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run([sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "-w", str(out),
                    str(src)], check=True, capture_output=True)
    (whl,) = out.glob("pumpsim-*.whl")
    return whl


def test_the_wheel_carries_the_demo_setups_and_schemes(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    for f in ("pumpsim/demo_data/demo_setup.toml", "pumpsim/demo_data/rb87_optical_pumping.toml",
              "pumpsim/schemes/veridium.toml", "pumpsim/schemes/rb87.toml"):
        assert f in names
    # every module of the source tree, so that a new subpackage cannot be left out
    modules = {f"pumpsim/{p.relative_to(ROOT / 'pumpsim').as_posix()}"
               for p in (ROOT / "pumpsim").rglob("*.py")}
    modules |= {f"pumpsim_gui/{p.name}" for p in (ROOT / "gui").glob("*.py")}
    assert modules - set(names) == set()


def test_pumpsim_run_works_from_a_fresh_environment_holding_only_the_wheel(wheel, tmp_path):
    env_dir = tmp_path / "env"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    py = env_dir / "bin" / "python"
    site = Path(subprocess.run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                               check=True, capture_output=True, text=True).stdout.strip())
    deps = {sysconfig.get_paths()["purelib"], sysconfig.get_paths()["platlib"]}
    (site / "borrowed_dependencies.pth").write_text("\n".join(sorted(deps)) + "\n")
    subprocess.run([sys.executable, "-m", "pip", "--python", str(py), "install", "-q",
                    "--no-deps", str(wheel)], check=True, capture_output=True)

    where = subprocess.run([str(py), "-c", "import pumpsim; print(pumpsim.__file__)"],
                           check=True, capture_output=True, text=True, cwd=tmp_path).stdout
    assert Path(where.strip()).is_relative_to(env_dir)

    run = subprocess.run([str(env_dir / "bin" / "pumpsim"), "run", "--json"],
                         capture_output=True, text=True, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert '"transfer_fraction"' in run.stdout
