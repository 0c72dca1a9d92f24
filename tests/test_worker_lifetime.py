"""No process outlives a pumpsim that is stopped: killed (SIGKILL), terminated (SIGTERM,
what `kill` and batch systems send) or interrupted (Ctrl-C, which a terminal sends to
every process of the job: POSIX.1, "General Terminal Interface", from memory), and no
worker's traceback reaches the user. Finished points are kept for --resume.
"""

import os
import signal
import subprocess
import sys
import time

import pytest

from pumpsim.scan_journal import journal_path, read_journal
from sizing_fixtures import three_level

# 8 x 4 = 32 points of ~0.1 s each with a beam 0.5 mm wide
VARY = ["--vary", "beam.pump.power_mW=0.001:0.1:8:log", "--vary", "source.speed_m_s=300:600:4"]
GONE_WITHIN = 30.0  # s: a worker checks its parent every 0.5 s; this is slack for a busy CI


def alive(processes, psutil):
    """Those still running (a zombie has ended: only its exit status is left)."""
    out = []
    for p in processes:
        try:
            if p.is_running() and p.status() != psutil.STATUS_ZOMBIE:
                out.append(p)
        except psutil.NoSuchProcess:
            pass
    return out


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")
@pytest.mark.parametrize("how", ["SIGKILL", "SIGTERM", "Ctrl-C"])
def test_no_process_outlives_a_stopped_scan(tmp_path, how):
    psutil = pytest.importorskip("psutil")
    setup = three_level(tmp_path, width=0.5)
    out = tmp_path / "scan.h5"
    argv = [sys.executable, "-m", "pumpsim.cli", "scan", str(setup.path), *VARY,
            "--out", str(out), "--workers", "2"]
    family = []
    with open(tmp_path / "stderr.txt", "wb") as err:  # a file: survivors may hold it open
        proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=err,
                                start_new_session=True)
        try:
            deadline = time.monotonic() + 300
            while True:  # until the pool has finished a point
                found = read_journal(journal_path(out))
                if found is not None and found[1]:
                    break
                assert proc.poll() is None, (tmp_path / "stderr.txt").read_text()
                assert time.monotonic() < deadline, "no point finished in 5 minutes"
                time.sleep(0.01)
            family = psutil.Process(proc.pid).children(recursive=True)
            assert len(family) >= 3  # the pool's server process and two workers at least
            assert proc.poll() is None, "the scan ended before it could be stopped"
            if how == "Ctrl-C":
                os.killpg(proc.pid, signal.SIGINT)
            else:
                proc.send_signal(getattr(signal, how))
            proc.wait(timeout=120)
            deadline = time.monotonic() + GONE_WITHIN
            while alive(family, psutil) and time.monotonic() < deadline:
                time.sleep(0.05)
            left = alive(family, psutil)
            assert not left, [(p.pid, p.cmdline()) for p in left]
        finally:
            proc.kill()
            proc.wait()
            for p in alive(family, psutil):
                p.kill()
    stderr = (tmp_path / "stderr.txt").read_text()
    if how == "SIGKILL":
        assert proc.returncode == -signal.SIGKILL
    else:
        assert proc.returncode == 1, stderr
        assert "Traceback" not in stderr and "KeyboardInterrupt" not in stderr
        last = "pumpsim: terminated (SIGTERM)" if how == "SIGTERM" else "pumpsim: interrupted"
        assert stderr.splitlines()[-1] == last
        assert f"points are kept in {journal_path(out)}: the same command with --resume " \
               "continues" in stderr
    assert read_journal(journal_path(out))[1]  # the finished points are kept


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")
def test_a_worker_killed_from_outside_ends_the_scan_plainly(tmp_path):
    # what the kernel's out-of-memory killer does to the largest process (from memory)
    psutil = pytest.importorskip("psutil")
    setup = three_level(tmp_path, width=0.5)
    out = tmp_path / "scan.h5"
    argv = [sys.executable, "-m", "pumpsim.cli", "scan", str(setup.path), *VARY,
            "--out", str(out), "--workers", "2"]
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 300
        while True:
            found = read_journal(journal_path(out))
            if found is not None and found[1]:
                break
            assert proc.poll() is None
            assert time.monotonic() < deadline, "no point finished in 5 minutes"
            time.sleep(0.01)
        workers = [p for p in psutil.Process(proc.pid).children(recursive=True)
                   if p.ppid() != proc.pid]  # the pool server's children
        assert workers and proc.poll() is None, "the scan ended before a worker was killed"
        workers[0].kill()
        _, stderr = proc.communicate(timeout=120)
    finally:
        proc.kill()
        proc.wait()
    assert proc.returncode == 1
    assert "Traceback" not in stderr
    assert stderr.splitlines()[-1] == ("pumpsim: failed: a worker process died while running "
                                       "a simulation (killed from outside, or out of memory?)")
    assert f"points are kept in {journal_path(out)}" in stderr
