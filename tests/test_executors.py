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


def _free_port():
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _start(argv):
    import subprocess
    import sys

    return subprocess.Popen([sys.executable, "-m", *argv], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)


@pytest.mark.parametrize("lost", ["workers", "scheduler"])
def test_dask_losing_its_workers_or_scheduler_ends_plainly_and_resumes(tmp_path, lost):
    # Dask's own scheduler and worker processes, killed as a crash or a batch system would
    distributed = pytest.importorskip("distributed")
    import subprocess
    import sys
    import time

    from pumpsim.scan_journal import journal_path, read_journal

    setup = three_level(tmp_path, width=0.5)
    out = tmp_path / "scan.h5"
    address = f"tcp://127.0.0.1:{_free_port()}"
    port = address.rsplit(":", 1)[1]

    def start_scheduler():
        return _start(["distributed.cli.dask_scheduler", "--host", "127.0.0.1", "--port", port,
                       "--no-dashboard"])

    def start_worker():
        with distributed.Client(address, timeout="60s") as client:
            worker = _start(["distributed.cli.dask_worker", address, "--no-nanny", "--nthreads",
                             "1", "--no-dashboard"])
            client.wait_for_workers(1, timeout=120)
        return worker

    argv = [sys.executable, "-m", "pumpsim.cli", "scan", str(setup.path),
            "--vary", "beam.pump.power_mW=0.001:0.1:8:log", "--vary", "source.speed_m_s=300:600:2",
            "--out", str(out), "--scheduler", address, "--worker-wait", "3"]
    scheduler, worker, proc = start_scheduler(), None, None
    try:
        worker = start_worker()
        proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        deadline = time.monotonic() + 300
        while True:  # until a point is in
            found = read_journal(journal_path(out))
            if found is not None and found[1]:
                break
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "no point finished in 5 minutes"
            time.sleep(0.01)
        victim = worker if lost == "workers" else scheduler
        victim.kill()
        victim.wait()
        stdout, err = proc.communicate(timeout=300)  # it used to wait here for ever
        assert (proc.returncode, stdout) == (1, ""), err
        why = (f"the Dask cluster at {address} has had no workers for 3 s" if lost == "workers"
               else f"lost the connection to the Dask scheduler at {address}")
        assert err.splitlines()[-1].startswith(f"pumpsim: failed: {why}"), err
        assert "Traceback" not in err and "CancelledError" not in err
        k = len(read_journal(journal_path(out))[1])
        assert 1 <= k < 16
        assert f"{k} of 16 points are kept in {journal_path(out)}: the same command with " \
               "--resume continues" in err
        if lost == "scheduler":  # a new cluster at the same address
            worker.kill()
            worker.wait()
            scheduler = start_scheduler()
        worker = start_worker()
        done = subprocess.run(argv + ["--resume"], capture_output=True, text=True, timeout=300)
        assert done.returncode == 0, done.stderr
        assert f"resuming the unfinished scan in {journal_path(out)}: {k} of 16" in done.stderr
        assert out.exists() and not journal_path(out).exists()
    finally:
        for p in (proc, worker, scheduler):
            if p is not None:
                p.kill()
                p.wait()
