"""Sublevel targets: what a target text names, the target's population against an
independent rate-equation reference, the dark-state verdicts and the pair saturation."""

import json
import math
import tomllib
from pathlib import Path

import h5py
import numpy as np
import pytest
from scipy import constants as C
from scipy.integrate import solve_ivp
from sympy import Rational
from sympy.physics.wigner import wigner_3j, wigner_6j

import pumpsim
from pumpsim.cli import main
from pumpsim.errors import InputError
from pumpsim.setup_file import setup_from_document

ROOT = Path(__file__).resolve().parent.parent
RB87 = str(ROOT / "schemes" / "rb87.toml")
DEMO = ROOT / "demo_data" / "rb87_optical_pumping.toml"


def rb_setup(beams, target="5S1/2", **top):
    doc = {"scheme": RB87, "target": target, "mode": "sublevel",
           "source": {"kind": "monoenergetic", "speed_m_s": 100.0, "initial": {"5S1/2": 1.0}},
           "beam": beams, "numerics": {"tolerance": 1e-4}}
    doc.update(top)
    return setup_from_document(doc, None)


PI_BEAMS = [dict(name="pump", transition=["5S1/2", "5P1/2"], reference_F=[2, 2],
                 polarization="pi", power_mW=0.004, waist_mm=1.0),
            dict(name="repump", transition=["5S1/2", "5P1/2"], reference_F=[1, 2],
                 polarization="pi", power_mW=0.004, waist_mm=1.0)]


# --- what a target names -------------------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    ("5S1/2", None),                                    # a plain level id keeps its meaning
    ("5S1/2 F=2 m=+2", {(2, 2)}),
    ("|5S1/2 F=2, m_F=+2>", {(2, 2)}),                 # ket brackets and m_F= accepted
    ("5S1/2 F=2 m=max", {(2, 2)}),                     # the stretched state
    ("5S1/2 F=2 m=min", {(2, -2)}),
    ("5S1/2 F=1", {(1, -1), (1, 0), (1, 1)}),          # a hyperfine level: 2F+1 sublevels
    ("5S1/2 m=0", {(1, 0), (2, 0)}),                   # m without F: every F that has it
    ("5S1/2 m=+2", {(2, 2)}),
    ("5S1/2 F=2 m=+1,+2", {(2, 1), (2, 2)}),
    ("5S1/2 F=2 m=+2; F=1 m=+1", {(2, 2), (1, 1)}),
    ("5P3/2 F=3 m=-3", {(3, -3)}),
])
def test_target_texts_name_the_sublevels_of_the_trade_notation(text, expected):
    # |F, m_F> with F = |J-I|..J+I and m_F = -F..F (angular-momentum addition; common
    # practice, no source)
    goal = rb_setup(PI_BEAMS, target=text).goal
    if expected is None:
        assert goal.whole_level and goal.level == "5S1/2"
    else:
        assert {(int(F), int(m)) for F, m in goal.states} == expected


@pytest.mark.parametrize("text, words", [
    ("5S1/2 F=3", "has F = 1, 2"),
    ("5S1/2 F=2 m=+3", "m runs from -2 to +2"),
    ("5S1/2 F=2 m=1.5", "whole or half-integer"),
    ("5S1/2 G=2", "cannot read"),
    ("5S1/2 F=2 m=+2; 5P1/2 F=1", "one level"),
    ("5S1/3 F=2", "unknown level"),
])
def test_a_target_naming_no_state_is_refused_on_the_target_key(text, words):
    with pytest.raises(InputError) as err:
        rb_setup(PI_BEAMS, target=text)
    assert err.value.key == "target" and words in str(err.value)


def test_a_sublevel_target_in_level_mode_says_to_switch_mode():
    with pytest.raises(InputError, match="only sublevel mode"):
        rb_setup(PI_BEAMS, target="5S1/2 F=2 m=+2", mode="level")


def test_without_nuclear_spin_sublevels_are_m_J():
    doc = tomllib.loads((ROOT / "schemes" / "rb87.toml").read_text())
    doc["species"].pop("nuclear_spin")
    for lv in doc["level"]:
        for k in ("hfs_A_MHz", "hfs_B_MHz"):
            lv.pop(k, None)
    scheme = pumpsim.scheme_file.scheme_from_document(doc, None)
    setup = setup_from_document({"scheme": "x", "target": "5S1/2 m=-1/2", "mode": "sublevel",
                                 "source": {"kind": "monoenergetic", "speed_m_s": 100.0,
                                            "initial": {"5S1/2": 1.0}},
                                 "numerics": {"start_mm": -1.0, "end_mm": 1.0}},
                                None, scheme=scheme)
    assert setup.goal.states == ((0.5, -0.5),)


# --- the target's population against an independent reference -------------------------

def R(x):
    return Rational(int(round(2 * x)), 2)


def reference_final(setup_doc_beams, speed, scheme_doc):
    """Sublevel populations at the end, from rate equations built here from sympy's
    Wigner 3j and 6j symbols and textbook formulas only (D. A. Steck, *Rubidium 87 D
    Line Data*, sections on transition strengths; Foot, *Atomic Physics*, 2005, ch. 7):

    - decay |F' m'> -> |F m>: Gamma (2J'+1)(2F+1)(2F'+1) {J J' 1; F' F I}^2
      (F 1 F'; m q -m')^2, q = m' - m;
    - absorption of light of polarization q by one pair:
      sigma = 3 lambda^2/(2 pi) (Gamma_pair / Gamma) / (1 + (2 Delta/Gamma)^2), rate
      sigma I / (hbar omega), stimulated emission at the same rate;
    - I(t) = 2P/(pi w^2) exp(-2 (v t)^2 / w^2) for an atom on the beam's axis.
    """
    species = scheme_doc["species"]
    I = species["nuclear_spin"]
    lv = {d["id"]: d for d in scheme_doc["level"]}
    g, e = lv["5S1/2"], lv["5P1/2"]
    J, Jp = g["J"], e["J"]
    Gamma = 1 / e["lifetime_s"]
    lam = 1e-2 / (e["energy_cm"] - g["energy_cm"])
    omega = 2 * math.pi * C.c / lam

    def hfs(level, F):
        K = F * (F + 1) - I * (I + 1) - level["J"] * (level["J"] + 1)
        return 0.5 * level["hfs_A_MHz"] * 1e6 * K  # Hz (no B for J = 1/2)

    lower = [(F, m) for F in (1, 2) for m in range(-F, F + 1)]
    upper = [(F, m) for F in (1, 2) for m in range(-F, F + 1)]
    nl, nu = len(lower), len(upper)

    def pair_rate(F, m, Fp, mp):
        q = mp - m
        if abs(q) > 1:
            return 0.0
        six = wigner_6j(R(J), R(Jp), 1, R(Fp), R(F), R(I))
        three = wigner_3j(R(F), 1, R(Fp), R(m), R(q), R(-mp))
        return Gamma * float((2 * Jp + 1) * (2 * F + 1) * (2 * Fp + 1) * six**2 * three**2)

    decay = np.zeros((nl + nu, nl + nu))
    for u, (Fp, mp) in enumerate(upper):
        decay[nl + u, nl + u] = -Gamma
        for i, (F, m) in enumerate(lower):
            decay[i, nl + u] += pair_rate(F, m, Fp, mp)
    assert np.allclose(decay.sum(axis=0), 0.0, atol=1e-6 * Gamma)  # closed D1 line

    drives = []  # (i, u, rate per unit intensity)
    for b in setup_doc_beams:
        q = {"pi": 0, "sigma+": 1, "sigma-": -1}[b["polarization"]]
        Fr, Fpr = b["reference_F"]
        laser = hfs(e, Fpr) - hfs(g, Fr)  # from the centroid, Hz
        w = b["waist_mm"] * 1e-3
        peak = 2 * b["power_mW"] * 1e-3 / (math.pi * w * w)
        for i, (F, m) in enumerate(lower):
            for u, (Fp, mp) in enumerate(upper):
                if mp - m != q:
                    continue
                detuning = 2 * math.pi * (laser - (hfs(e, Fp) - hfs(g, F)))
                sigma = (3 * lam**2 / (2 * math.pi) * pair_rate(F, m, Fp, mp) / Gamma
                         / (1 + (2 * detuning / Gamma) ** 2))
                if sigma:
                    drives.append((i, nl + u, sigma * peak / (C.hbar * omega), w))

    def rhs(t, y):
        dy = decay @ y
        z = speed * t
        for i, u, r0, w in drives:
            r = r0 * math.exp(-2 * z * z / (w * w)) * (y[i] - y[u])
            dy[i] -= r
            dy[u] += r
        return dy

    w = max(b["waist_mm"] for b in setup_doc_beams) * 1e-3
    y0 = np.r_[np.full(nl, 1 / nl), np.zeros(nu)]
    sol = solve_ivp(rhs, (-6 * w / speed, 6 * w / speed), y0, method="Radau",
                    rtol=1e-10, atol=1e-12)
    return {f"5S1/2 F={F} m={'+' if m > 0 else ''}{m}": p
            for (F, m), p in zip(lower, sol.y[:nl, -1])}


@pytest.mark.parametrize("target, members", [
    ("5S1/2 F=2 m=0", ["5S1/2 F=2 m=0"]),
    ("5S1/2 F=2", [f"5S1/2 F=2 m={m}" for m in ("-2", "-1", "0", "+1", "+2")]),
])
def test_pi_pumping_target_population_matches_sympy_built_rate_equations(target, members):
    # pi light on F=2 -> F'=2 cannot excite |2,0> ((2 1 2; 0 0 0) = 0), so a pi repump on
    # F=1 -> F'=2 pumps atoms there; at a weak power only part of them arrive, which is
    # what makes the comparison a test of the rates
    setup = rb_setup(PI_BEAMS, target=target, numerics={"tolerance": 1e-6})
    result = pumpsim.simulate(setup)
    ref = reference_final(PI_BEAMS, 100.0, tomllib.loads(Path(RB87).read_text()))
    expected = sum(ref[k] for k in members)
    assert 0.2 < ref["5S1/2 F=2 m=0"] < 0.9  # a partial transfer, not the end state
    assert result.transfer_fraction == pytest.approx(expected, abs=2e-5)
    assert result.final_populations["5S1/2"] == pytest.approx(1.0, abs=1e-9)


# --- dark states: wanted or a leak -------------------------------------------------------

def test_dark_report_calls_the_target_wanted_and_other_dark_states_leaks():
    # sigma+ on D1 F=2 -> F'=2 without repump: |2,+2> is dark by polarization (no m'=3 in
    # F'=2) and F=1 is dark because no beam is tuned to it (6.8 GHz away); textbook optical
    # pumping (Happer, Rev. Mod. Phys. 44, 169, 1972)
    beam = dict(name="pump", transition=["5S1/2", "5P1/2"], reference_F=[2, 2],
                polarization="sigma+", power_mW=0.5, waist_mm=2.0)
    result = pumpsim.simulate(rb_setup([beam], target="5S1/2 F=2 m=+2",
                                       numerics={"tolerance": 1e-3}))
    from pumpsim.commands.run import summary

    text = summary(result)
    line_of = {ln.split()[1] + " " + ln.split()[2]: ln for ln in text.splitlines()
               if ln.startswith("  5S1/2 F=") and ("leak" in ln or "wanted" in ln)}
    assert "wanted" in line_of["F=2 m=+2"]
    assert "repump" in line_of["F=1 m=+1"]
    d = result.to_dict()
    assert d["target_sublevels"] == ["5S1/2 F=2 m=+2"]
    assert d["transfer_fraction"] == pytest.approx(d["sublevel_populations"]["5S1/2 F=2 m=+2"])

    # pi light instead: |2,+2> is no longer dark but |2,0> is, and it is not the target
    pi = rb_setup([dict(beam, polarization="pi"), dict(beam, name="repump", reference_F=[1, 2])],
                  target="5S1/2 F=2 m=+2", numerics={"tolerance": 1e-3})
    text = summary(pumpsim.simulate(pi))
    (zero,) = [ln for ln in text.splitlines() if ln.startswith("  5S1/2 F=2 m=0 ")
               and "leak" in ln]
    assert "polarization" in zero


# --- saturation: the pair's figure and its convention ------------------------------------

def test_pair_saturation_is_steck_cycling_value_and_isotropic_value():
    # D. A. Steck, "Rubidium 87 D Line Data" (revision not checked, values from memory):
    # D2 cycling |F=2, m=+2> -> |F'=3, m'=+3> with sigma+ light I_sat = 1.66933 mW/cm^2;
    # F=2 -> F'=3 with isotropic light I_sat = 3.57713 mW/cm^2
    beam = dict(name="p", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                polarization="sigma+", power_mW=1.0, waist_mm=1.0)
    result = pumpsim.simulate(rb_setup([beam], numerics={"tolerance": 1e-3}))
    info = result.beam_summary()["p"]
    assert info["pair"] == "5S1/2 F=2 m=+2 -> 5P3/2 F=3 m=+3"
    assert info["pair_saturation_intensity_mW_cm2"] == pytest.approx(1.66933, rel=3e-4)
    assert info["pair_saturation_parameter"] == pytest.approx(
        info["peak_intensity_mW_cm2"] / 1.66933, rel=3e-4)
    assert "two-level" in info["pair_convention"]
    assert "isotropic" in info["saturation_convention"]
    # the level figure stays the fine-structure one: twice the cycling value for
    # J=1/2 -> J'=3/2 (degeneracy factor (1 + g_i/g_k) against 2; model.md)
    assert info["saturation_intensity_mW_cm2"] == pytest.approx(2 * 1.66933, rel=3e-4)
    # isotropic light on the F=2 -> F'=3 component: relative strength S_23 from sympy's 6j
    ln = pumpsim.lines.line(result.setup.scheme, "5S1/2", "5P3/2")
    S23 = float((2 * 3 + 1) * (2 * Rational(1, 2) + 1)
                * wigner_6j(Rational(1, 2), Rational(3, 2), 1, 3, 2, Rational(3, 2)) ** 2)
    assert S23 == pytest.approx(0.7, abs=1e-12)  # Steck's table of S_FF': 7/10
    assert ln.pair_saturation_intensity(S23) * 0.1 == pytest.approx(3.57713, rel=3e-4)


# --- files and commands --------------------------------------------------------------------

def test_run_json_and_hdf5_carry_a_sublevel_target(tmp_path, capsys):
    # behaviour: --set target=..., JSON and HDF5 show the target and its population
    code = main(["run", str(DEMO), "--json", "--set", "target=5S1/2 F=2 m=max",
                 "--out", str(tmp_path / "r.h5")])
    d = json.loads(capsys.readouterr().out)
    assert code == 0
    assert d["target"] == "5S1/2 F=2 m=max" and d["target_sublevels"] == ["5S1/2 F=2 m=+2"]
    assert d["transfer_fraction"] == pytest.approx(d["sublevel_populations"]["5S1/2 F=2 m=+2"])
    with h5py.File(tmp_path / "r.h5") as f:
        g = f["sublevels"]
        labels = [x.decode() if isinstance(x, bytes) else x for x in g["labels"][()]]
        assert [lab for lab, t in zip(labels, g["target"][()]) if t] == ["5S1/2 F=2 m=+2"]
    assert main(["run", str(DEMO), "--set", "target=5S1/2 F=4"]) == 2
    err = capsys.readouterr().err
    assert "key 'target'" in err and "F = 1, 2" in err and "Traceback" not in err


def test_scan_varies_power_for_a_sublevel_target(tmp_path, capsys):
    # more pump power cannot lower the population pumped into the dark stretched state
    # (optical pumping into a dark state is monotonic in the pumping rate at fixed
    # transit time for this closed scheme; common practice, no source)
    out = tmp_path / "s.h5"
    assert main(["scan", str(DEMO), "--set", "target=5S1/2 F=2 m=+2",
                 "--vary", "beam.pump.power_mW=0.002:0.05:3:log", "--out", str(out)]) == 0
    with h5py.File(out) as f:
        frac = f["results/transfer_fraction"][()]
        assert f["results"].attrs["target"] == "5S1/2 F=2 m=+2"
    assert np.all(np.diff(frac) > 0) and frac[-1] > 0.9 and frac[0] < 0.8


# --- the limit dark states set (unlimited time) -------------------------------------------

def test_pumping_limit_ends_in_the_dark_state_and_names_what_leaks():
    # textbook optical pumping (Happer, Rev. Mod. Phys. 44, 169, 1972): pi light on
    # F=2 -> F'=2 with F=1 repumped leaves every atom in |2,0> ((2 1 2; 0 0 0) = 0)
    from pumpsim.sublevel_limits import pumping_limit

    pi = rb_setup(PI_BEAMS, target="5S1/2 F=2 m=0")
    assert pumping_limit(pi).fraction == pytest.approx(1.0, abs=1e-9)
    # the same light, aiming at |2,+2>: the atoms end in |2,0>, a leak by polarization
    lim = pumping_limit(rb_setup(PI_BEAMS, target="5S1/2 F=2 m=+2"))
    assert lim.fraction == pytest.approx(0.0, abs=1e-9)
    assert lim.dark == ("5S1/2 F=2 m=0",) and "polarization" in lim.dark_why["5S1/2 F=2 m=0"]
    # sigma+ on the closed D2 line F=2 -> F'=3 without repump: F=1 (3 of the 8 ground
    # sublevels of an unpolarized source, 3/8) is never reached; the F=2 atoms end in the
    # cycling state |2,+2> (Steck, Rubidium 87 D Line Data: F'=3 decays only to F=2), less
    # the small off-resonant leak through F'=2
    cyc = rb_setup([dict(name="p", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                         polarization="sigma+", power_mW=1.0, waist_mm=1.0)],
                   target="5S1/2 F=2 m=+2")
    lim = pumping_limit(cyc)
    assert lim.fraction == pytest.approx(5 / 8, abs=2e-3) and lim.fraction < 5 / 8
    assert set(lim.dark) == {"5S1/2 F=1 m=-1", "5S1/2 F=1 m=0", "5S1/2 F=1 m=+1"}
    assert all("repump" in w for w in lim.dark_why.values())


# --- sizing and routes on a sublevel target -------------------------------------------------

def test_least_power_for_a_sublevel_target_gives_that_fraction_in_the_sympy_reference():
    # the least pi pump power for 50 % in |2,0> (repump as set), checked by putting that
    # power into the independent rate equations above: they must give 50 % too
    from pumpsim.batch import Batcher
    from pumpsim.sizing import least_power_search

    setup = rb_setup(PI_BEAMS, target="5S1/2 F=2 m=0", numerics={"tolerance": 1e-5})
    (search,) = Batcher().drive([least_power_search(setup, "pump", 0.5)])
    assert search.reachable
    beams = [dict(PI_BEAMS[0], power_mW=search.power * 1e3), PI_BEAMS[1]]
    ref = reference_final(beams, 100.0, tomllib.loads(Path(RB87).read_text()))
    # the power is rounded up to 4 digits: the fraction may exceed 0.5 by that much
    assert 0.5 - 2e-5 <= ref["5S1/2 F=2 m=0"] <= 0.5 + 2e-3


def test_sublevel_routes_differ_by_component_and_polarization():
    # electric-dipole selection rules: F -> F' with |F - F'| <= 1 and not 0 -> 0, each
    # with sigma+, sigma- or pi light (common practice, no source); Rb-87 5S1/2 F=2 to
    # 5P1/2 (F' = 1, 2) and 5P3/2 (F' = 1, 2, 3)
    from pumpsim.sublevel_routes import retuned, variants

    setup = pumpsim.load_setup(DEMO)
    found = variants(setup, "pump", ["5P1/2", "5P3/2"])
    assert len(found) == (2 + 3) * 3
    assert len({v.label for v in found}) == len(found)
    cyc = next(v for v in found if v.label == "5P3/2 F=2->F'=3 sigma+")
    b = retuned(setup, "pump", cyc).beam("pump")
    assert (b.upper, b.polarization.kind, b.reference_F.F, b.reference_F.Fp) == (
        "5P3/2", "sigma+", 2.0, 3.0)
    level = setup.with_value("target", "5S1/2").with_value("mode", "level")
    assert [v.label for v in variants(level, "pump", ["5P1/2"])] == ["5P1/2"]


def test_compare_ranks_the_polarization_that_pumps_into_the_target_first():
    # sigma+ light pumps towards m = +F, sigma- towards m = -F (Happer, Rev. Mod. Phys. 44,
    # 169, 1972): for the target |2,+2> the sigma+ routes must lead and the sigma- ones
    # end, with a limit at unlimited time of zero
    from pumpsim.routes import compare

    beams = [dict(name="pump", transition=["5S1/2", "5P1/2"], reference_F=[2, 2],
                  polarization="sigma+", power_mW=0.01, waist_mm=1.0),
             dict(name="repump", transition=["5S1/2", "5P1/2"], reference_F=[1, 2],
                  polarization="sigma+", power_mW=0.05, waist_mm=1.0)]
    setup = rb_setup(beams, target="5S1/2 F=2 m=+2", numerics={"tolerance": 1e-3})
    routes = compare(setup, "pump", 0.9, routes=["5P1/2"])
    keys = [r.key for r in routes]
    assert len(keys) == 6 and keys[0] == "5P1/2 F=2->F'=2 sigma+"
    assert routes[0].search.reachable and routes[0].limit.fraction == pytest.approx(1, abs=1e-9)
    for r in routes:
        if r.key.endswith("sigma-"):
            assert not r.search.reachable and r.limit.fraction < 1e-6
            assert keys.index(r.key) >= 3
    d = routes[0].to_dict()
    assert d["route"] == keys[0] and d["polarization"] == "sigma+" and d["reference_F"] == [2, 2]
