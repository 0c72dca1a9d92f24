"""Probe signal and the next stage, against closed forms (docs/measurement.md)."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import erf

import pumpsim
from pumpsim import constants as K
from pumpsim.probe import measurement_report, solid_angle

from builders import beam, decay, level, scheme_doc, write_case

LAMBDA_NM = 500.0  # an invented line
A = 2.0e7  # 1/s


def two_level(tmp_path, source, beams, extra=None, numerics=None, target="g"):
    """g (J=0) and e (J=0, equal degeneracies) joined by one line; invented numbers."""
    scheme = scheme_doc([level("g", 0, 0), level("e", 1e7 / LAMBDA_NM, 0)],
                        [decay("e", "g", A_per_s=A)])
    doc = {"scheme": "scheme.toml", "target": target, "source": source, "beam": beams}
    if numerics:
        doc["numerics"] = numerics
    doc.update(extra or {})
    if not beams:
        del doc["beam"]
    return pumpsim.load_setup(write_case(tmp_path, scheme, doc))


def test_photons_per_atom_two_level_probe_matches_steady_state(tmp_path):
    # A slow atom crossing a wide probe follows the steady state at every point:
    # excited fraction (s/2) / (1 + s + (2 delta/Gamma)^2), s = I / I_sat, with
    # I_sat = hbar omega Gamma / (2 sigma0) and, for equal degeneracies (isotropic
    # average of a two-level atom), sigma0 = lambda^2 / (2 pi): C. J. Foot, Atomic
    # Physics (OUP 2005), ch. 7 (steady state and saturation), from memory. The
    # photons are Gamma times the time spent excited; the detector sees the share
    # Omega / 4 pi times its efficiency, Omega = 2 pi (1 - cos asin NA) (a cone).
    v, waist, power, detuning = 4.0, 2e-3, 2e-3, 2e6
    NA, eff = 0.3, 0.4
    probe = beam("probe", "g", "e", power * 1e3, waist * 1e3, role="probe", collection_NA=NA,
                 detection_efficiency=eff, detuning_MHz=detuning / 1e6)
    setup = two_level(tmp_path, {"kind": "monoenergetic", "speed_m_s": v, "initial": {"g": 1.0}},
                      [probe], numerics={"tolerance": 1e-6})
    result = pumpsim.simulate(setup)
    lam = LAMBDA_NM * 1e-9
    omega = 2 * math.pi * K.c / lam
    sigma0 = lam ** 2 / (2 * math.pi)
    isat = K.hbar * omega * A / (2 * sigma0)
    peak = 2 * power / (math.pi * waist * waist)
    x = (2 * 2 * math.pi * detuning / A) ** 2

    def excited(z):
        s = peak / isat * math.exp(-2 * z * z / waist ** 2)
        return 0.5 * s / (1 + s + x)

    photons = A / v * quad(excited, -5 * waist, 5 * waist, epsabs=0, epsrel=1e-10)[0]
    assert result.photons_per_atom["probe"] == pytest.approx(photons, rel=2e-3)
    report = measurement_report(result, pumpsim.simulate)["probes"]["probe"]
    share = (1 - math.sqrt(1 - NA ** 2)) / 2 * eff
    assert solid_angle(setup.beam("probe")) == pytest.approx(2 * math.pi * (1 - math.cos(math.asin(NA))))
    assert report["detected_per_atom"] == pytest.approx(photons * share, rel=2e-3)
    assert report["gain"] == pytest.approx(1.0)  # no pump: nothing to gain


def effusive_below(v, T, mass):
    """Flux share of an effusive beam below speed v: the integral of
    v^3 exp(-m v^2 / 2 kT), N. F. Ramsey, Molecular Beams (OUP 1956), ch. II,
    in closed form 1 - (1 + x^2) exp(-x^2), x = v / sqrt(2 kT/m)."""
    x2 = mass * v * v / (2 * K.kB * T)
    return 1 - (1 + x2) * math.exp(-x2)


@pytest.mark.parametrize("v_c", [60.0, 250.0, 600.0])
def test_capture_fraction_matches_effusive_beam_below_a_speed(tmp_path, v_c):
    T, mass_u = 500.0, 40.0
    setup = two_level(tmp_path, {"kind": "effusive", "temperature_K": T,
                                 "initial": {"g": 1.0}}, [],
                      extra={"next_stage": {"capture_speed_m_s": v_c}},
                      numerics={"start_mm": -1.0, "end_mm": 1.0})
    result = pumpsim.simulate(setup)
    stage = measurement_report(result, pumpsim.simulate)["next_stage"]
    expected = effusive_below(v_c, T, mass_u * K.amu)
    assert stage["captured_flux_share"] == pytest.approx(expected, rel=1e-6)
    assert stage["captured_target_fraction"] == pytest.approx(expected, rel=1e-6)


def test_aperture_passes_the_normal_share_of_a_diverging_beam(tmp_path):
    # Without a pump an atom at the axis passes a radius-R aperture at distance D when
    # |a| D <= R: share erf(R / (sqrt(2) sigma D)) of a normal angle distribution
    # (common practice, no source).
    sigma, R, D = 3e-3, 2e-3, 0.5
    setup = two_level(tmp_path, {"kind": "monoenergetic", "speed_m_s": 300.0,
                                 "divergence_rms_mrad": sigma * 1e3, "initial": {"g": 1.0}}, [],
                      extra={"next_stage": {"aperture_mm": R * 1e3,
                                            "aperture_distance_mm": D * 1e3}},
                      numerics={"start_mm": -1.0, "end_mm": 1.0})
    stage = measurement_report(pumpsim.simulate(setup), pumpsim.simulate)["next_stage"]
    assert stage["passing_aperture_fraction"] == pytest.approx(erf(R / (math.sqrt(2) * sigma * D)),
                                                               rel=1e-9)


def test_probe_keys_are_checked(tmp_path):
    src = {"kind": "monoenergetic", "speed_m_s": 100.0, "initial": {"g": 1.0}}
    with pytest.raises(pumpsim.InputError, match="collection_sr or collection_NA"):
        two_level(tmp_path, src, [beam("p", "g", "e", 1.0, 1.0, role="probe",
                                       detection_efficiency=0.5)])
    with pytest.raises(pumpsim.InputError, match="only a probe"):
        two_level(tmp_path, src, [beam("p", "g", "e", 1.0, 1.0, collection_NA=0.2)])
    with pytest.raises(pumpsim.InputError, match="aperture_distance_mm"):
        two_level(tmp_path, src, [], extra={"next_stage": {"aperture_mm": 2.0}},
                  numerics={"start_mm": -1.0, "end_mm": 1.0})
