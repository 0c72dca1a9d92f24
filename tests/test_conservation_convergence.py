"""Population conservation under extreme parameters, and convergence where it is hardest.

Conservation: the rate equations move population between levels and into ``other`` and
never create or destroy it, so the populations sum to 1 and stay non-negative (a property
of any rate-equation generator: zero column sums, non-negative off-diagonal; common
practice, no source). The bar: sums within 1e-10, nothing below -1e-12,
for decay rate x transit time up to 1e6 and powers from 1e-9 mW to 10 W.

Convergence: the contract promises 1e-4 absolute in population at default numerics; a run
at a much tighter tolerance is the reference (self-convergence, common practice, no source).
"""

import math

import numpy as np
import pytest
from scipy.linalg import expm

import pumpsim
from pumpsim.expm import expm_stack
from builders import beam, decay, level, scheme_doc, setup_doc, write_case

POWERS_MW = (1e-9, 1e-3, 10.0, 1e4)  # 1 pW to 10 W


def five_level(lifetime):
    """g, m, d stable; e and f short-lived with leaks to each other's ground and to other."""
    return scheme_doc(
        [level("g", 0, 1), level("m", 700, 2), level("d", 1400, 0),
         level("e", 19000, 2, lifetime), level("f", 21000, 1, 3 * lifetime)],
        [decay("e", "g", branching=0.6), decay("e", "m", branching=0.3),
         decay("e", "d", branching=0.05), decay("f", "g", branching=0.5),
         decay("f", "d", branching=0.45)], mass_u=30.0)


_RUNS = {}


def extreme_runs(tmp_path_factory, stiffness):
    """Runs over all powers and two waists at decay rate x transit time = ``stiffness``
    (lifetime 1 ns, transit time w/v with w = 1 mm; the 0.05 mm focus is 20 times less
    stiff in decay but reaches ~2.5e9 W/m^2 at 10 W). Returns [(label, result)], cached
    so that the tests below share the runs."""
    if stiffness in _RUNS:
        return _RUNS[stiffness]
    v = 1e9 * 1e-3 / stiffness
    out = []
    for P in POWERS_MW:
        for w in (1.0, 0.05):
            folder = tmp_path_factory.mktemp("extreme")
            setup = setup_doc(
                "m", {"kind": "monoenergetic", "speed_m_s": v, "divergence_rms_mrad": 1.0,
                      "initial": {"g": 0.5, "d": 0.5}},
                [beam("pump", "g", "e", P, w, passes=3, detuning_MHz=20.0),
                 beam("repump", "d", "f", P, w, position_mm=0.5 * w, angle_deg=70.0)],
                numerics={"tolerance": 1e-3})
            out.append((f"v={v:g} m/s P={P:g} mW w={w:g} mm", pumpsim.simulate(
                pumpsim.load_setup(write_case(folder, five_level(1e-9), setup)))))
    _RUNS[stiffness] = out
    return out


def population_errors(result):
    L = len(result.levels)
    per_node = result.nodes.values[:, :L]
    sums = np.concatenate([per_node.sum(axis=1), result.profile.sum(axis=1),
                           [sum(result.final_populations.values())]])
    lowest = min(per_node.min(), result.profile.min(), min(result.final_populations.values()))
    return float(np.abs(sums - 1).max()), float(lowest)


def test_population_conserved_at_stiffness_1e4(tmp_path_factory):
    for label, result in extreme_runs(tmp_path_factory, 1e4):
        assert population_errors(result)[0] < 1e-10, label
        assert result.numerics.conservation_error < 1e-10, label


@pytest.mark.parametrize("stiffness", [1e2, 1e4, 1e6])
def test_population_never_negative(tmp_path_factory, stiffness):
    for label, result in extreme_runs(tmp_path_factory, stiffness):
        assert population_errors(result)[1] > -1e-12, label


def test_population_conserved_at_stiffness_1e6_and_10_W(tmp_path_factory):
    worst = max(population_errors(r)[0] for _, r in extreme_runs(tmp_path_factory, 1e6)
                + extreme_runs(tmp_path_factory, 1e2))
    assert worst < 1e-10


@pytest.mark.xfail(strict=True, reason=(
    "known limit of expm_stack alone: its column sums drift as 2**s * eps over s squarings "
    "(~5e-10 at rate x step = 1e6); the exponential propagator projects the drift off the "
    "population sum after each step, which test_population_conserved_at_stiffness_1e6_and_10_W "
    "checks"))
def test_expm_stack_keeps_column_sums_of_stiff_generators():
    mus = np.geomspace(1e3, 1e6, 13)  # rate x step; several of these lose 1e-12 .. 5e-10
    X = np.zeros((len(mus), 2, 2))
    X[:, 0, 0], X[:, 1, 0] = -mus, mus  # state 0 decays into state 1
    E = expm_stack(X)
    for Xi in X:  # the general-purpose reference conserves to round-off
        assert np.abs(expm(Xi).sum(axis=0) - 1).max() < 1e-14
    assert np.abs(E.sum(axis=1) - 1).max() < 1e-13


def test_expm_stack_matches_scipy_expm_on_moderate_generators():
    """Random rate generators with extra non-negative columns, against scipy.linalg.expm
    (Al-Mohy and Higham 2009; general-purpose reference)."""
    rng = np.random.default_rng(7)
    X = rng.uniform(0, 1, (50, 5, 5)) * rng.choice([0.1, 3.0, 40.0], (50, 1, 1))
    X[:, :, 4] = rng.uniform(0, 1, (50, 5))  # an augmented column, as the propagator uses
    X[:, 4, :] = 0
    idx = np.arange(4)
    X[:, idx, idx] = 0
    X[:, idx, idx] = -X[:, :4, :4].sum(axis=1) - rng.uniform(0, 1, (50, 4))  # leaks
    E = expm_stack(X)
    for Ei, Xi in zip(E, X):
        ref = expm(Xi)
        assert np.allclose(Ei, ref, rtol=1e-12, atol=1e-14 * np.abs(ref).max())
    assert (E >= 0).all()


# -- convergence where it is hardest ----------------------------------------------------

LAM = 1.0 / (100.0 * 20000.0)


def three_level(b, lifetime):
    return scheme_doc([level("g", 0, 0), level("m", 1000, 1), level("e", 20000, 1, lifetime)],
                      [decay("e", "g", branching=1 - b), decay("e", "m", branching=b)],
                      mass_u=50.0)


HARD = {
    # an effusive beam crossed at 45 deg, tuned to 300 m/s: a velocity class ~10 m/s wide
    "angled-narrow-velocity-class": (
        three_level(0.3, 2e-8),
        {"kind": "effusive", "temperature_K": 900.0, "initial": {"g": 1.0}},
        beam("pump", "g", "e", 5.0, 1.0, angle_deg=45.0,
             detuning_MHz=300.0 * math.cos(math.radians(45.0)) / LAM * 1e-6), 1e-6),
    # Doppler spread k s cos(theta) = 6.3e7/s equal to the natural width G = 6.25e7/s
    "doppler-spread-equals-line-width": (
        three_level(0.3, 1.6e-8),
        {"kind": "gaussian", "speed_m_s": 500.0, "speed_spread_m_s": 10.0,
         "initial": {"g": 1.0}},
        beam("pump", "g", "e", 0.05, 1.0, angle_deg=60.0, detuning_MHz=500.0 * 0.5 / LAM * 1e-6),
        1e-6),
    # a near-cycling push beam on an effusive beam: deflection ~ photons / v, slow atoms rule
    "slow-atoms-dominate-deflection": (
        three_level(0.01, 1e-8),
        {"kind": "effusive", "temperature_K": 1500.0, "initial": {"g": 1.0}},
        beam("push", "g", "e", 5.0, 2.0), 1e-5),  # its grid at 1e-6 costs ~15 s
}


@pytest.mark.parametrize("name", list(HARD))
def test_default_tolerance_is_within_1e4_of_a_tight_run(tmp_path, name):
    scheme, source, pump, tight = HARD[name]
    setup = pumpsim.load_setup(write_case(tmp_path, scheme, setup_doc("m", source, [pump])))
    default = pumpsim.simulate(setup)
    reference = pumpsim.simulate(setup.with_value("numerics.tolerance", tight))
    assert default.numerics.tolerance == 1e-4 and default.numerics.converged
    assert reference.numerics.converged
    for lid, p in reference.final_populations.items():
        assert default.final_populations[lid] == pytest.approx(p, abs=1e-4), lid
    name_ = pump["name"]
    assert default.photons_per_atom[name_] == pytest.approx(
        reference.photons_per_atom[name_], rel=1e-4)
    assert default.deflection[name_] == pytest.approx(reference.deflection[name_], rel=1e-4)
    # the error estimate is honest: the actual error is not far beyond it
    actual = max(abs(default.final_populations[k] - p)
                 for k, p in reference.final_populations.items())
    assert actual <= 10 * default.numerics.error_estimate["total"] + 1e-6


def test_demo_at_default_tolerance_is_within_1e4_of_a_tight_run():
    # The engine stops refining once its summed error estimate is within the tolerance;
    # the answer must still be that close to a run at a tolerance ten times tighter.
    from pumpsim.demo import demo_setup_path

    setup = pumpsim.load_setup(demo_setup_path())
    default = pumpsim.simulate(setup)
    reference = pumpsim.simulate(setup.with_value("numerics.tolerance", 1e-5))
    assert default.numerics.converged and reference.numerics.converged
    assert default.numerics.error_estimate["total"] <= 1e-4
    for lid, p in reference.final_populations.items():
        assert default.final_populations[lid] == pytest.approx(p, abs=1e-4), lid
    for name, n in reference.photons_per_atom.items():
        assert default.photons_per_atom[name] == pytest.approx(n, rel=1e-4), name


def test_refinement_goes_on_when_the_rules_alone_exceed_the_tolerance():
    # The demo's pump at 30 degrees at 3e-5: after the first round the angle and offset
    # changes alone exceed the tolerance while the speed part is the largest. Refinement
    # must go on (it stopped there, at 1548 of 2e6 nodes, advising to raise max_nodes)
    # and end within its estimate of a run three times tighter (self-convergence, common
    # practice, no source).
    from pumpsim.demo import demo_setup_path

    setup = (pumpsim.load_setup(demo_setup_path()).with_value("beam.pump.angle_deg", 30.0)
             .with_value("numerics.max_nodes", 2000000))
    r = pumpsim.simulate(setup.with_value("numerics.tolerance", 3e-5))
    assert r.numerics.converged, r.numerics.warnings()
    reference = pumpsim.simulate(setup.with_value("numerics.tolerance", 1e-5))
    assert reference.numerics.converged
    assert abs(r.transfer_fraction - reference.transfer_fraction) <= (
        r.numerics.error_estimate["total"] + reference.numerics.error_estimate["total"])
