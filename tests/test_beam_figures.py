"""Per-beam figures of a run: recoil velocity, recoil heating, transit time and
width, Doppler width from the divergence, peak pumping rate; and what `run`
writes of them (text, JSON, HDF5, the populations figure)."""

import json
import math

import h5py
import numpy as np
import pytest
import scipy.constants as sc
from scipy.optimize import brentq
from scipy.stats import norm

import pumpsim
from pumpsim.beam_figures import (doppler_width, recoil_velocity, transit_time,
                                  transit_width)
from pumpsim.cli import main
from sizing_fixtures import three_level


def test_recoil_velocity_of_published_lines():
    # D. A. Steck, "Sodium D Line Data" and "Rubidium 87 D Line Data" (recoil
    # velocity of the D2 line; values from memory): Na 2.9461 cm/s at 589.158 nm,
    # Rb-87 5.8845 mm/s at 780.241 nm. Masses: 22.98977 u and 86.909180527 u.
    u = sc.physical_constants["atomic mass constant"][0]
    assert recoil_velocity(589.158e-9, 22.98977 * u) == pytest.approx(2.9461e-2, rel=2e-4)
    assert recoil_velocity(780.241e-9, 86.909180527 * u) == pytest.approx(5.8845e-3, rel=2e-4)


def emission_v2(b_g, b_t, mass):
    """Mean square recoil of the fixture's e decays: e -> g at 20000 cm^-1, e -> m at
    19000 cm^-1, and the rest (unlisted) taken at the pump's 20000 cm^-1."""
    v_g = sc.h / (mass * 1e-2 / 20000.0)
    v_m = sc.h / (mass * 1e-2 / 19000.0)
    return (b_g + (1 - b_g - b_t)) * v_g**2 + b_t * v_m**2


def test_recoil_heating_is_a_random_walk(tmp_path):
    # C. J. Foot, "Atomic Physics", 2005, section 9.3.1: N spontaneous photons in
    # random directions give a spread of sqrt(N/3) v_rec along any one axis (isotropic
    # emission: <cos^2> = 1/3); N absorptions from one beam, Poisson-distributed,
    # add N v_rec^2 along it. With a single speed and the beam at 90 degrees, the
    # ensemble variance is the mean photon count times these (it is linear in N).
    b_g, b_t = 0.5, 0.3
    setup = three_level(tmp_path, b_g=b_g, b_t=b_t, power=0.5, tol=1e-4)
    r = pumpsim.simulate(setup)
    N = r.photons_per_atom["pump"]
    assert N > 1  # a few photons each: the spread is not zero
    m = setup.scheme.mass
    v_abs = sc.hbar * (2 * math.pi * 20000.0 * 100) / m  # hbar k / m at 20000 cm^-1
    v_em2 = emission_v2(b_g, b_t, m)
    f = r.beam_figures()["pump"]
    assert f["recoil_velocity"] == pytest.approx(v_abs, rel=1e-9)
    assert f["heating_velocity_y"] == pytest.approx(math.sqrt(N * v_em2 / 3), rel=1e-6)
    assert f["heating_velocity_x"] == pytest.approx(math.sqrt(N * (v_abs**2 + v_em2 / 3)),
                                                    rel=1e-6)
    assert f["heating_angle_y"] == pytest.approx(f["heating_velocity_y"] / 500.0, rel=1e-6)
    # and the mean deflection of one pass is N v_rec / v (the figure it complements)
    assert r.deflection["pump"] == pytest.approx(N * v_abs / 500.0, rel=1e-6)


def test_random_walk_against_sampled_photons():
    # The sqrt(N/3) law itself, against isotropic directions drawn with numpy
    # (uniform cos(theta) on [-1, 1]); Foot 2005, section 9.3.1.
    rng = np.random.default_rng(1)
    N, atoms = 40, 20000
    cos = rng.uniform(-1, 1, size=(atoms, N))
    spread = cos.sum(axis=1).std()
    assert spread == pytest.approx(math.sqrt(N / 3), rel=0.02)


def test_transit_time_and_width_against_a_fourier_transform():
    # The field an atom sees crossing a Gaussian beam of 1/e^2 intensity radius w at
    # speed v goes as exp(-(v t / w)^2); the FWHM of its power spectrum, from numpy's
    # FFT, is the transit-time width (W. Demtroder, "Laser Spectroscopy", vol. 1,
    # section 3.4: about 2.4 v / w in angular frequency, from memory).
    w, v = 1.5e-3, 600.0
    t = np.linspace(-40 * w / v, 40 * w / v, 2**16)
    field = np.exp(-(v * t / w) ** 2)
    spec = np.abs(np.fft.rfft(field)) ** 2
    nu = np.fft.rfftfreq(t.size, t[1] - t[0])
    half = brentq(lambda x: np.interp(x, nu, spec) - spec[0] / 2, nu[0], nu[-1] / 4)
    assert transit_width(w, math.pi / 2, v) == pytest.approx(2 * half, rel=1e-3)
    assert 2 * math.pi * 2 * half == pytest.approx(2.355 * v / w, rel=1e-3)
    # the time to cross the full 1/e^2 width, and the projected width at 60 degrees
    assert transit_time(w, math.pi / 2, v) == pytest.approx(2 * w / v)
    assert transit_time(w, math.pi / 3, v) == pytest.approx(2 * w / v / math.sin(math.pi / 3))


def test_doppler_width_from_divergence_against_scipy():
    # Atoms at angle a to the axis see the laser shifted by v sin(theta) a / lambda
    # (first-order Doppler effect); a Gaussian spread of angles gives a Gaussian of
    # shifts whose FWHM is found here with scipy.stats.norm and a root finder.
    v, lam, sigma_a, theta = 600.0, 450e-9, 4e-3, math.radians(80)
    sd = v * math.sin(theta) * sigma_a / lam
    pdf = norm(scale=sd).pdf
    half = brentq(lambda x: pdf(x) - pdf(0) / 2, 0, 10 * sd)
    assert doppler_width(sigma_a, theta, v, lam) == pytest.approx(2 * half, rel=1e-9)


def test_peak_rate_predicts_weak_pumping(tmp_path):
    # Weak pumping of g -> e (e to g with b_g, to the target with b_t, the rest to
    # other): adiabatic elimination of e gives p_g = exp(-(1 - b_g) K) with K the
    # excitations per pass, R_peak sqrt(pi/2) w / v for a Gaussian beam, and T =
    # b_t / (1 - b_g) (1 - p_g) (standard rate-equation result, e.g. C. J. Foot,
    # "Atomic Physics", 2005, ch. 7). The run's excitations_per_pass must predict it.
    b_g, b_t = 0.5, 0.3
    setup = three_level(tmp_path, b_g=b_g, b_t=b_t, power=0.005, tol=1e-5)  # mW
    r = pumpsim.simulate(setup)
    f = r.beam_figures()["pump"]
    K = f["excitations_per_pass"]
    assert 0.1 < K < 3
    expected = b_t / (1 - b_g) * (1 - math.exp(-(1 - b_g) * K))
    assert r.transfer_fraction == pytest.approx(expected, rel=5e-3)
    # the rate itself: sigma0 I_peak / (hbar omega), I_peak = 2 P / (pi w^2)
    lam = 1e-2 / 20000.0
    sigma0 = 3 * lam**2 / (2 * math.pi) * b_g
    rate = sigma0 * (2 * 5e-6 / (math.pi * 1e-6)) / (sc.hbar * 2 * math.pi * sc.c / lam)
    assert f["peak_pump_rate"] == pytest.approx(rate, rel=1e-9)


def test_run_reports_figures_in_text_json_hdf5_and_plot(tmp_path, capsys):
    setup = three_level(tmp_path, power=0.5)
    out_h5, png = tmp_path / "r.h5", tmp_path / "z.png"
    assert main(["run", str(setup.path), "--json", "--out", str(out_h5),
                 "--plot", str(png)]) == 0
    d = json.loads(capsys.readouterr().out)
    f = d["beam_figures"]["pump"]
    assert f["transit_time_us"] == pytest.approx(2 * 1e-3 / 500.0 * 1e6)
    assert f["heating_velocity_y_mm_s"] > 0
    with h5py.File(out_h5) as h:
        g = h["results/beam_figures"]
        assert list(g.attrs["beams"]) == ["pump"]
        assert g["transit_time"].attrs["units"] == "us"
        assert g["transit_time"][0] == pytest.approx(f["transit_time_us"])
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert main(["run", str(setup.path)]) == 0
    text = capsys.readouterr().out
    assert "transit time" in text and "recoil heating" in text and "Doppler width" in text


def test_run_plot_refuses_a_non_figure_name_before_running(tmp_path, capsys):
    # exit 2 and one line naming the option (the project's rule for bad input)
    setup = three_level(tmp_path)
    assert main(["run", str(setup.path), "--plot", str(tmp_path / "z.txt")]) == 2
    err = capsys.readouterr().err
    assert "[--plot]" in err and "Traceback" not in err
