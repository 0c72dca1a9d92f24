"""Survey: the error estimate against the true error, where refinement is hardest.

Each case runs at the default tolerance (1e-4) and again at 1e-5 with room for
as many nodes as that needs; the tighter run stands in for the exact answer
(self-convergence, common practice, no source). Every result the engine calls
converged must be within its own error estimate of the tighter one, whose own
estimate is added as the reference's uncertainty. Cases: beams at 30 to 90
degrees, divergences up to 20 mrad, sources wider than the pump, very slow and
very fast atoms, and 1 ns lifetimes over a 60 mm path.

Marked ``slow``; ``python -m pytest -q -m slow tests/test_error_survey.py -s``
prints the table (error, estimate, their ratio, seconds).
"""

import math

import pytest

import pumpsim
from builders import beam, decay, level, scheme_doc, setup_doc, write_case

pytestmark = pytest.mark.slow

# An invented species (no real atom): g (J=0), target m (J=1) at 1000 cm^-1, e (J=1) at
# 20000 cm^-1 (a 500 nm line) decaying 60 % to g and 40 % to m; m decays to g when given
# a lifetime.
E_CM = 20000.0
LAM = 1e-2 / E_CM


def scheme(e_life=2e-8, m_life=None):
    levels = [level("g", 0.0, 0), level("m", 1000.0, 1, m_life), level("e", E_CM, 1, e_life)]
    decays = [decay("e", "g", branching=0.6), decay("e", "m", branching=0.4)]
    if m_life is not None:
        decays.append(decay("m", "g", branching=1.0))
    return scheme_doc(levels, decays, mass_u=40.0)


def effusive(T=1000.0, **extra):
    return dict({"kind": "effusive", "temperature_K": T, "initial": {"g": 1.0}}, **extra)


def resonant_MHz(speed, angle_deg):
    """Detuning that makes atoms of ``speed`` resonant with a beam at ``angle_deg``
    (first-order Doppler shift v cos(theta) / lambda)."""
    return speed * math.cos(math.radians(angle_deg)) / LAM * 1e-6


CASES = {
    "30 deg, 4 mrad": (scheme(), effusive(divergence_rms_mrad=4.0, width_rms_mm=1.0),
                       [beam("pump", "g", "e", 1.0, 1.0, angle_deg=30.0,
                             detuning_MHz=resonant_MHz(600.0, 30.0))], {}),
    "60 deg, 10 mrad": (scheme(), effusive(divergence_rms_mrad=10.0, width_rms_mm=1.0),
                        [beam("pump", "g", "e", 2.0, 1.0, angle_deg=60.0, passes=2,
                              detuning_MHz=resonant_MHz(400.0, 60.0))], {}),
    "90 deg, 20 mrad": (scheme(), effusive(divergence_rms_mrad=20.0, width_rms_mm=0.5),
                        [beam("pump", "g", "e", 1.0, 1.0)], {}),
    "45 deg, 20 mrad, source 3x the pump": (
        scheme(), effusive(divergence_rms_mrad=20.0, width_rms_mm=1.5),
        [beam("pump", "g", "e", 5.0, 1.0, angle_deg=45.0, waist_across_mm=0.5,
              detuning_MHz=resonant_MHz(500.0, 45.0))], {}),
    "source 2x the pump, saturated": (
        scheme(), effusive(divergence_rms_mrad=2.0, width_rms_mm=2.0),
        [beam("pump", "g", "e", 20.0, 1.0)], {}),
    "source 10x the pump": (
        scheme(), effusive(divergence_rms_mrad=2.0, width_rms_mm=3.0),
        [beam("pump", "g", "e", 5.0, 1.0, waist_across_mm=0.3)], {}),
    "slow, 30 m/s": (
        scheme(), {"kind": "gaussian", "speed_m_s": 30.0, "speed_spread_m_s": 3.0,
                   "divergence_rms_mrad": 5.0, "width_rms_mm": 0.5, "initial": {"g": 1.0}},
        [beam("pump", "g", "e", 0.01, 1.0)], {}),
    "fast, 3000 m/s": (
        scheme(), {"kind": "gaussian", "speed_m_s": 3000.0, "speed_spread_m_s": 300.0,
                   "divergence_rms_mrad": 5.0, "width_rms_mm": 0.5, "initial": {"g": 1.0}},
        [beam("pump", "g", "e", 10.0, 1.0, angle_deg=70.0,
              detuning_MHz=resonant_MHz(3000.0, 70.0))], {}),
    "1 ns over 60 mm": (
        scheme(e_life=1e-9, m_life=2e-6), effusive(T=1500.0, divergence_rms_mrad=4.0,
                                                   width_rms_mm=1.0),
        [beam("pump", "g", "e", 20.0, 1.0), beam("push", "g", "e", 5.0, 2.0,
                                                  position_mm=30.0, angle_deg=60.0)],
        {"start_mm": -5.0, "end_mm": 55.0}),
}
TIGHT = 1e-5
ROOM = 20_000_000  # max_nodes of the tighter runs


def run(tmp_path, name, tolerance):
    scheme_, source, beams, numerics = CASES[name]
    folder = tmp_path / f"tol_{tolerance:g}"
    folder.mkdir()
    doc = setup_doc("m", source, beams, dict(numerics, tolerance=tolerance, max_nodes=ROOM))
    return pumpsim.simulate(pumpsim.load_setup(write_case(folder, scheme_, doc)))


def true_error(result, reference):
    """Largest difference in the quantities the estimate covers: populations (absolute),
    photons (relative above one photon)."""
    pops = max(abs(result.final_populations[k] - p)
               for k, p in reference.final_populations.items())
    photons = max(abs(result.photons_per_atom[b] - n) / max(1.0, abs(n))
                  for b, n in reference.photons_per_atom.items())
    return max(pops, photons)


@pytest.mark.parametrize("name", list(CASES))
def test_converged_results_are_within_their_estimate(tmp_path, name):
    result = run(tmp_path, name, 1e-4)
    reference = run(tmp_path, name, TIGHT)
    n, ref = result.numerics, reference.numerics
    error, estimate = true_error(result, reference), n.error_estimate["total"]
    print(f"\n{name:40s} error {error:.2e} estimate {estimate:.2e} "
          f"ratio {error / estimate:.2f}  converged {n.converged}  "
          f"{n.seconds:.1f} s (reference {ref.seconds:.1f} s, estimate "
          f"{ref.error_estimate['total']:.1e}, converged {ref.converged})")
    assert ref.converged, ref.warnings()
    if n.converged:
        assert error <= estimate + ref.error_estimate["total"], (error, n.error_estimate)
