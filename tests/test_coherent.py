"""The density-matrix model against outside references.

Each test names its source. The Lambda and two-level schemes are invented
("Testium"); Rb-87 uses the repository's scheme from D. A. Steck,
*Rubidium 87 D Line Data*.
"""

import math
import shutil
from pathlib import Path

import numpy as np
import pytest

from builders import beam, decay, level, scheme_doc, setup_doc, write_case, write_toml
from pumpsim import load_setup, simulate
from pumpsim import constants as K
from pumpsim.coherent import CoherentModel, CoherentPropagator
from pumpsim.model import RateModel
from pumpsim.solvers import ExponentialPropagator

ROOT = Path(__file__).resolve().parents[1]
MONO = {"kind": "monoenergetic", "speed_m_s": 200.0}


def final_states(model, propagator, v, per_waist=32, a=0.0, y0=0.0):
    """Final state populations (and full state) of one atom."""
    V, A, Y = np.array([v]), np.array([a]), np.array([y0])
    return propagator.propagate(model.problem(V, A, Y), model.grid(per_waist)).final[0]


def lambda_case(tmp_path, p1=0.5, p2=0.5, widths=(0.0, 0.0), group=("laser", "laser"),
                detuning2=0.0, waist=1.0, speed=200.0):
    """Invented Lambda system: lower levels a, b (J = 1/2), upper e (J = 1/2) decaying
    to both; beam 1 on a-e, beam 2 on b-e."""
    scheme = scheme_doc([level("a", 0, 0.5), level("b", 100, 0.5), level("e", 20000, 0.5)],
                        [decay("e", "a", A_per_s=3e6), decay("e", "b", A_per_s=3e6)])
    beams = []
    for name, lo, p, w, g, det in (("one", "a", p1, widths[0], group[0], 0.0),
                                   ("two", "b", p2, widths[1], group[1], detuning2)):
        extra = {"linewidth_MHz": w, "detuning_MHz": det}
        if g:
            extra["phase_group"] = g
        beams.append(beam(name, lo, "e", p, waist, **extra))
    source = {"kind": "monoenergetic", "speed_m_s": speed,
              "initial": {"a": 0.5, "b": 0.5}}
    return load_setup(write_case(tmp_path, scheme, setup_doc("a", source, beams)))


def rb87_case(tmp_path, power_mW=0.02, group="laser", widths=(0.0, 0.0), B_gauss=1.0,
              speed=300.0, waist=0.5):
    """The sigma+ D1 layout of demo_data/rb87_optical_pumping.toml (pump F=2 -> F'=2,
    repump F=1 -> F'=2) on the repository's Rb-87 scheme."""
    shutil.copy(ROOT / "schemes" / "rb87.toml", tmp_path / "rb87.toml")
    beams = []
    for name, ref, w in (("pump", [2, 2], widths[0]), ("repump", [1, 2], widths[1])):
        extra = {"reference_F": ref, "polarization": "sigma+", "linewidth_MHz": w}
        if group:
            extra["phase_group"] = group
        beams.append(beam(name, "5S1/2", "5P1/2", power_mW, waist, **extra))
    doc = setup_doc("5S1/2", {"kind": "monoenergetic", "speed_m_s": speed,
                              "temperature_K": 300.0}, beams, scheme="rb87.toml")
    doc["mode"] = "sublevel"
    doc["field"] = {"B_gauss": B_gauss}
    return load_setup(write_toml(tmp_path / "setup.toml", doc))



# -- two-level atom: optical Bloch equations ---------------------------------------

def two_level(tmp_path, power_mW, detuning_MHz, A=1e7, waist=20.0, speed=10.0, end_mm=0.0,
              linewidth=0.0):
    """Invented closed two-level system with equal degeneracies (J = 1/2 both), so that
    level mode has one coherent coupling."""
    scheme = scheme_doc([level("g", 0, 0.5), level("e", 20000, 0.5)],
                        [decay("e", "g", A_per_s=A)])
    source = {"kind": "monoenergetic", "speed_m_s": speed, "initial": {"g": 1.0}}
    numerics = {"end_mm": end_mm, "start_mm": -4 * waist} if end_mm is not None else None
    doc = setup_doc("g", source, [beam("probe", "g", "e", power_mW, waist,
                                       detuning_MHz=detuning_MHz, linewidth_MHz=linewidth)],
                    numerics)
    return load_setup(write_case(tmp_path, scheme, doc))


@pytest.mark.parametrize("s,detuning_MHz", [(0.5, 0.0), (3.0, 0.0), (2.0, 1.5)])
def test_two_level_steady_state(tmp_path, s, detuning_MHz):
    """rho_ee = (s/2) / (1 + s + (2 Delta/Gamma)^2): steady state of the optical Bloch
    equations (C. J. Foot, *Atomic Physics*, Oxford 2005, section 7.3). A wide beam
    crossed slowly holds the atom near steady state; the run ends at the beam centre."""
    probe = two_level(tmp_path, 1.0, detuning_MHz)
    isat = RateModel(probe).lines[0].saturation_intensity()
    peak = 2 * 1e-3 / (math.pi * 0.02 ** 2)
    setup = probe.with_value("beam.probe.power_mW", s * isat / peak)
    model = CoherentModel(setup)
    Gamma = 1e7
    pe = final_states(model, CoherentPropagator(), 10.0, per_waist=16)[1]
    expected = (s / 2) / (1 + s + (2 * 2 * math.pi * detuning_MHz * 1e6 / Gamma) ** 2)
    assert pe == pytest.approx(expected, abs=2e-5)


@pytest.mark.parametrize("theta", [0.5 * math.pi, math.pi, 1.5 * math.pi])
def test_pulse_area_theorem(tmp_path, theta):
    """A resonant two-level atom without decay crossing a Gaussian beam ends in the
    upper state with probability sin^2(theta/2), theta = integral of the Rabi frequency
    over time (pulse-area theorem; L. Allen and J. H. Eberly, *Optical Resonance and
    Two-Level Atoms*, 1975). Omega^2 = (g_k/g_i) 2 pi c^2 A I / (hbar omega^3) from the
    Einstein A coefficient (Foot, section 7.3, with this line's degeneracies); the
    field goes as sqrt(I), so theta = Omega_peak w sqrt(pi) / v for a 1/e^2 radius w."""
    A, w, v, lam = 1e-2, 1e-3, 200.0, 500e-9
    setup = two_level(tmp_path, 1.0, 0.0, A=A, waist=1.0, speed=v, end_mm=None)
    omega = 2 * math.pi * K.c / setup.scheme.decays[0].wavelength
    omega_peak = theta * v / (w * math.sqrt(math.pi))
    intensity = omega_peak ** 2 * K.hbar * omega ** 3 / (2 * math.pi * K.c ** 2 * A)
    power_mW = intensity * math.pi * w * w / 2 * 1e3
    model = CoherentModel(setup.with_value("beam.probe.power_mW", power_mW))
    pe = final_states(model, CoherentPropagator(), v, per_waist=64)[1]
    assert lam  # the scheme's wavelength follows from its energies
    assert pe == pytest.approx(math.sin(theta / 2) ** 2, abs=1e-6)


# -- coherent population trapping -----------------------------------------------------

def test_lambda_dark_state(tmp_path):
    """Two phase-related beams at two-photon resonance pump a Lambda system into the
    dark superposition Omega_2|a> - Omega_1|b> (coherent population trapping;
    E. Arimondo, Prog. Opt. 35 (1996) 257): the atoms end in that pure state, with
    P_a/P_b = Omega_2^2/Omega_1^2 and rho_ab = -sqrt(P_a P_b), and stop scattering.
    Omega^2 ~ A I / omega^3 (Einstein relation, Foot section 7.3) for the two lines."""
    setup = lambda_case(tmp_path, p1=0.2, p2=0.6, waist=2.0, speed=20.0)
    model = CoherentModel(setup)
    y = final_states(model, CoherentPropagator(), 20.0, per_waist=16)
    pa, pb = y[0], y[1]
    w1, w2 = (2 * math.pi * K.c / d.wavelength for d in setup.scheme.decays)
    ratio = (0.6 / w2 ** 3) / (0.2 / w1 ** 3)  # Omega_2^2 / Omega_1^2
    assert pa / pb == pytest.approx(ratio, rel=1e-4)
    k = model.liouvillian.index[(0, 1)]
    assert y[k] == pytest.approx(-math.sqrt(pa * pb), rel=1e-4) and abs(y[k + 1]) < 1e-4
    # the rate equations keep scattering photons while the atoms cross the beam
    photons = model.outputs(np.array([20.0]), y[None])[1].sum()
    rates = final_states(RateModel(setup), ExponentialPropagator(), 20.0, per_waist=16)
    rate_photons = RateModel(setup).outputs(np.array([20.0]), rates[None])[1].sum()
    assert photons < 0.01 * rate_photons


def test_unrelated_broad_lasers_do_not_trap(tmp_path):
    """Without a stable relative phase (lasers 5 MHz wide, not in one group) the Raman
    coherence dies and no dark state forms (Arimondo 1996, section on laser
    line widths): the density matrix gives the rate-equation shares."""
    setup = lambda_case(tmp_path, p1=0.2, p2=0.6, waist=2.0, speed=20.0, widths=(5.0, 5.0),
                        group=(None, None))
    y = final_states(CoherentModel(setup), CoherentPropagator(), 20.0, per_waist=16)
    r = final_states(RateModel(setup), ExponentialPropagator(), 20.0, per_waist=16)
    assert abs(y[0] - r[0]) < 2e-3


# -- reduction to the rate equations -------------------------------------------------------

def test_level_mode_reduces_to_rate_equations(tmp_path):
    """With laser line widths far above the natural width the optical coherences follow
    the populations adiabatically and the density matrix gives the rate equations
    (e.g. Foot, section 7.3; common practice): here with unequal degeneracies
    (J = 0 -> 1), so the level-mode coupling's incoherent share is exercised too."""
    scheme = scheme_doc([level("g", 0, 0), level("m", 500, 1), level("e", 20000, 1)],
                        [decay("e", "g", A_per_s=2e6), decay("e", "m", A_per_s=1e6)])
    source = {"kind": "monoenergetic", "speed_m_s": 300.0, "initial": {"g": 1.0}}
    doc = setup_doc("m", source, [beam("pump", "g", "e", 5.0, 1.0, linewidth_MHz=300.0,
                                       detuning_MHz=20.0)])
    setup = load_setup(write_case(tmp_path, scheme, doc))
    y = final_states(CoherentModel(setup), CoherentPropagator(), 300.0)
    r = final_states(RateModel(setup), ExponentialPropagator(), 300.0)
    assert 0.05 < r[1] < 0.95  # something happens
    assert np.max(np.abs(y[:4] - r[:4])) < 1e-4


def test_rb87_reduces_to_rate_equations(tmp_path):
    """Sublevel mode, the same with unrelated lasers broader than the excited hyperfine
    splitting (817 MHz), so that no coherence outlives the pumping (common practice;
    narrower lasers leave the coherence between F' = 1 and F' = 2, whose interference
    the rate equations miss, at 1e-4 .. 1e-3 here)."""
    setup = rb87_case(tmp_path, power_mW=5.0, group=None, widths=(2000.0, 2000.0), speed=300.0)
    model = CoherentModel(setup)
    S = model.n_states
    y = final_states(model, CoherentPropagator(), 300.0)[:S]
    r = final_states(RateModel(setup), ExponentialPropagator(), 300.0)[:S]
    assert r[7] > 0.3  # the stretched state fills
    assert np.max(np.abs(y - r)) < 1e-4


# -- the check on every run and the coherent mode -------------------------------------------

def test_every_run_flags_coherent_trapping(tmp_path):
    """Phase-related sigma+ pump and repump trap atoms in the m = 0 dark pair (the case
    the rate equations get wrong); a run says so, names the cause and the fix."""
    setup = rb87_case(tmp_path, power_mW=0.02, speed=150.0, waist=2.0, B_gauss=1.0)
    check = simulate(setup).numerics.coherence
    assert check["largest_difference"] > 0.05 and not check["within_tolerance"]
    assert check["cause"] == "coherent trapping"
    assert "density_matrix" in check["warning"]
    off = simulate(setup.with_value("numerics.coherence_check", "off")).numerics
    assert off.coherence is None and "coherence" not in off.to_dict()


def test_density_matrix_mode_runs_the_ensemble(tmp_path):
    setup = lambda_case(tmp_path, p1=0.2, p2=0.6, waist=2.0, speed=20.0)
    dm = simulate(setup.with_value("numerics.equations", "density_matrix"))
    assert dm.numerics.solver == "density_matrix" and dm.numerics.coherence is None
    w1, w2 = (2 * math.pi * K.c / d.wavelength for d in setup.scheme.decays)
    ratio = (0.6 / w2 ** 3) / (0.2 / w1 ** 3)
    pa, pb = dm.final_populations["a"], dm.final_populations["b"]
    assert pa / pb == pytest.approx(ratio, rel=1e-3)
    assert abs(sum(dm.final_populations.values()) - 1) < 1e-9
