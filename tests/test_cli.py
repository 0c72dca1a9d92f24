"""The command-line contract of files.md: subcommands, ``--json`` keys, ``--set``,
``--out`` HDF5 contents, exit codes 0 / 2 / 1 and error messages naming file, table and
key. The numbers in the JSON are checked against the formulas of model.md (sources beside
each) and against the Python API on the same setup.
"""

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest
from scipy import constants as C

import pumpsim
from pumpsim.cli import main
from builders import beam, decay, level, scheme_doc, setup_doc, write_case, write_toml

RUN_KEYS = {"target", "transfer_fraction", "final_populations", "photons_per_atom",
            "deflection_mrad"}  # files.md, `pumpsim run --json`
DECAY_KEYS = {"lower", "upper", "wavelength_nm", "A_per_s", "sigma0_m2", "isat_mW_cm2"}


def small_scheme():
    return scheme_doc(
        [level("g", 0, 0), level("m", 1000, 1), level("e", 20000, 1, 2e-8), level("x", 17000, 2)],
        [decay("e", "g", branching=0.6), decay("e", "m", branching=0.35),  # 5 % to other
         decay("x", "m", A_per_s=3e7)])


def small_setup(**numerics):
    return setup_doc("m", {"kind": "monoenergetic", "speed_m_s": 400.0, "initial": {"g": 1.0}},
                     [beam("pump", "g", "e", 2.0, 1.0, angle_deg=80.0, detuning_MHz=140.0),
                      beam("probe", "m", "x", 0.5, 0.5, position_mm=4.0, passes=2)],
                     numerics=numerics or {"tolerance": 1e-3})


@pytest.fixture
def setup_path(tmp_path):
    return write_case(tmp_path, small_scheme(), small_setup())


def run_cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_names(err, *parts):
    """An error message on stderr that names each part (file, table, key, level)."""
    assert "Traceback" not in err
    for p in parts:
        assert str(p) in err, (p, err)


# -- run ------------------------------------------------------------------------------

def test_run_json_keys_and_values(capsys, setup_path):
    code, out, err = run_cli(capsys, "run", setup_path, "--json")
    assert code == 0
    data = json.loads(out)  # stdout holds one JSON object and nothing else
    assert RUN_KEYS <= set(data)
    assert data["target"] == "m"
    assert set(data["final_populations"]) == {"g", "m", "e", "x", "other"}
    assert set(data["photons_per_atom"]) == {"pump", "probe"}
    assert set(data["deflection_mrad"]) == {"pump", "probe"}
    assert data["transfer_fraction"] == data["final_populations"]["m"]
    assert sum(data["final_populations"].values()) == pytest.approx(1, abs=1e-10)
    # the same numbers as the Python API on the same setup (deflection in mrad)
    result = pumpsim.simulate(pumpsim.load_setup(setup_path))
    assert data["transfer_fraction"] == pytest.approx(result.transfer_fraction, abs=1e-15)
    for name, rad in result.deflection.items():
        assert data["deflection_mrad"][name] == pytest.approx(1e3 * rad, rel=1e-12)
        assert data["photons_per_atom"][name] == pytest.approx(result.photons_per_atom[name],
                                                               rel=1e-12)
    # cautions for the powers shown go to stderr when stdout carries JSON
    assert "laser-safety" in err


def test_run_readable_summary_shows_cautions(capsys, setup_path):
    code, out, err = run_cli(capsys, "run", setup_path)
    assert code == 0
    assert "transfer fraction" in out and "pump" in out and "probe" in out
    assert "CAUTION" in out and "laser-safety" in out


def test_run_set_overrides_like_with_value(capsys, setup_path):
    code, out, _ = run_cli(capsys, "run", setup_path, "--json",
                           "--set", "beam.pump.power_mW=0.25", "--set", "source.speed_m_s=250")
    assert code == 0
    data = json.loads(out)
    setup = pumpsim.load_setup(setup_path).with_value("beam.pump.power_mW", 0.25) \
        .with_value("source.speed_m_s", 250.0)
    result = pumpsim.simulate(setup)
    assert data["transfer_fraction"] == pytest.approx(result.transfer_fraction, abs=1e-15)
    assert data["beams"]["pump"]["power_mW"] == pytest.approx(0.25)  # the override was used


@pytest.mark.parametrize("item, table, key", [
    ("beam.pump.power_mW=-1", "beam 'pump'", "power_mW"),
    ("beam.pump.waist_mm=0", "beam 'pump'", "waist_mm"),
    ("source.temperature_K=hot", "source", "temperature_K"),
    ("source.colour=3", "source", "colour"),
    ("beam.nosuch.power_mW=3", "beam", "beam.nosuch.power_mW"),
    ("numerics.tolerance=2", "numerics", "tolerance"),
])
def test_run_bad_set_is_exit_2_naming_file_table_key(capsys, setup_path, item, table, key):
    code, out, err = run_cli(capsys, "run", setup_path, "--set", item)
    assert code == 2 and out == ""
    assert_names(err, setup_path, table, key)


def test_run_set_without_equals_is_exit_2(capsys, setup_path):
    code, _, err = run_cli(capsys, "run", setup_path, "--set", "beam.pump.power_mW")
    assert code == 2
    assert_names(err, setup_path, "--set")


def test_run_without_setup_runs_the_bundled_demo(capsys):
    """files.md: `pumpsim run` with no setup runs the demo (made cheap with --set)."""
    code, out, _ = run_cli(capsys, "run", "--json", "--set", "numerics.tolerance=0.1",
                           "--set", "source.divergence_rms_mrad=0", "--set", "source.width_rms_mm=0")
    assert code == 0
    data = json.loads(out)
    assert data["target"] == "m" and {"pump", "repump"} <= set(data["photons_per_atom"])


def test_run_out_writes_complete_hdf5(capsys, setup_path, tmp_path):
    out_file = tmp_path / "result.h5"
    code, out, _ = run_cli(capsys, "run", setup_path, "--json", "--out", out_file)
    assert code == 0
    data = json.loads(out)
    assert out_file.is_file() and not list(tmp_path.glob("*.partial"))
    with h5py.File(out_file, "r") as f:
        assert f.attrs["complete"]
        assert f.attrs["pumpsim_version"] == pumpsim.__version__
        # inputs verbatim
        assert f["inputs/setup_toml"][()].decode() == Path(setup_path).read_text()
        assert f["inputs/scheme_toml"][()].decode() == (tmp_path / "scheme.toml").read_text()
        # results match the JSON
        res = f["results"]
        levels = [str(x) for x in res["final_populations"].attrs["levels"]]
        assert levels == ["g", "m", "e", "x", "other"]
        pops = dict(zip(levels, res["final_populations"][()]))
        for lid, p in data["final_populations"].items():
            assert pops[lid] == pytest.approx(p, abs=1e-15)
        beams = [str(x) for x in res["deflection_mrad"].attrs["beams"]]
        for b, v in zip(beams, res["deflection_mrad"][()]):
            assert v == pytest.approx(data["deflection_mrad"][b], rel=1e-12)
        # populations against z: one row per grid point, each summing to 1
        z = f["profile/z_mm"][()]
        prof = f["profile/populations"][()]
        assert prof.shape == (len(z), 5) and np.all(np.diff(z) > 0)
        assert np.allclose(prof.sum(axis=1), 1, atol=1e-10)
        assert prof[-1] == pytest.approx(res["final_populations"][()], abs=1e-12)
        # per-node results whose weighted mean is the reported mean
        w = f["nodes/weight"][()]
        assert f["nodes/populations"].shape == (len(w), 5)
        assert w @ f["nodes/populations"][()] == pytest.approx(res["final_populations"][()],
                                                              abs=1e-12)
        assert len(f["nodes/speed_m_s"]) == len(w)
        # numerics
        assert "tolerance" in f["numerics"].attrs and "steps" in f["numerics"].attrs


def test_run_out_into_missing_folder_is_exit_2_before_computing(capsys, setup_path, tmp_path,
                                                                 monkeypatch):
    import pumpsim.commands.run as run_cmd

    monkeypatch.setattr(run_cmd, "simulate", lambda *a, **k: pytest.fail("computed first"))
    out = tmp_path / "no" / "dir" / "r.h5"
    code, stdout, err = run_cli(capsys, "run", setup_path, "--out", out)
    assert (code, stdout) == (2, "")
    assert_names(err, setup_path, "[--out]", f"the folder {out.parent} of {out} does not exist")
    assert not list(tmp_path.rglob("*.h5*"))


def test_run_missing_file_is_exit_2_naming_it(capsys, tmp_path):
    missing = tmp_path / "absent.toml"
    code, _, err = run_cli(capsys, "run", missing)
    assert code == 2
    assert_names(err, missing)


def test_run_bad_toml_is_exit_2_naming_the_file(capsys, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("scheme = 'x.toml'\n[source\nkind = 1\n")
    code, _, err = run_cli(capsys, "run", bad)
    assert code == 2
    assert_names(err, bad)


# -- info -----------------------------------------------------------------------------

def test_info_json_keys_and_values(capsys, tmp_path):
    scheme_path = write_toml(tmp_path / "scheme.toml", small_scheme())
    code, out, _ = run_cli(capsys, "info", scheme_path, "--json")
    assert code == 0
    data = json.loads(out)
    assert {"decays", "levels"} <= set(data)
    assert len(data["decays"]) == 3
    for d in data["decays"]:
        assert DECAY_KEYS <= set(d)
    by_pair = {(d["upper"], d["lower"]): d for d in data["decays"]}
    eg = by_pair[("e", "g")]
    lam = 1 / (100 * 20000.0)  # 1e7 / (E_upper - E_lower) nm (files.md)
    assert eg["wavelength_nm"] == pytest.approx(lam * 1e9, rel=1e-12)
    assert eg["A_per_s"] == pytest.approx(0.6 / 2e-8, rel=1e-12)
    # sigma0 = 3 lambda^2/(2 pi) x A/gamma for J=0 -> J=1 (Foot 2005), gamma = 1/lifetime
    assert eg["sigma0_m2"] == pytest.approx(3 * lam**2 / (2 * math.pi) * 0.6, rel=1e-12)
    # I_sat = hbar omega G / (sigma0 (1 + g_i/g_k)) (model.md); W/m^2 -> mW/cm^2 is x 0.1
    isat = C.hbar * 2 * math.pi * C.c / lam / 2e-8 / (eg["sigma0_m2"] * (1 + 1 / 3))
    assert eg["isat_mW_cm2"] == pytest.approx(0.1 * isat, rel=1e-12)
    xm = by_pair[("x", "m")]
    assert xm["wavelength_nm"] == pytest.approx(1e7 / (17000 - 1000), rel=1e-12)
    levels = {lv["id"]: lv for lv in data["levels"]}
    assert set(levels) == {"g", "m", "e", "x"}
    assert levels["e"]["lifetime_s"] == pytest.approx(2e-8, rel=1e-12)
    assert levels["x"]["lifetime_s"] == pytest.approx(1 / 3e7, rel=1e-12)  # 1/sum(A)
    assert levels["g"]["lifetime_s"] is None  # stable


def test_info_readable(capsys, tmp_path):
    scheme_path = write_toml(tmp_path / "scheme.toml", small_scheme())
    code, out, _ = run_cli(capsys, "info", scheme_path)
    assert code == 0 and "500.000" in out  # the e -> g wavelength, nm


def test_info_bad_scheme_is_exit_2(capsys, tmp_path):
    doc = small_scheme()
    doc["decay"][0]["branching"] = 0.9  # 0.9 + 0.35 > 1
    bad = write_toml(tmp_path / "scheme.toml", doc)
    code, _, err = run_cli(capsys, "info", bad)
    assert code == 2
    assert_names(err, bad, "decay", "branching", "'e'")


# -- check ----------------------------------------------------------------------------

def test_check_setup_summary(capsys, setup_path):
    code, out, _ = run_cli(capsys, "check", setup_path)
    assert code == 0
    for word in ("pump", "probe", "500.000", "CAUTION"):
        assert word in out
    # peak intensity 2P/(pi w^2) of the pump, in mW/cm^2 (Siegman, Lasers)
    peak = 2 * 2e-3 / (math.pi * 1e-3**2) * 0.1
    assert f"{peak:.4g}" in out


def test_check_setup_json(capsys, setup_path):
    code, out, _ = run_cli(capsys, "check", setup_path, "--json")
    assert code == 0
    data = json.loads(out)
    beams = {b["name"]: b for b in data["beams"]}
    assert beams["pump"]["peak_intensity_mW_cm2"] == pytest.approx(
        2 * 2e-3 / (math.pi * 1e-6) * 0.1, rel=1e-12)
    assert data["cautions"]


def test_check_scheme(capsys, tmp_path):
    scheme_path = write_toml(tmp_path / "scheme.toml", small_scheme())
    code, out, _ = run_cli(capsys, "check", scheme_path)
    assert code == 0 and "valid scheme" in out


def test_check_bad_setup_is_exit_2_naming_file_table_key_level(capsys, tmp_path):
    doc = small_setup()
    doc["beam"][0]["transition"] = ["g", "nope"]
    path = write_case(tmp_path, small_scheme(), doc)
    code, out, err = run_cli(capsys, "check", path)
    assert code == 2 and out == ""
    assert_names(err, path, "beam 'pump'", "transition", "nope")


def test_no_subcommand_and_unknown_subcommand_are_exit_2(capsys):
    assert main([]) == 2
    with pytest.raises(SystemExit) as exc:
        main(["frobnicate"])
    assert exc.value.code == 2


# -- the installed command itself -------------------------------------------------------

def _command():
    script = Path(sys.executable).with_name("pumpsim")
    return [str(script)] if script.exists() else [sys.executable, "-m", "pumpsim.cli"]


def test_console_script_exit_codes(tmp_path, setup_path):
    """The real process: 0 on success, 2 on bad input, the message on stderr."""
    env = dict(os.environ, PUMPSIM_DEBUG="")
    ok = subprocess.run(_command() + ["check", str(setup_path), "--json"],
                        capture_output=True, text=True, env=env, timeout=120)
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["target"] == "m"
    doc = small_setup()
    doc["beam"][1]["power_mW"] = -0.5
    bad = write_case(tmp_path, small_scheme(), doc, name="bad.toml")
    fail = subprocess.run(_command() + ["run", str(bad)], capture_output=True, text=True,
                          env=env, timeout=120)
    assert fail.returncode == 2 and fail.stdout == ""
    assert_names(fail.stderr, bad, "beam 'probe'", "power_mW")
