"""Command-line contract of size, compare and scan (files.md):
one JSON object on stdout, exit codes 0 / 2, HDF5 layout, figures (common
practice, no source)."""

import json

import h5py
import numpy as np
import pytest

from pumpsim.cli import main
from sizing_fixtures import three_level, two_routes


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_size_json_contract_and_plot(tmp_path, capsys):
    setup = three_level(tmp_path)
    code, out, err = run(capsys, "size", setup.path, "--beam", "pump", "--target-fraction",
                         0.5, "--map", 3, "--waist-range", "0.5:2", "--waist-across-range",
                         "0.5:2", "--workers", 1, "--json", "--plot", tmp_path / "size.png")
    assert code == 0
    d = json.loads(out)
    for key in ("power_mW", "reachable", "ceiling", "branching_limit", "best_waist_mm",
                "best_waist_across_mm", "best_waist_fraction", "cautions"):
        assert key in d
    assert d["reachable"] is True and d["power_mW"] > 0
    assert d["branching_limit"] == pytest.approx(0.6)
    assert d["best_waist_mm"] == pytest.approx(2.0)
    assert d["best_waist_across_mm"] == pytest.approx(0.5)
    assert any("Laser safety" in c for c in d["cautions"])
    assert "CAUTION" in err
    m = d["map"]  # 3 x 3, plus the least power over waists and its waist along
    assert np.array(m["transfer_fraction"]).shape == (len(m["waist_mm"]), len(m["power_mW"]))
    assert len(m["power_mW"]) in (3, 4) and d["joint_power_mW"] == pytest.approx(
        min(m["power_mW"], key=lambda p: abs(p - d["joint_power_mW"])))
    assert (tmp_path / "size.png").read_bytes()[:4] == b"\x89PNG"


def test_size_out_of_reach_exit_0_with_null_power(tmp_path, capsys):
    setup = three_level(tmp_path)
    code, out, _ = run(capsys, "size", setup.path, "--target-fraction", 0.9, "--map", 0,
                       "--waist-range", "1:1", "--waist-across-range", "1:1", "--workers", 1,
                       "--json")
    assert code == 0
    d = json.loads(out)
    assert d["power_mW"] is None and d["reachable"] is False
    assert d["limited_by"] == "branching" and d["reason"]
    code, out, _ = run(capsys, "size", setup.path, "--target-fraction", 0.9, "--map", 0,
                       "--waist-range", "1:1", "--waist-across-range", "1:1", "--workers", 1)
    assert code == 0 and "NOT REACHABLE" in out and "CAUTION" in out


def test_compare_json_contract_and_svg(tmp_path, capsys):
    setup = two_routes(tmp_path)
    code, out, _ = run(capsys, "compare", setup.path, "--beam", "pump", "--target-fraction",
                       0.3, "--workers", 1, "--json", "--plot", tmp_path / "routes.svg")
    assert code == 0
    d = json.loads(out)
    assert [r["upper"] for r in d["routes"]] == ["e2", "e1"]
    for r in d["routes"]:
        for key in ("upper", "wavelength_nm", "sigma0_m2", "branching_target",
                    "branching_other", "power_mW", "ceiling", "photons_per_atom",
                    "deflection_mrad"):
            assert key in r
    assert d["cautions"]
    assert b"<svg" in (tmp_path / "routes.svg").read_bytes()[:400]


def test_scan_hdf5_layout_and_pdf(tmp_path, capsys):
    setup = three_level(tmp_path)
    out_h5 = tmp_path / "grid.h5"
    code, out, _ = run(capsys, "scan", setup.path, "--set", "beam.pump.waist_mm=1.5",
                       "--vary", "beam.pump.power_mW=0.001:0.1:4:log",
                       "--vary", "source.speed_m_s=300:600:3", "--out", out_h5,
                       "--workers", 1, "--json", "--plot", tmp_path / "grid.pdf",
                       "--target-fraction", 0.5)
    assert code == 0
    d = json.loads(out)
    assert d["out"] == str(out_h5) and d["shape"] == [4, 3] and d["cautions"]
    assert not (tmp_path / "grid.h5.partial").exists()
    with h5py.File(out_h5) as f:
        assert f.attrs["complete"] and f.attrs["kind"] == "scan"
        p = f["axes/beam.pump.power_mW"]
        assert p.attrs["units"] == "mW" and p.attrs["spacing"] == "log"
        assert np.allclose(p[:], np.geomspace(0.001, 0.1, 4))
        assert f["axes/source.speed_m_s"].attrs["units"] == "m/s"
        T = f["results/transfer_fraction"]
        assert T.shape == (4, 3) and f["results/done"][:].all()
        assert T.dims[0][0].name == "/axes/beam.pump.power_mW"
        assert list(f["results/final_populations"].attrs["levels"]) == ["g", "m", "e", "other"]
        assert f["inputs/setup_toml"][()].decode() == open(setup.path).read()
        assert "waist_mm = 1.5" in f["inputs/setup_as_run_toml"][()].decode()
        assert list(f["inputs"].attrs["vary"])[1] == "source.speed_m_s=300:600:3"
        # more power, more transfer; slower atoms, more transfer (longer transit)
        assert (np.diff(T[:], axis=0) > 0).all() and (np.diff(T[:], axis=1) < 0).all()
    assert (tmp_path / "grid.pdf").read_bytes()[:4] == b"%PDF"


def test_interrupted_scan_leaves_only_a_partial_file(tmp_path, monkeypatch):
    import pumpsim.scan as scan_mod

    setup = three_level(tmp_path)
    real = scan_mod.evaluate
    calls = []

    def failing(s):
        calls.append(s)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return real(s)

    monkeypatch.setattr(scan_mod, "evaluate", failing)
    axes = scan_mod.parse_axes(["beam.pump.power_mW=0.001:0.1:4"], setup)
    with pytest.raises(KeyboardInterrupt):
        scan_mod.scan(setup, axes, tmp_path / "cut.h5")
    assert not (tmp_path / "cut.h5").exists()
    with h5py.File(tmp_path / "cut.h5.partial") as f:
        assert not f.attrs["complete"] and f["results/done"][:].sum() == 2


@pytest.mark.parametrize("argv,words", [
    (["scan", "{s}", "--vary", "beam.pump.power_mW=1:2", "--out", "{t}/x.h5"], "START:STOP:N"),
    (["scan", "{s}", "--vary", "beam.nope.power_mW=1:2:3", "--out", "{t}/x.h5"], "nope"),
    (["scan", "{s}", "--vary", "source.kind=1:2:2", "--out", "{t}/x.h5"], "numeric"),
    (["scan", "{s}", "--vary", "beam.pump.waist_mm=-1:2:3", "--out", "{t}/x.h5"], "waist_mm"),
    (["scan", "{s}", "--vary", "beam.pump.passes=1:2:3", "--out", "{t}/x.h5"], "whole"),
    (["size", "{s}", "--target-fraction", "1.5"], "between 0 and 1"),
    (["size", "{s}", "--beam", "nope", "--target-fraction", "0.5"], "nope"),
    (["size", "{s}", "--target-fraction", "0.5", "--plot", "{t}/x.gif"], ".png"),
    (["size", "{s}", "--target-fraction", "0.5", "--waist-range", "2"], "MIN:MAX"),
    (["compare", "{s}", "--routes", "m"], "no line"),
    (["size", "{s}", "--target-fraction", "0.5", "--workers", "0"], "--workers"),
])
def test_bad_input_exit_2_names_the_place(tmp_path, capsys, argv, words):
    setup = three_level(tmp_path)
    code, out, err = run(capsys, *(a.format(s=setup.path, t=tmp_path) for a in argv))
    assert code == 2 and out == ""
    assert words in err and "Traceback" not in err


def test_progress_bar_shows_time_left(monkeypatch):
    # stderr-only progress with an estimate of the time remaining (common practice,
    # no source); nothing at all for work shorter than the delay.
    import io

    import pumpsim.progress as progress

    quiet = io.StringIO()
    with progress.Progress("quick", 3, stream=quiet) as bar:
        bar.advance(3)
    assert quiet.getvalue() == ""
    monkeypatch.setattr(progress, "DELAY", 0.0)
    monkeypatch.setattr(progress, "LOG_EVERY", 0.0)
    log = io.StringIO()
    with progress.Progress("scan", 4, stream=log) as bar:
        bar.advance()
        bar.advance()
    lines = log.getvalue().splitlines()
    assert lines[0].startswith("scan: [") and "1/4" in lines[0] and "left" in lines[0]
    assert "2/4" in lines[-2] and "2/2" in lines[-1]  # finished: estimate replaced by count
    assert progress.clock(75) == "1m15s" and progress.clock(4000) == "1h06m"


def test_size_without_waist_search_and_quick_lines(tmp_path, capsys):
    # --no-waist-search: least power at this waist, ceiling and branching limit only;
    # the quick answers reach stderr, the ceiling's power called a limit (common
    # practice, no source).
    setup = three_level(tmp_path)
    code, out, err = run(capsys, "size", setup.path, "--target-fraction", 0.5, "--map", 0,
                         "--no-waist-search", "--workers", 1, "--json")
    assert code == 0
    d = json.loads(out)
    assert d["power_mW"] > 0 and d["joint_power_mW"] is None and d["best_waist_mm"] is None
    assert d["simulations"] <= 15
    assert "branching limit at unlimited power and time: 0.60000" in err
    assert "not a proposed power" in err
