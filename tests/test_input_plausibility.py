"""Inputs checked before anything is computed: what a run would cost, unit slips,
likely mistakes that a run only warns about, and names typed almost right.

Outside references: the peak memory is measured by Python's own ``tracemalloc``;
wavelengths from energies use CODATA ``h c`` (scipy.constants); oscillator
strengths of the rubidium D lines are D. A. Steck, *Rubidium 87 D Line Data*
(values from memory: D1 0.3423, D2 0.6956); the Gaussian beam's peak intensity
2P / (pi w^2) is the textbook formula (e.g. Foot, *Atomic Physics*, 2005).
Plausible ranges (optical lines 100 nm to 20 um, f below 100) are common
practice, no source.
"""

import copy
import json
import re
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
from scipy import constants as C

import pumpsim
import pumpsim.cost
from pumpsim.errors import InputError
from pumpsim.lines import line
from pumpsim.model import RateModel
from pumpsim.plausible import oscillator_strength
from pumpsim.simulate import make_propagator
from pumpsim.scan import parse_axis
from test_fuzz_inputs import SCHEME, SETUP, _emit, cli, write

ROOT = Path(__file__).parent.parent
DEMO = ROOT / "demo_data" / "demo_setup.toml"


def files(folder, scheme=SCHEME, setup=SETUP):
    write(folder / "scheme.toml", _emit(scheme))
    return write(folder / "setup.toml", _emit(setup))


def edited(doc, change):
    doc = copy.deepcopy(doc)
    change(doc)
    return doc


@pytest.fixture
def ram_16_gib(monkeypatch):
    """A machine of 16 GiB whatever this one has, so that limits are the same everywhere."""
    monkeypatch.setattr(pumpsim.cost, "machine_memory", lambda: 16 * 2**30)


# -- what a run costs ----------------------------------------------------------
def test_memory_estimate_bounds_the_measured_peak_of_one_chunk():
    """The estimate holds what one chunk of nodes really takes (peak measured by
    tracemalloc while the chunk's problem is built and integrated) and is not
    far above it."""
    setup = pumpsim.load_setup(DEMO).with_value("beam.pump.passes", 6)
    model = RateModel(setup)
    cost = pumpsim.cost.estimate(model)
    n = pumpsim.cost.CHUNK
    tracemalloc.start()
    try:
        problem = model.problem(np.full(n, 500.0), np.zeros(n), np.zeros(n))
        make_propagator(setup.numerics).propagate(problem, model.grid(4)[:9])
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak <= cost.memory_bytes <= 4 * peak, (peak, cost.memory_bytes)


def test_a_run_that_cannot_fit_in_memory_is_refused_before_computing(tmp_path, ram_16_gib,
                                                                   monkeypatch):
    """passes = 100 makes every node's generator 104 x 104 per pass: tens of GiB."""
    monkeypatch.chdir(tmp_path)
    files(tmp_path, setup=edited(SETUP, lambda d: d["beam"][0].update(passes=100)))
    rc, out, err = cli("run", "setup.toml")
    assert (rc, out) == (2, "")
    assert err.startswith("pumpsim: error: setup.toml [beam 'pump'] key 'passes': the "
                          "simulation needs about ")
    need = float(re.search(r"about ([\d.]+) GiB", err).group(1))
    # three copies of (passes + 1) generators of (4 states + 100 counters)^2 for 2048 nodes
    assert need == pytest.approx(3 * 101 * 2048 * 104**2 * 8 / 2**30, rel=0.05)
    assert "over the limit 8 GiB" in err


def test_simulate_itself_refuses_what_does_not_fit(monkeypatch):
    """The check runs at the engine's entry, so the API, scans and the window get it too."""
    monkeypatch.setattr(pumpsim.cost, "machine_memory", lambda: 2**20)
    with pytest.raises(InputError, match="memory, over the limit"):
        pumpsim.simulate(pumpsim.load_setup(DEMO))


def many_level_scheme(n):
    """The test scheme with ``n`` more metastable levels that the excited level feeds."""
    scheme = copy.deepcopy(SCHEME)
    for k in range(n):
        scheme["level"].append({"id": f"x{k}", "energy_cm": 2000.0 + 10.0 * k, "J": 1})
    scheme["decay"] = [{"upper": "e", "lower": "g", "branching": 0.5},
                       {"upper": "e", "lower": "m", "branching": 0.1,
                        "wavelength_nm": 526.316}] + [
        {"upper": "e", "lower": f"x{k}", "branching": 0.4 / n} for k in range(n)]
    return scheme


def test_a_long_run_is_announced_with_how_long(tmp_path, monkeypatch):
    """A 100-level scheme crossed by an effusive beam: every node and step costs a dense
    generator of 104 states, and the time measured on a probe says, before anything
    runs, that the run takes seconds at the least and up to half an hour. The notice
    threshold is lowered to that measured bound, so that the notice's path is taken on
    any machine however fast (the figure itself is measured, not asserted)."""
    def effusive(d):
        d["numerics"].update(tolerance=1e-4)
        d["source"] = {"kind": "effusive", "temperature_K": 1000.0,
                       "divergence_rms_mrad": 4.0, "width_rms_mm": 1.0, "initial": {"g": 1.0}}
    path = files(tmp_path, many_level_scheme(100), edited(SETUP, effusive))
    cost = pumpsim.cost.estimate_setup(pumpsim.load_setup(path))
    assert cost.states == 104
    low, high = cost.seconds
    assert 0 < low < high
    monkeypatch.setattr(pumpsim.cost, "LONG_SECONDS", low / 2)
    notice = pumpsim.cost.long_run_notice(cost)
    assert notice.code == "long-run"
    assert notice.message.startswith("this run will take at least")
    assert "fewer levels" in notice.message


def test_an_ordinary_run_is_not_announced():
    rc, out, err = cli("check", DEMO, "--json")
    assert rc == 0, err
    assert json.loads(out)["notices"] == []


# -- unit slips refused --------------------------------------------------------
def test_energies_typed_in_ev_are_refused_naming_the_slip(tmp_path):
    """energy_cm given in eV: the line would be millimetres long. The message names eV
    and the wavelength the energies mean in eV (lambda = h c / E, CODATA via scipy)."""
    scheme = copy.deepcopy(SCHEME)
    for lv in scheme["level"]:
        lv["energy_cm"] = round(lv["energy_cm"] * 100 * C.h * C.c / C.e, 4)  # cm^-1 -> eV
    del scheme["decay"][1]["wavelength_nm"]
    files(tmp_path, scheme)
    rc, out, err = cli("check", tmp_path / "setup.toml")
    assert (rc, out) == (2, "")
    assert "key 'transition' level 'e'" in err and "outside the optical range" in err
    meant = float(re.search(r"typed in eV \(the line would be at ([\d.]+) nm\)", err).group(1))
    e_ev = scheme["level"][2]["energy_cm"]
    assert meant == pytest.approx(C.h * C.c / (e_ev * C.e) * 1e9, rel=1e-3)


def test_a_lifetime_no_atom_has_is_refused(tmp_path):
    """2e-14 s for the upper level of a 500 nm line means f ~ 3e5."""
    files(tmp_path, edited(SCHEME, lambda d: d["level"][2].update(lifetime_s=2e-14)))
    rc, _, err = cli("check", tmp_path / "setup.toml")
    assert rc == 2
    assert "oscillator strength" in err and "is the lifetime of 'e' (2e-14 s) in seconds" in err


def test_mid_infrared_lines_stay_allowed(tmp_path):
    """A 10 um line (CO2-laser range) is inside the optical range and runs."""
    scheme = edited(SCHEME, lambda d: d["decay"].append(
        {"upper": "m", "lower": "g", "A_per_s": 10.0}))
    setup = edited(SETUP, lambda d: d["beam"][0].update(transition=["g", "m"]))
    files(tmp_path, scheme, setup)
    rc, _, err = cli("check", tmp_path / "setup.toml")
    assert rc == 0, err


@pytest.mark.parametrize("upper, f_steck", [("5P1/2", 0.3423), ("5P3/2", 0.6956)])
def test_oscillator_strength_of_the_rubidium_d_lines(upper, f_steck):
    """f from A, lambda and degeneracies against Steck's tabulated values (from memory)."""
    scheme = pumpsim.load_scheme(ROOT / "schemes" / "rb87.toml")
    assert oscillator_strength(line(scheme, "5S1/2", upper)) == pytest.approx(f_steck, rel=3e-3)


# -- likely slips the run warns about ------------------------------------------
def run_json(tmp_path, scheme=SCHEME, setup=SETUP):
    files(tmp_path, scheme, setup)
    rc, out, err = cli("run", tmp_path / "setup.toml", "--json")
    assert rc == 0, err
    return json.loads(out), err


def codes(result):
    """The notices' codes; each message is also the documented one (docs/bad_input.md)."""
    doc = (ROOT / "docs" / "bad_input.md").read_text(encoding="utf-8")
    for n in result["notices"]:
        assert f"`{n['message']}`" in doc, n["message"]
    return [n["code"] for n in result["notices"]]


def test_a_target_that_decays_during_the_crossing_is_warned(tmp_path):
    """The 20 ns excited level as target: it reads ~0 however well it is pumped."""
    result, err = run_json(tmp_path, setup=edited(SETUP, lambda d: d.update(target="e")))
    assert result["transfer_fraction"] < 1e-3
    assert codes(result) == ["short-lived-target"]
    assert "WARNING: the target 'e' decays in 20 ns" in err


def test_a_beam_far_below_saturation_that_moves_little_is_warned(tmp_path):
    """0.001 mW (a power typed in W, say): s0 = 0.003 and a quarter photon per atom."""
    result, err = run_json(tmp_path, setup=edited(
        SETUP, lambda d: d["beam"][0].update(power_mW=0.001)))
    assert codes(result) == ["weak-beam"]
    assert result["notices"][0]["key"] == "beam.pump.power_mW"
    assert "is the unit right?" in err
    strong, _ = run_json(tmp_path)
    assert strong["notices"] == []


def test_a_driven_level_that_outlives_the_crossing_is_warned(tmp_path):
    """lifetime_s = 20 for a level meant to live 20 ns."""
    result, _ = run_json(tmp_path, edited(SCHEME, lambda d: d["level"][2].update(lifetime_s=20.0)))
    assert codes(result) == ["long-lived-upper"]


# -- names typed almost right --------------------------------------------------
@pytest.mark.parametrize("axis, expected", [
    ("beam.pump.power_W=1:2:2", "unknown key; did you mean 'beam.pump.power_mW'?"),
    ("beam.pmup.power_mW=1:2:2", "unknown key; did you mean 'beam.pump.power_mW'?"),
    ("source.temperature=1:2:2", "unknown key; did you mean 'source.temperature_K'?"),
    ("source.initial.G=0:1:2", "unknown key; did you mean 'source.initial.g'?"),
    ("source.kind=1:2:2", "takes text, not numbers"),
])
def test_vary_names_the_unknown_key_and_the_near_ones(axis, expected):
    setup = pumpsim.load_setup(DEMO)
    with pytest.raises(InputError) as exc:
        parse_axis(axis, setup)
    assert exc.value.table == "--vary" and exc.value.key == axis.split("=")[0]
    assert exc.value.reason.startswith(expected.rstrip("?"))


@pytest.mark.parametrize("which, change", [
    ("setup", lambda d: d.update(target="E")),
    ("setup", lambda d: d["beam"][0].update(transition=["g", "E"])),
    ("setup", lambda d: d["source"].update(initial={"G": 1.0})),
    ("scheme", lambda d: d["decay"][0].update(upper="E")),
])
def test_level_ids_that_differ_in_case_get_the_right_one(tmp_path, which, change):
    docs = {"scheme": copy.deepcopy(SCHEME), "setup": copy.deepcopy(SETUP)}
    change(docs[which])
    files(tmp_path, docs["scheme"], docs["setup"])
    rc, _, err = cli("check", tmp_path / "setup.toml")
    assert rc == 2
    assert re.search(r"unknown level; did you mean '[ge]'\? \(levels: g, m, e\)$", err.strip())


def test_check_takes_set_like_run():
    """The checked beam is the one with the override: its peak intensity is that of an
    elliptical Gaussian beam, 2 P / (pi w_a w_c), with the demo's 1.5 x 3 mm waists."""
    rc, out, err = cli("check", DEMO, "--set", "beam.pump.power_mW=2", "--json")
    assert rc == 0, err
    pump = json.loads(out)["beams"][0]
    assert pump["power_mW"] == 2.0
    peak_mW_cm2 = 2 * 2.0 / (np.pi * 0.15 * 0.30)
    assert pump["peak_intensity_mW_cm2"] == pytest.approx(peak_mW_cm2, rel=1e-12)
    rc, _, err = cli("check", ROOT / "schemes" / "veridium.toml", "--set", "target=m")
    assert rc == 2 and "[--set]: --set changes setups; this file is a scheme" in err


def test_set_values_nested_thousands_deep_are_bad_input():
    rc, _, err = cli("check", DEMO, "--set", "beam.pump.power_mW=" + "[" * 5000 + "]" * 5000)
    assert rc == 2 and "must be a number" in err


@pytest.mark.parametrize("axis, message", [
    ("beam.pump.power_W=1:10:5", "setup.toml [--vary] key 'beam.pump.power_W': unknown key; "
                                 "did you mean 'beam.pump.power_mW'?"),
    ("source.kind=1:2:2", "setup.toml [--vary] key 'source.kind': takes text, not numbers: "
                          "only numeric setup values can be varied"),
])
def test_documented_vary_messages(tmp_path, monkeypatch, axis, message):
    """The --vary rows of docs/bad_input.md, exactly; nothing is written."""
    monkeypatch.chdir(tmp_path)
    files(tmp_path)
    rc, out, err = cli("scan", "setup.toml", "--vary", axis, "--out", "scan.h5")
    assert (rc, out, err) == (2, "", f"pumpsim: error: {message}\n")
    assert not (tmp_path / "scan.h5").exists()
    assert f"`{message}`" in (ROOT / "docs" / "bad_input.md").read_text(encoding="utf-8")
