"""Output files: a bad path is refused before any work, a full disk leaves no file that
looks complete and loses no computed number, and two runs never write one file at once.

The outside facts checked against: a full file system makes write(2) fail with ENOSPC,
and a read-only one makes open(2) for writing fail with EROFS (POSIX, the Linux man
pages write(2) and open(2)); an flock(2) lock is released by the kernel when its holder
dies (Linux man page flock(2)).
"""

import errno
import json
import os
import signal
import subprocess
import sys
import time

import pytest

import pumpsim.batch as batch_mod
import pumpsim.commands.run as run_cmd
import pumpsim.outpaths as outpaths
import pumpsim.scan as scan_mod
import pumpsim.scan_journal as scan_journal
from pumpsim.cli import main
from pumpsim.outpaths import lock_path, partial_path
from pumpsim.scan_journal import journal_path, read_journal
from sizing_fixtures import three_level

SMALL = ["--vary", "beam.pump.power_mW=0.001:0.1:3:log", "--vary", "source.speed_m_s=300:600:2"]
# 8 x 2 = 16 points; with a beam 0.5 mm wide each takes ~0.1 s
SLOW = ["--vary", "beam.pump.power_mW=0.001:0.1:8:log", "--vary", "source.speed_m_s=300:600:2"]


def cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def no_work(monkeypatch):
    """Make any simulation fail the test: the command must stop before computing."""
    def fail(*a, **k):
        pytest.fail("a simulation ran before the output path was checked")

    for mod in (run_cmd, scan_mod, batch_mod):
        monkeypatch.setattr(mod, "simulate" if mod is run_cmd else "evaluate", fail)


def mount_tmpfs(path, options):
    """Mount a tmpfs at ``path`` (Linux, root), or skip the test."""
    if sys.platform != "linux" or os.geteuid() != 0:
        pytest.skip("mounting a small file system needs root on Linux")
    path.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", options, "tmpfs", str(path)],
                          capture_output=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.decode().strip()}")


@pytest.fixture
def small_disk(tmp_path):
    """An 8 kB file system: room for the check's probe, not for a result file."""
    disk = tmp_path / "disk"
    mount_tmpfs(disk, "size=8k")
    yield disk
    subprocess.run(["umount", "-l", str(disk)], check=True)


@pytest.fixture
def read_only(tmp_path):
    """A folder no one may write in: a read-only mount as root, else permissions."""
    folder = tmp_path / "ro"
    if sys.platform == "linux" and os.geteuid() == 0:
        mount_tmpfs(folder, "ro,size=16k")
        yield folder
        subprocess.run(["umount", "-l", str(folder)], check=True)
    else:
        folder.mkdir()
        folder.chmod(0o500)
        yield folder
        folder.chmod(0o700)


@pytest.mark.parametrize("where", ["missing folder", "a folder", "file as folder"])
@pytest.mark.parametrize("command", ["run --out", "scan --out", "scan --plot", "size --plot"])
def test_bad_output_paths_are_refused_before_any_work(tmp_path, monkeypatch, capsys,
                                                      command, where):
    setup = three_level(tmp_path)
    (tmp_path / "file").write_text("")
    name, option = command.split()
    ext = ".png" if option == "--plot" else ".h5"
    (tmp_path / f"folder{ext}").mkdir()
    path = {"missing folder": tmp_path / "absent" / f"out{ext}",
            "a folder": tmp_path / f"folder{ext}",
            "file as folder": tmp_path / "file" / f"out{ext}"}[where]
    argv = {"run": ["run", setup.path],
            "scan": ["scan", setup.path, *SMALL, "--out", tmp_path / "s.h5"],
            "size": ["size", setup.path, "--target-fraction", "0.2"]}[name]
    no_work(monkeypatch)
    code, out, err = cli(capsys, *argv, option, path, "--workers", 1) if name != "run" else \
        cli(capsys, *argv, option, path)
    assert (code, out) == (2, ""), err
    assert err.startswith(f"pumpsim: error: {setup.path} [{option}]: ")
    assert str(path) in err and "nothing was computed" in err and "Traceback" not in err


def test_read_only_folder_is_refused_before_any_work(tmp_path, monkeypatch, capsys,
                                                    read_only):
    setup = three_level(tmp_path)
    no_work(monkeypatch)
    out = read_only / "r.h5"
    code, stdout, err = cli(capsys, "run", setup.path, "--out", out)
    assert (code, stdout) == (2, "")
    assert f"[--out]: cannot write in the folder {read_only} of {out}" in err


def test_disk_without_room_is_refused_before_any_work(tmp_path, monkeypatch, capsys,
                                                     small_disk):
    setup = three_level(tmp_path)
    no_work(monkeypatch)
    out = small_disk / "r.h5"
    code, stdout, err = cli(capsys, "run", setup.path, "--out", out)
    assert (code, stdout) == (2, "")
    assert f"[--out]: {out} needs about " in err and "free; nothing was computed" in err


class FullDisk:
    """``os`` as a module sees it when the disk fills: every fsync fails with ENOSPC."""

    def __getattr__(self, name):
        return getattr(os, name)

    @staticmethod
    def fsync(fd):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_failed_write_still_prints_the_result_and_leaves_no_file(tmp_path, monkeypatch,
                                                                 capsys):
    setup = three_level(tmp_path)
    out = tmp_path / "r.h5"
    monkeypatch.setattr(outpaths, "os", FullDisk())
    code, stdout, err = cli(capsys, "run", setup.path, "--out", out, "--json")
    assert code == 1
    result = json.loads(stdout)  # the computed numbers are not lost
    assert 0 < result["transfer_fraction"] < 1
    assert err.splitlines()[-1] == (
        f"pumpsim: failed: could not write the result file {out}: No space left on device; "
        "the result above was computed but not saved, and nothing was left at that path")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scheme.toml", "setup.toml"]


FILL_DISK = """
import sys
import pumpsim.commands.run as run_cmd
import pumpsim.outpaths as outpaths
from pumpsim.cli import main

run_cmd.check_output = lambda *a, **k: None  # let the run reach a disk too small for it
outpaths.shutil.disk_usage = lambda p: type("U", (), {{"free": 1 << 40}})()
sys.exit(main(["run", {setup!r}, "--out", {out!r}]))
"""


def test_disk_that_fills_during_the_write_ends_cleanly(tmp_path, small_disk):
    # in a child process: the HDF5 library crashed the whole process on this once
    setup = three_level(tmp_path, width=0.5)
    out = small_disk / "r.h5"
    script = FILL_DISK.format(setup=str(setup.path), out=str(out))
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 1, done.stderr
    assert "transfer fraction into 'm'" in done.stdout
    assert "No space left on device" in done.stderr and "Traceback" not in done.stderr
    assert list(small_disk.iterdir()) == []


def test_scan_whose_file_cannot_be_written_keeps_its_points(tmp_path, monkeypatch, capsys):
    setup = three_level(tmp_path)
    out = tmp_path / "scan.h5"
    with monkeypatch.context() as m:
        m.setattr(outpaths, "os", FullDisk())  # the journal fits, the file does not
        code, stdout, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out,
                                "--workers", 1)
    assert (code, stdout) == (1, "")
    assert (f"pumpsim: failed: could not write the scan file {out}: No space left on device; "
            f"6 of 6 points are kept in {journal_path(out)}: the same command with --resume "
            "continues") in err
    assert not out.exists() and not partial_path(out).exists()
    assert len(read_journal(journal_path(out))[1]) == 6
    with monkeypatch.context() as m:  # and a journal that the disk cannot take
        m.setattr(scan_journal, "os", FullDisk())
        code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", tmp_path / "j.h5",
                           "--workers", 1)
    assert code == 1 and err.endswith(f"pumpsim: failed: could not write the scan journal "
                                      f"{journal_path(tmp_path / 'j.h5')}: No space left on "
                                      "device\n")
    no_work(monkeypatch)  # with room again, the file is written from the journal alone
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0, err
    assert out.exists() and not journal_path(out).exists()


@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_second_writer_is_refused_and_a_dead_writers_lock_taken_over(tmp_path, capsys):
    setup = three_level(tmp_path, width=0.5)
    out = tmp_path / "scan.h5"
    argv = [sys.executable, "-m", "pumpsim.cli", "scan", str(setup.path), *SLOW,
            "--out", str(out), "--workers", "1"]
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 300
        while True:  # until the first scan has finished a point
            found = read_journal(journal_path(out))
            if found is not None and found[1]:
                break
            assert proc.poll() is None, proc.stderr.read()
            assert time.monotonic() < deadline, "no point finished in 5 minutes"
            time.sleep(0.01)
        for second in (["scan", setup.path, *SLOW, "--out", out, "--workers", 1],
                       ["scan", setup.path, *SLOW, "--out", out, "--workers", 1, "--resume"],
                       ["run", setup.path, "--out", out]):
            code, stdout, err = cli(capsys, *second)
            assert (code, stdout) == (2, ""), err
            assert err.startswith(f"pumpsim: error: {setup.path} [--out]: {out} is being "
                                  f"written by another pumpsim (pid {proc.pid} on ")
            assert f"its command is in {lock_path(out)}" in err
        assert "pumpsim scan" in lock_path(out).read_text()
        assert proc.poll() is None, "the first scan did not run long enough for this test"
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    finally:
        proc.kill()
        proc.wait()
    k = len(read_journal(journal_path(out))[1])
    assert 1 <= k < 16 and lock_path(out).exists()  # the dead writer's lock file stays
    code, _, err = cli(capsys, "scan", setup.path, *SLOW, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0, err
    assert f"{k} of 16 points already done" in err
    assert out.exists() and not lock_path(out).exists() and not journal_path(out).exists()


def test_figure_that_fills_the_disk_leaves_no_file_and_the_scan_stands(tmp_path, monkeypatch,
                                                                     capsys):
    import pumpsim.plots as plots

    setup = three_level(tmp_path)
    out, fig = tmp_path / "scan.h5", tmp_path / "scan.png"

    def save(figure, path):  # half a PNG, then the disk is full
        with open(path, "wb") as fh:
            fh.write(b"\x89PNG\r\n")
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(plots, "_save", save)
    code, stdout, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--plot", fig,
                            "--workers", 1)
    assert code == 1
    assert stdout.startswith(f"wrote {out}: 3 × 2 grid, 6 points")
    assert err.splitlines()[-1] == (f"pumpsim: failed: could not write the figure {fig}: "
                                    "No space left on device")
    assert out.exists() and not fig.exists()
