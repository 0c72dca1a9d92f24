"""Line constants, source distributions, beam profiles and thermal populations
against textbook formulas and general-purpose integrators (sources beside each check)."""

import math

import numpy as np
import pytest
from scipy import constants as C
from scipy import integrate

import pumpsim
from pumpsim.beam_shapes import shape_of
from pumpsim.lines import line
from pumpsim.model import initial_level_populations
from pumpsim.sources import Effusive, GaussianSpeeds
from builders import beam, decay, level, scheme_doc, setup_doc, write_case, write_toml

AMU = C.physical_constants["atomic mass constant"][0]


def load_scheme_doc(tmp_path, doc):
    return pumpsim.load_scheme(write_toml(tmp_path / "scheme.toml", doc))


# -- (c) cross-section and saturation intensity --------------------------------------


def test_info_says_which_isat_it_prints(tmp_path):
    """info's I_sat for J=0 -> J=1 is the degeneracy-averaged one, 1.5 times the two-level
    pi h c G / (3 lambda^3) (Foot, Atomic Physics, 2005, eq. 7.86; Steck's alkali D-line
    notes quote both), and info says so in words and in its JSON."""
    import json

    from test_fuzz_inputs import cli

    E_cm, lifetime = 16000.0, 2.6e-8
    path = write_toml(tmp_path / "scheme.toml", scheme_doc(
        [level("g", 0, 0), level("e", E_cm, 1)], [decay("e", "g", A_per_s=1 / lifetime)]))
    lam = 1 / (100 * E_cm)
    two_level = math.pi * C.h * C.c / (3 * lam**3 * lifetime)  # W/m^2
    rc, out, err = cli("info", path, "--json")
    assert rc == 0, err
    info = json.loads(out)
    assert info["decays"][0]["isat_mW_cm2"] == pytest.approx(1.5 * two_level * 0.1, rel=1e-9)
    assert "1.5 times the two-level value" in info["isat_definition"]
    rc, out, _ = cli("info", path)
    assert "averaged over the degenerate sublevels" in out

@pytest.mark.parametrize("E_cm, lifetime", [(16000.0, 2.6e-8), (24000.0, 5e-9), (12500.0, 1e-7)])
def test_sigma0_two_level_j0_j1_is_3_lambda2_over_2pi(tmp_path, E_cm, lifetime):
    """sigma0 = 3 lambda^2 / (2 pi) for J=0 -> J=1 with natural width
    (C. J. Foot, Atomic Physics, OUP 2005, chapter 7)."""
    scheme = load_scheme_doc(tmp_path, scheme_doc(
        [level("g", 0, 0), level("e", E_cm, 1)], [decay("e", "g", A_per_s=1 / lifetime)]))
    ln = line(scheme, "g", "e")
    lam = 1 / (100 * E_cm)  # vacuum wavelength from cm^-1 (spectroscopy convention)
    assert ln.wavelength == pytest.approx(lam, rel=1e-12)
    assert ln.sigma0() == pytest.approx(3 * lam**2 / (2 * math.pi), rel=1e-12)
    # natural line width: the FWHM of the Lorentzian is the decay rate 1/tau (Foot 2005)
    assert ln.gamma() == pytest.approx(1 / lifetime, rel=1e-12)


def test_sigma0_scales_with_branching_and_laser_width(tmp_path):
    """sigma0 is proportional to A_ki/gamma (model.md; Lorentzian area is conserved while the
    width grows, common practice): a 40 % branch and a laser as wide as the line each scale it."""
    lifetime = 2e-8
    scheme = load_scheme_doc(tmp_path, scheme_doc(
        [level("g", 0, 0), level("m", 500, 1), level("e", 20000, 1, lifetime)],
        [decay("e", "g", branching=0.4), decay("e", "m", branching=0.6)]))
    ln = line(scheme, "g", "e")
    lam = 1 / (100 * 20000.0)
    assert ln.sigma0() == pytest.approx(0.4 * 3 * lam**2 / (2 * math.pi), rel=1e-12)
    laser = 1 / (2 * math.pi * lifetime)  # Hz: adds 1/lifetime to the angular FWHM
    assert ln.sigma0(laser) == pytest.approx(0.5 * ln.sigma0(), rel=1e-12)


def test_saturation_intensity_two_level_textbook(tmp_path):
    """For g_i = g_k, I_sat = hbar omega G / (2 sigma0) (Foot 2005, chapter 7)."""
    lifetime, E_cm = 3e-8, 15000.0
    scheme = load_scheme_doc(tmp_path, scheme_doc(
        [level("g", 0, 1), level("e", E_cm, 1)], [decay("e", "g", A_per_s=1 / lifetime)]))
    ln = line(scheme, "g", "e")
    lam = 1 / (100 * E_cm)
    sigma0 = lam**2 / (2 * math.pi)  # g_k/g_i = 1
    assert ln.saturation_intensity() == pytest.approx(
        C.hbar * 2 * math.pi * C.c / lam / lifetime / (2 * sigma0), rel=1e-12)


def test_saturation_intensity_gives_half_the_closed_line_maximum(tmp_path):
    """At I = I_sat a closed J=0 -> J=1 line holds half its largest upper population:
    with the steady state N_k = R/(R(1 + g_i/g_k) + G) (dN_k/dt = 0; common practice)
    and R = sigma0 I/(hbar omega)."""
    lifetime, E_cm = 3e-8, 15000.0
    scheme = load_scheme_doc(tmp_path, scheme_doc(
        [level("g", 0, 0), level("e", E_cm, 1)], [decay("e", "g", A_per_s=1 / lifetime)]))
    ln = line(scheme, "g", "e")
    R = ln.sigma0() * ln.saturation_intensity() / (C.hbar * ln.omega)
    G, ratio = 1 / lifetime, 1 / 3
    assert R / (R * (1 + ratio) + G) == pytest.approx(0.5 / (1 + ratio), rel=1e-12)


# -- (d) effusive flux-weighted mean speed -------------------------------------------

@pytest.mark.parametrize("T, mass_u", [(300.0, 4.0), (1150.0, 93.0), (2200.0, 200.0)])
def test_effusive_flux_weighted_mean_speed(T, mass_u):
    """<v> over the flux f(v) ~ v^3 exp(-m v^2/2kT) is sqrt(9 pi kB T / (8 m))
    (kinetic theory of effusive beams, N. F. Ramsey, Molecular Beams, OUP 1956)."""
    m = mass_u * AMU
    want = math.sqrt(9 * math.pi * C.k * T / (8 * m))
    src = Effusive(T, m)
    assert src.mean() == pytest.approx(want, rel=1e-12)
    # the density the quadrature uses: normalised on its support, same mean (scipy quad)
    lo, hi = src.support()
    assert integrate.quad(src.density, lo, hi, epsrel=1e-12)[0] == pytest.approx(1, abs=1e-11)
    mean = integrate.quad(lambda v: v * src.density(v), lo, hi, epsrel=1e-12)[0]
    assert mean == pytest.approx(want, rel=1e-10)
    # and the modal flux speed is sqrt(3 kT/m) (Ramsey 1956): d/dv (v^3 e^{-v^2/2s^2}) = 0
    v = np.linspace(lo, hi, 200001)
    assert v[np.argmax(src.density(v))] == pytest.approx(math.sqrt(3 * C.k * T / m), rel=1e-4)


def test_gaussian_source_density_and_mean():
    """A normal density cut at v > 0: normalised, mean from scipy quad (general-purpose)."""
    src = GaussianSpeeds(120.0, 60.0)  # a fat cut, so the truncation matters
    lo, hi = src.support()
    f = lambda v: math.exp(-0.5 * ((v - 120.0) / 60.0) ** 2)
    norm = integrate.quad(f, 0, np.inf)[0]
    mean = integrate.quad(lambda v: v * f(v), 0, np.inf)[0] / norm
    assert src.mean() == pytest.approx(mean, rel=1e-10)
    assert integrate.quad(src.density, lo, hi, epsrel=1e-12)[0] == pytest.approx(1, abs=1e-10)


def test_effusive_ensemble_nodes_integrate_the_mean_speed(tmp_path):
    """The nodes a result was averaged over carry the flux weights: sum(w) = 1 and
    sum(w v) = sqrt(9 pi kB T / (8 m)) (Ramsey, Molecular Beams)."""
    T, mass_u = 1100.0, 88.0
    scheme = scheme_doc([level("g", 0, 0), level("m", 1000, 1), level("e", 20000, 1, 1e-8)],
                        [decay("e", "g", branching=0.5), decay("e", "m", branching=0.5)],
                        mass_u=mass_u)
    setup = setup_doc("m", {"kind": "effusive", "temperature_K": T, "divergence_rms_mrad": 2.0},
                      [beam("pump", "g", "e", 0.2, 1.0, angle_deg=70.0, detuning_MHz=300.0)],
                      numerics={"tolerance": 1e-3})
    result = pumpsim.simulate(pumpsim.load_setup(write_case(tmp_path, scheme, setup)))
    n = result.nodes
    want = math.sqrt(9 * math.pi * C.k * T / (8 * mass_u * AMU))
    assert n.weight.sum() == pytest.approx(1.0, abs=1e-10)
    assert float(n.weight @ n.v) == pytest.approx(want, rel=1e-9)
    assert (n.weight > 0).all() and (n.v > 0).all()
    # angles: Normal(0, 2 mrad), so the weighted mean square is (2 mrad)^2
    assert float(n.weight @ n.a**2) == pytest.approx(4e-6, rel=1e-9)
    # the means reported are the weighted node values
    L = len(result.levels)
    assert float(n.weight @ n.values[:, L - 2]) == pytest.approx(result.final_populations["e"],
                                                                  abs=1e-14)
    assert float(n.weight @ n.values[:, 1]) == pytest.approx(result.transfer_fraction, abs=1e-14)


# -- (e) Gaussian beam ----------------------------------------------------------------

def _setup_with_beam(tmp_path, **beam_keys):
    scheme = scheme_doc([level("g", 0, 0), level("e", 20000, 1, 1e-8)],
                        [decay("e", "g", A_per_s=1e8)])
    setup = setup_doc("e", {"kind": "monoenergetic", "speed_m_s": 300.0, "initial": {"g": 1.0}},
                      [beam("b", "g", "e", **beam_keys)])
    return pumpsim.load_setup(write_case(tmp_path, scheme, setup))


@pytest.mark.parametrize("P_mW, w_mm", [(40.0, 1.0), (0.5, 0.05), (2000.0, 12.0)])
def test_gaussian_peak_intensity_round_beam(tmp_path, P_mW, w_mm):
    """Peak intensity of a TEM00 beam of power P and 1/e^2 radius w: 2P/(pi w^2)
    (A. E. Siegman, Lasers, University Science Books 1986)."""
    setup = _setup_with_beam(tmp_path, power_mW=P_mW, waist_mm=w_mm)
    P, w = P_mW * 1e-3, w_mm * 1e-3
    assert shape_of(setup.beam("b")).peak_intensity == pytest.approx(2 * P / (math.pi * w**2),
                                                                    rel=1e-12)


def test_gaussian_profile_elliptical_and_angled(tmp_path):
    """Profile I0 exp(-2 u^2/w_a^2) exp(-2 y^2/w_c^2) with u = (z - z_b) sin(theta) the
    distance from the beam axis (Siegman 1986; geometry of model.md), and the intensity
    integrated over the beam's cross-section is the power (scipy dblquad)."""
    P, wa, wc, zb, theta = 0.03, 1.5e-3, 3e-3, 4e-3, math.radians(60.0)
    setup = _setup_with_beam(tmp_path, power_mW=P * 1e3, waist_mm=wa * 1e3,
                             waist_across_mm=wc * 1e3, position_mm=zb * 1e3, angle_deg=60.0)
    shape = shape_of(setup.beam("b"))
    assert shape.peak_intensity == pytest.approx(2 * P / (math.pi * wa * wc), rel=1e-12)
    z = zb + np.array([0.0, 0.5, -1.0, 2.0]) * wa / math.sin(theta)
    u = (z - zb) * math.sin(theta)
    assert np.allclose(shape.along(z), np.exp(-2 * u**2 / wa**2), rtol=1e-12, atol=0)
    # 1/e^2 at one waist from the axis (definition of w)
    assert float(shape.along(np.array([zb + wa / math.sin(theta)]))[0]) == pytest.approx(
        math.exp(-2), rel=1e-12)
    y = np.array([0.0, wc, 0.3 * wc])
    assert np.allclose(shape.across(y), np.exp(-2 * y**2 / wc**2), rtol=1e-12, atol=0)
    # power through the plane normal to k: dA = sin(theta) dz dy
    power = integrate.dblquad(
        lambda yy, zz: shape.peak_intensity * float(shape.along(np.array([zz]))[0])
        * float(shape.across(np.array([yy]))[0]) * math.sin(theta),
        zb - 8 * wa, zb + 8 * wa, -8 * wc, 8 * wc, epsrel=1e-10)[0]
    assert power == pytest.approx(P, rel=1e-8)
    # the integration range model.md asks for: z_b -/+ 4 w_a / sin(theta)
    lo, hi = shape.extent
    assert (lo, hi) == pytest.approx((zb - 4 * wa / math.sin(theta), zb + 4 * wa / math.sin(theta)),
                                     rel=1e-12)


# -- (h) thermal initial populations --------------------------------------------------

def test_boltzmann_thermal_populations(tmp_path):
    """N_i ~ g_i exp(-h c E_i / kB T) with the second radiation constant
    c2 = h c / kB (CODATA via scipy.constants; Boltzmann distribution, any statistical
    mechanics text)."""
    T = 1500.0
    levels = [level("g", 0, 2), level("a", 350.5, 1.5), level("b", 1200.0, 4),
              level("c", 5000.0, 0.5), level("e", 22000.0, 3, 1e-8)]
    scheme = scheme_doc(levels, [decay("e", "g", A_per_s=5e7), decay("e", "b", A_per_s=5e7)])
    setup = setup_doc("b", {"kind": "effusive", "temperature_K": T},
                      [beam("pump", "g", "e", 1.0, 1.0)])
    s = pumpsim.load_setup(write_case(tmp_path, scheme, setup))
    c2 = C.physical_constants["second radiation constant"][0] * 100  # cm K
    g = np.array([2 * lv["J"] + 1 for lv in levels])
    E = np.array([lv["energy_cm"] for lv in levels])
    want = g * np.exp(-c2 * E / T)
    want /= want.sum()
    got = initial_level_populations(s)
    assert np.allclose(got, want, rtol=1e-12, atol=1e-300)
    # ratio check in words: level b (J=4, 1200 cm^-1) against g (J=2)
    assert got[2] / got[0] == pytest.approx(9 / 5 * math.exp(-c2 * 1200 / T), rel=1e-12)


def test_explicit_initial_populations_are_used_as_given(tmp_path):
    """An explicit table is taken as written (files.md), levels not named start empty."""
    scheme = scheme_doc([level("g", 0, 0), level("m", 900, 1), level("e", 20000, 1, 1e-8)],
                        [decay("e", "g", A_per_s=1e8)])
    setup = setup_doc("m", {"kind": "monoenergetic", "speed_m_s": 500.0,
                            "initial": {"m": 0.25, "g": 0.75}},
                      [beam("pump", "g", "e", 1.0, 1.0)])
    s = pumpsim.load_setup(write_case(tmp_path, scheme, setup))
    assert np.array_equal(initial_level_populations(s), [0.75, 0.25, 0.0])
