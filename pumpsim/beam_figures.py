"""Figures of a run that physicists otherwise work out by hand, per beam (SI units).

- **Transit time**: time to cross the beam's full 1/e² width along the atomic
  beam, ``2 w_a / (v sin theta)``, at the flux-weighted mean speed.
- **Transit-time width**: FWHM of the spectrum an atom sees crossing the
  Gaussian beam. The field goes as ``exp(-(t/tau)^2)`` with
  ``tau = w_a / (v sin theta)``; its power spectrum is a Gaussian of FWHM
  ``2 sqrt(2 ln 2) / (2 pi tau)`` Hz (W. Demtröder, *Laser Spectroscopy*,
  vol. 1, section 3.4, from memory).
- **Doppler width from the divergence**: atoms at angle ``a`` to the axis see
  ``-k v (cos theta + a sin theta)`` (the model's detuning); a Gaussian spread
  of angles with rms ``sigma_a`` gives a Gaussian of rms
  ``v sin(theta) sigma_a / lambda`` Hz and FWHM ``2 sqrt(2 ln 2)`` times that.
- **Peak pumping rate**: absorption rate of an atom in the lower level at the
  beam's centre, on resonance, unsaturated: ``sigma0 I_peak / (hbar omega)``
  (the model's rate at zero detuning), and the excitations it gives in one
  pass, ``R sqrt(pi/2) tau``, the time integral of the Gaussian profile. In
  sublevel mode this is the line's degeneracy-averaged rate, not a sublevel's.
- **Recoil heating**: each absorbed photon kicks the atom by the recoil
  velocity ``hbar k / m`` along the wave vector, each spontaneous photon by
  the same size in a random direction. The mean kick is the deflection; the
  spread is a random walk (C. J. Foot, *Atomic Physics*, 2005, section 9.3.1):
  isotropic emission adds ``v_rec^2 / 3`` per photon to the variance along any
  axis, and absorptions counted as Poisson events add ``v_rec^2 sin^2 theta``
  along x (the transverse axis in the plane of atomic beam and lasers). With
  ``N`` photons: ``sqrt(N/3) v_rec`` across (y) and ``sqrt(N (sin^2 theta + 1/3))
  v_rec`` along x. Emission recoils use the upper level's listed decays
  (weighted by rate; unlisted decays at the pump's wavelength). ``N`` is the
  net absorbed photon count, so stimulated emission at strong saturation (which
  adds kicks of its own) is not counted: a lower bound there.
"""

import math

import numpy as np

from . import constants as K
from .beam_shapes import shape_of
from .lines import line
from .sources import speeds_of

FWHM_PER_RMS = 2 * math.sqrt(2 * math.log(2))  # Gaussian FWHM / rms


def recoil_velocity(wavelength, mass) -> float:
    """``hbar k / m`` = ``h / (m lambda)``, m/s."""
    return K.h / (mass * wavelength)


def transit_time(waist, angle, speed) -> float:
    """Time to cross the full 1/e² width ``2 w_a`` of a beam at ``angle``, s."""
    return 2 * waist / (speed * math.sin(angle))


def transit_width(waist, angle, speed) -> float:
    """Transit-time FWHM, Hz: ``2 sqrt(2 ln 2) v sin(theta) / (2 pi w_a)``."""
    return FWHM_PER_RMS * speed * math.sin(angle) / (2 * math.pi * waist)


def doppler_width(divergence_rms, angle, speed, wavelength) -> float:
    """Doppler FWHM, Hz, that a Gaussian spread of angles gives a beam at ``angle``."""
    return FWHM_PER_RMS * speed * math.sin(angle) * divergence_rms / wavelength


def emission_recoil_sq(scheme, upper, pump_wavelength, mass) -> float:
    """Rate-weighted mean of ``v_rec^2`` over the spontaneous decays of ``upper``."""
    total = scheme.total_rate(upper)
    acc = scheme.unlisted_rate(upper) * recoil_velocity(pump_wavelength, mass) ** 2
    for d in scheme.decays_from(upper):
        acc += d.rate * recoil_velocity(d.wavelength, mass) ** 2
    return acc / total


def heating_variance(setup, photons):
    """Per-node transverse velocity variances from recoil, m²/s².

    Parameters
    ----------
    setup : Setup
    photons : ndarray (n, B)
        Net absorbed photons per node and beam.

    Returns
    -------
    var_x, var_y : ndarray (n,)
    """
    photons = np.atleast_2d(photons)
    var_x = np.zeros(len(photons))
    var_y = np.zeros(len(photons))
    m = setup.scheme.mass
    for i, b in enumerate(setup.beams):
        ln = line(setup.scheme, b.lower, b.upper)
        absorb = recoil_velocity(ln.wavelength, m) ** 2 * math.sin(b.angle) ** 2
        emit = emission_recoil_sq(setup.scheme, b.upper, ln.wavelength, m) / 3
        var_x += photons[:, i] * (absorb + emit)
        var_y += photons[:, i] * emit
    return var_x, var_y


def beam_figures(setup, nodes=None, n_levels=None):
    """Per beam, the figures of the module docstring (SI units).

    Parameters
    ----------
    setup : Setup
    nodes : object, optional
        A result's quadrature nodes (``v``, ``weight``, ``values``); with them
        the recoil spread is the ensemble's (per-node photons), else left out.
    n_levels : int, optional
        Columns of ``nodes.values`` that are level populations.

    Returns
    -------
    dict
        Beam name -> dict, and ``"all beams"`` -> the combined recoil spread
        when ``nodes`` is given.
    """
    scheme, src = setup.scheme, setup.source
    v = speeds_of(src, scheme.mass).mean()
    out = {}
    B = len(setup.beams)
    per_node = None
    if nodes is not None:
        per_node = np.asarray(nodes.values)[:, n_levels:n_levels + B]
        w = np.asarray(nodes.weight)
        speed = np.asarray(nodes.v)
    for i, b in enumerate(setup.beams):
        ln = line(scheme, b.lower, b.upper)
        rate = ln.sigma0(b.linewidth) * shape_of(b).peak_intensity / (K.hbar * ln.omega)
        tau = b.waist / (v * math.sin(b.angle))
        d = {"mean_speed": v,
             "transit_time": transit_time(b.waist, b.angle, v),
             "transit_width": transit_width(b.waist, b.angle, v),
             "doppler_width_divergence": doppler_width(src.divergence_rms, b.angle, v,
                                                       ln.wavelength),
             "line_width": ln.gamma(b.linewidth) / (2 * math.pi),
             "peak_pump_rate": rate,
             "excitations_per_pass": rate * math.sqrt(math.pi / 2) * tau,
             "recoil_velocity": recoil_velocity(ln.wavelength, scheme.mass)}
        if per_node is not None:
            only = np.zeros_like(per_node)
            only[:, i] = per_node[:, i]
            d.update(_spread(setup, only, w, speed))
        out[b.name] = d
    if per_node is not None and B > 1:
        out["all beams"] = _spread(setup, per_node, w, speed)
    return out


def _spread(setup, photons, weight, speed):
    """Ensemble rms of the recoil velocity spread, and as an angle (divided by speed)."""
    var_x, var_y = heating_variance(setup, photons)
    return {"heating_velocity_x": math.sqrt(max(float(weight @ var_x), 0.0)),
            "heating_velocity_y": math.sqrt(max(float(weight @ var_y), 0.0)),
            "heating_angle_x": math.sqrt(max(float(weight @ (var_x / speed**2)), 0.0)),
            "heating_angle_y": math.sqrt(max(float(weight @ (var_y / speed**2)), 0.0))}


UNITS = {  # key -> (scale to file units, unit, label): for JSON, text and HDF5
    "mean_speed": (1.0, "m/s", "mean speed"),
    "transit_time": (1e6, "us", "transit time (1/e² width)"),
    "transit_width": (1e-6, "MHz", "transit-time width (FWHM)"),
    "doppler_width_divergence": (1e-6, "MHz", "Doppler width from divergence (FWHM)"),
    "line_width": (1e-6, "MHz", "line width with laser (FWHM)"),
    "peak_pump_rate": (1.0, "1/s", "peak pumping rate (unsaturated)"),
    "excitations_per_pass": (1.0, "1", "excitations per pass at the centre (unsaturated)"),
    "recoil_velocity": (1e3, "mm/s", "recoil velocity"),
    "heating_velocity_x": (1e3, "mm/s", "recoil heating, rms velocity along x"),
    "heating_velocity_y": (1e3, "mm/s", "recoil heating, rms velocity along y"),
    "heating_angle_x": (1e3, "mrad", "recoil heating, rms angle along x"),
    "heating_angle_y": (1e3, "mrad", "recoil heating, rms angle along y"),
}


def in_file_units(figures):
    """``{beam: {key_unit: value}}`` with each key carrying its unit suffix."""
    suffix = {"m/s": "m_s", "us": "us", "MHz": "MHz", "1/s": "per_s", "1": "",
              "mm/s": "mm_s", "mrad": "mrad"}
    out = {}
    for name, d in figures.items():
        out[name] = {}
        for k, v in d.items():
            scale, unit, _ = UNITS[k]
            out[name][k + ("_" + suffix[unit] if suffix[unit] else "")] = v * scale
    return out
