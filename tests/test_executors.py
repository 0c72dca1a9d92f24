"""The same simulations give the same numbers whichever executor runs them
(determinism of the engine: common practice, no source)."""

import numpy as np
import pytest

from pumpsim.batch import Batcher
from pumpsim.executors import DaskExecutor, ProcessExecutor, SerialExecutor
from pumpsim.scan import parse_axes, scan
from pumpsim.sizing import least_power_search
from sizing_fixtures import three_level


def run_all(setup, executor, out):
    axes = parse_axes(["beam.pump.power_mW=0.002:0.05:3:log", "beam.pump.waist_mm=0.5:2:2"],
                      setup)
    grid = scan(setup, axes, out, executor).fraction
    (s,) = Batcher(executor).drive([least_power_search(setup, "pump", 0.5)])
    return grid, s.power, s.outcome.transfer_fraction, s.history


def test_serial_process_pool_and_dask_agree(tmp_path):
    distributed = pytest.importorskip("distributed")
    setup = three_level(tmp_path)
    with SerialExecutor() as ex:
        ref = run_all(setup, ex, tmp_path / "serial.h5")
    with ProcessExecutor(2) as ex:
        pool = run_all(setup, ex, tmp_path / "pool.h5")
    # a local cluster on loopback only, threads in this process, reached over TCP
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  protocol="tcp", host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        with DaskExecutor(cluster.scheduler_address) as ex:
            assert ex.workers == 2
            dask = run_all(setup, ex, tmp_path / "dask.h5")
    for other in (pool, dask):
        assert np.array_equal(ref[0], other[0])
        assert ref[1:] == other[1:]


POOL_AFTER_THREADS = """
import pumpsim
from pumpsim.executors import ProcessExecutor
from pumpsim.scan import parse_axes, scan

if __name__ == "__main__":
    setup = pumpsim.load_setup({setup!r}).with_value("numerics.tolerance", 1e-2)
    for _ in range(3):
        pumpsim.simulate(setup)  # BLAS's threads are running in this process now
    axes = parse_axes(["beam.pump.power_mW=1:100:6:log"], setup)
    with ProcessExecutor(2) as ex:
        print(scan(setup, axes, {out!r}, ex).fraction.tolist())
"""


def test_process_pool_after_threads_does_not_hang(tmp_path):
    # A pool forked from a process whose threads hold locks deadlocks (POSIX fork
    # copies only the calling thread; Python docs, multiprocessing "Contexts and start
    # methods"). BLAS starts threads, and so does the window: the pool must start its
    # workers another way.
    import subprocess
    import sys

    from pumpsim.demo import demo_setup_path

    script = tmp_path / "pool_after_threads.py"
    script.write_text(POOL_AFTER_THREADS.format(setup=str(demo_setup_path()),
                                                out=str(tmp_path / "scan.h5")))
    run = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                         timeout=120)
    assert run.returncode == 0, run.stderr
    assert len(eval(run.stdout)) == 6
