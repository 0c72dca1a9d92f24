"""Long scans keep their work: a scan killed at any instant leaves no file that
reads as complete, and ``--resume`` finishes it into the same numbers as a scan
that ran straight through (the engine is deterministic: common practice, no
source; HDF5 files are not crash-safe while h5py writes them: h5py/HDF5
documentation on SWMR and file consistency, from memory, hence the journal)."""

import json
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest

import pumpsim.scan as scan_mod
from pumpsim.cli import main
from pumpsim.executors import ProcessExecutor
from pumpsim.scan import parse_axes, partial_path
from pumpsim.scan_journal import journal_path, read_journal
from sizing_fixtures import three_level

# 8 x 2 = 16 points; with a beam 0.5 mm wide each takes ~0.1 s, the others ~0.02 s
VARY = ["--vary", "beam.pump.power_mW=0.001:0.1:8:log", "--vary", "source.speed_m_s=300:600:2"]
SMALL = ["--vary", "beam.pump.power_mW=0.001:0.1:3:log", "--vary", "source.speed_m_s=300:600:2"]
TIMING = {"seconds"}  # the only results dataset that may differ (wall times)


def cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_same_scan(path, ref):
    """Every results, axes and inputs dataset equal (exactly) to the reference file."""
    with h5py.File(path) as f, h5py.File(ref) as g:
        assert f.attrs["complete"] and g.attrs["complete"]
        for key in ("kind", "pumpsim_version", "shape", "axes"):
            np.testing.assert_array_equal(f.attrs[key], g.attrs[key])
        names = []
        g.visititems(lambda name, obj: names.append(name) if isinstance(obj, h5py.Dataset)
                     else None)
        assert len(names) > 10
        for name in names:
            if name.split("/")[-1] in TIMING:
                continue
            np.testing.assert_array_equal(f[name][()], g[name][()], err_msg=name)
            assert dict(f[name].attrs).keys() == dict(g[name].attrs).keys()
        assert f["results/done"][()].all()


def interrupt_after(monkeypatch, n):
    """Make the scan's n+1-th simulation raise KeyboardInterrupt (in this process)."""
    real, calls = scan_mod.evaluate, []

    def evaluate(s):
        calls.append(s)
        if len(calls) > n:
            raise KeyboardInterrupt
        return real(s)

    monkeypatch.setattr(scan_mod, "evaluate", evaluate)


def interrupted_scan(monkeypatch, setup, out, done):
    """A scan stopped after ``done`` points, through the library (serial)."""
    texts = [v for v in SMALL if v != "--vary"]
    with monkeypatch.context() as m:
        interrupt_after(m, done)
        with pytest.raises(KeyboardInterrupt):
            scan_mod.scan(setup, parse_axes(texts, setup), out)
    assert not out.exists()
    assert len(read_journal(journal_path(out))[1]) == done


@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_killed_scan_resumes_to_the_uninterrupted_file(tmp_path, capsys):
    setup = three_level(tmp_path, width=0.5)
    out, ref = tmp_path / "killed.h5", tmp_path / "straight.h5"
    argv = [sys.executable, "-m", "pumpsim.cli", "scan", str(setup.path), *VARY,
            "--out", str(out), "--workers", "1"]
    with open(tmp_path / "stderr.txt", "wb") as err:
        proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=err)
        try:
            deadline = time.monotonic() + 600
            while True:  # poll the journal until two points are in it
                found = read_journal(journal_path(out))
                if found is not None and len(found[1]) >= 2:
                    break
                assert proc.poll() is None, (tmp_path / "stderr.txt").read_text()
                assert time.monotonic() < deadline, "no point finished in 10 minutes"
                time.sleep(0.01)
            proc.send_signal(signal.SIGKILL)
        finally:
            proc.kill()
            proc.wait()
    assert proc.returncode == -signal.SIGKILL, "the scan finished before it was killed"
    assert not out.exists()
    assert not partial_path(out).exists()  # a kill leaves the journal only
    header, records, rejected = read_journal(journal_path(out))
    k = len(records)
    assert 2 <= k < 16 and header["axes"][0]["key"] == "beam.pump.power_mW"
    assert rejected == 0  # a line cut by the kill is no record, and no rejected one either

    code, _, err = cli(capsys, "scan", setup.path, *VARY, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0, err
    assert f"resuming the unfinished scan in {journal_path(out)}: {k} of 16 points" in err
    assert not journal_path(out).exists() and not partial_path(out).exists()
    code, _, err = cli(capsys, "scan", setup.path, *VARY, "--out", ref, "--workers", 1)
    assert code == 0, err
    assert_same_scan(out, ref)
    with h5py.File(out) as f:
        assert f.attrs["points_resumed"] == k
        seconds = f["results/seconds"][()].ravel()
    # the points done before the kill were not run again: their wall times are the journal's
    np.testing.assert_array_equal(seconds[[r["i"] for r in records]],
                                  [r["seconds"] for r in records])


@pytest.mark.parametrize("change, words", [
    (["--vary", "beam.pump.power_mW=0.001:0.1:4:log", "--vary", "source.speed_m_s=300:600:2"],
     "other --vary axes"),
    (SMALL + ["--set", "beam.pump.waist_mm=2"], "another setup"),
])
def test_resume_with_other_inputs_is_refused(tmp_path, monkeypatch, capsys, change, words):
    setup = three_level(tmp_path)
    out = tmp_path / "scan.h5"
    interrupted_scan(monkeypatch, setup, out, 2)
    before = journal_path(out).read_bytes()
    code, stdout, err = cli(capsys, "scan", setup.path, *change, "--out", out, "--workers", 1,
                            "--resume")
    assert (code, stdout) == (2, "")
    assert err.startswith(f"pumpsim: error: {out} [--resume]: the unfinished scan in "
                          f"{journal_path(out)}") and words in err
    assert journal_path(out).read_bytes() == before and not out.exists()


def test_torn_last_record_is_ignored_and_pool_resumes(tmp_path, monkeypatch, capsys):
    setup = three_level(tmp_path)
    out, ref = tmp_path / "torn.h5", tmp_path / "straight.h5"
    interrupted_scan(monkeypatch, setup, out, 3)
    journal = journal_path(out)
    lines = journal.read_bytes().splitlines(keepends=True)
    whole = journal.read_bytes()
    record = json.loads(lines[-1])
    record["i"] = 5  # a point not done, cut short as a kill mid-write would leave it
    torn = json.dumps(record).encode()[:-7]
    journal.write_bytes(whole + torn)
    header, records, rejected = read_journal(journal)
    assert len(records) == 3 and rejected == 0
    # a newline-ended line that is not a record of this grid is rejected; later ones count
    journal.write_bytes(whole + b'{"i": 99}\n' + lines[-1])
    assert read_journal(journal)[1:] == (records, 1)
    journal.write_bytes(whole + torn)

    with ProcessExecutor(2) as ex:  # the resume runs in a process pool
        result = scan_mod.scan(setup, parse_axes([v for v in SMALL if v != "--vary"], setup),
                               out, ex, resume=True, note=print)
    assert result.resumed == 3
    assert "3 of 6 points already done" in capsys.readouterr().out
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", ref, "--workers", 1)
    assert code == 0, err
    assert_same_scan(out, ref)


def test_resume_without_journal_runs_and_a_new_run_replaces_one(tmp_path, monkeypatch,
                                                                 capsys):
    setup = three_level(tmp_path)
    out = tmp_path / "scan.h5"
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0 and "nothing to resume" in err and "starting from the first point" in err
    assert out.exists() and not journal_path(out).exists()
    with h5py.File(out) as f:
        assert f.attrs["points_resumed"] == 0
    out2 = tmp_path / "again.h5"
    interrupted_scan(monkeypatch, setup, out2, 2)
    with h5py.File(partial_path(out2)) as f:  # the snapshot of a stopped (not killed) scan
        assert not f.attrs["complete"] and f["results/done"][()].sum() == 2
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out2, "--workers", 1)
    assert code == 0 and f"replacing the unfinished scan in {journal_path(out2)}" in err
    assert_same_scan(out2, out)
    with h5py.File(out2) as f:
        assert f.attrs["points_resumed"] == 0


def test_edited_or_non_finite_records_are_computed_again(tmp_path, monkeypatch, capsys):
    # a population must be a finite number in [0, 1], the populations sum to 1 and the
    # transfer fraction is the target's population (definitions, no source needed)
    setup = three_level(tmp_path)
    out, ref = tmp_path / "edited.h5", tmp_path / "straight.h5"
    interrupted_scan(monkeypatch, setup, out, 4)
    journal = journal_path(out)
    header, *lines = journal.read_text().splitlines()
    edits = [json.loads(line) for line in lines]
    edits[0]["transfer_fraction"] = 7.5
    edits[1]["final_populations"][0] = float("nan")
    edits[2]["at"] = [0.1, 300.0]  # the values of another grid point
    edits[3]["final_populations"][2] += 0.25  # no longer sums to 1
    journal.write_text("\n".join([header] + [json.dumps(e) for e in edits]) + "\n")
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0, err
    assert "0 of 6 points already done" in err
    assert f"4 lines of {journal} are not a whole, physical result of its grid point" in err
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", ref, "--workers", 1)
    assert code == 0, err
    assert_same_scan(out, ref)


def test_journal_header_with_a_huge_grid_is_refused_without_allocating(tmp_path, monkeypatch,
                                                                      capsys):
    setup = three_level(tmp_path)
    out = tmp_path / "scan.h5"
    interrupted_scan(monkeypatch, setup, out, 2)
    journal = journal_path(out)
    header, *lines = journal.read_text().splitlines()
    h = json.loads(header)
    h["axes"] = [{"key": f"k{d}", "values": list(range(4000)), "spacing": "linear",
                  "text": f"k{d}=0:3999:4000"} for d in range(3)]
    journal.write_text("\n".join([json.dumps(h)] + lines) + "\n")
    code, stdout, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                            "--resume")
    assert (code, stdout) == (2, "")
    assert "has other --vary axes (k0=0:3999:4000 k1=0:3999:4000 k2=0:3999:4000)" in err


def test_grid_too_large_for_memory_is_refused_with_the_figure(tmp_path, capsys):
    setup = three_level(tmp_path)
    vary = [f"source.speed_m_s=300:600:{n}" for n in (4000,)] + [
        "beam.pump.power_mW=0.001:0.1:4000", "beam.pump.waist_mm=0.5:2:4000"]
    code, stdout, err = cli(capsys, "scan", setup.path, *[x for v in vary for x in ("--vary", v)],
                            "--out", tmp_path / "huge.h5")
    assert (code, stdout) == (2, "")
    assert err.startswith(f"pumpsim: error: {setup.path} [--vary]: a grid of 6.4e+10 points "
                          "needs about ")  # 4000^3
    assert "of memory, more than the" in err and "Traceback" not in err


def test_set_value_and_the_same_value_in_the_file_resume_alike(tmp_path, monkeypatch, capsys):
    # `--set beam.pump.waist_mm=1` and `waist_mm = 1.0` in the file are the same number
    # (TOML 1.0: an integer and a float of equal value; common practice, no source)
    setup = three_level(tmp_path, waist=1.0)
    out = tmp_path / "scan.h5"
    interrupted_scan(monkeypatch, setup.with_value("beam.pump.waist_mm", "1"), out, 2)
    code, _, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                       "--resume")
    assert code == 0, err
    assert "2 of 6 points already done" in err


@pytest.mark.parametrize("kind", ["another layout", "a device"])
def test_unreadable_journal_is_not_overwritten_by_resume(tmp_path, capsys, kind):
    setup = three_level(tmp_path)
    out = tmp_path / "scan.h5"
    if kind == "another layout":
        journal_path(out).write_text('{"pumpsim_scan_journal": 1}\n{"i": 0}\n')
    elif sys.platform == "win32":
        pytest.skip("no /dev/zero")
    else:  # endless bytes, no newline: reading it whole never ends
        journal_path(out).symlink_to("/dev/zero")
    before = journal_path(out).read_bytes() if kind == "another layout" else None
    code, stdout, err = cli(capsys, "scan", setup.path, *SMALL, "--out", out, "--workers", 1,
                            "--resume")
    assert (code, stdout) == (2, "")
    assert err.startswith(f"pumpsim: error: {out} [--resume]: {journal_path(out)} is not a "
                          "scan journal this pumpsim can read")
    assert not out.exists()
    if before is not None:
        assert journal_path(out).read_bytes() == before
