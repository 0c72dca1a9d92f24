"""The batched engine against scipy's Radau IIA (``scipy.integrate.solve_ivp``), atom by atom
and for a whole ensemble, on an invented six-level species with a two-pass angled pump and
a repump, atoms with angles and offsets.

The reference rate equations (``reference_rates.py``) are written from ``model.md`` alone and
share no code with ``pumpsim``; they run in time, the engine in z. Source of the reference:
scipy's general-purpose stiff integrator (E. Hairer and G. Wanner, *Solving Ordinary
Differential Equations II*, Springer 1996, Radau IIA of order 5).
"""


import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.special import roots_hermitenorm

import pumpsim
from pumpsim.ensemble import EnsembleIntegrator
from pumpsim.model import RateModel, initial_level_populations
from pumpsim.solvers import ExponentialPropagator
from builders import write_case
from reference_rates import ReferenceAtom
from six_level import six_level_scheme, six_level_setup

SOURCE = {"kind": "monoenergetic", "speed_m_s": 350.0, "divergence_rms_mrad": 3.0,
          "width_rms_mm": 0.3, "initial": {"g": 0.6, "h": 0.3, "d": 0.1}}
# (v m/s, a rad, y0 m): slow and fast atoms, on and off axis, either side in angle
NODES = [(150.0, 0.0, 0.0), (420.0, 4e-3, 3e-4), (900.0, -6e-3, 0.9e-3),
         (300.0, 2e-3, 0.0), (600.0, -1e-3, 1.5e-3)]


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("six")
    scheme, setup = six_level_scheme(), six_level_setup(SOURCE)
    return pumpsim.load_setup(write_case(folder, scheme, setup)), ReferenceAtom(scheme, setup)


def radau_final(ref, v, a, y0, initial, rtol, atol):
    """One atom with solve_ivp Radau and the exact Jacobian, from z_start to z_end."""
    z0, z1 = ref.z_range()
    y = np.zeros(ref.size)
    y[: ref.L] = initial
    M = ref.matrix_function(v, a, y0)
    sol = solve_ivp(lambda t, yy: M(t) @ yy, (z0 / v, z1 / v), y, method="Radau",
                    rtol=rtol, atol=atol, jac=lambda t, yy: M(t))
    assert sol.success, sol.message
    return sol.y[:, -1]


def test_engine_generator_is_the_model_md_rate_equations(case):
    """The engine's z-generator is the independent dN/dt matrix divided by v."""
    setup, ref = case
    model = RateModel(setup)
    v, a, y0 = (np.array(x) for x in zip(*NODES))
    problem = model.problem(v, a, y0)
    assert problem.y0.shape[1] == ref.size
    for z in (-2e-3, -0.3e-3, 0.0, 1.1e-3, 3.0e-3, 3.4e-3):
        G = problem.generator(z)
        for n, (vn, an, yn) in enumerate(NODES):
            want = ref.matrix(z / vn, vn, an, yn) / vn
            assert np.allclose(G[n], want, rtol=1e-11, atol=1e-12 * np.abs(want).max())
            fast = ref.matrix_function(vn, an, yn)(z / vn) / vn  # what the Radau loop uses
            assert np.allclose(fast, want, rtol=1e-12, atol=1e-14 * np.abs(want).max())


def test_exponential_propagator_matches_radau_node_by_node(case):
    setup, ref = case
    model = RateModel(setup)
    assert (model.z_start, model.z_end) == pytest.approx(ref.z_range(), rel=1e-12)
    init = initial_level_populations(setup)
    v, a, y0 = (np.array(x) for x in zip(*NODES))
    problem = model.problem(v, a, y0)
    want = np.array([radau_final(ref, *node, init, rtol=1e-10, atol=1e-13) for node in NODES])
    populations = slice(0, ref.L + 1)
    # the grid the engine picks for the default tolerance meets the ODE share of 1e-4
    per, _ = EnsembleIntegrator(model, ExponentialPropagator(), 1e-4, 10**6).converge_grid()
    got = ExponentialPropagator().propagate(problem, model.grid(per)).final
    assert np.abs(got[:, populations] - want[:, populations]).max() < 1e-5
    assert np.abs(got[:, ref.L + 1:] - want[:, ref.L + 1:]).max() < 1e-5 * want[:, ref.L + 1:].max()
    # and converges to the reference at fourth order: at 64 steps per waist, to 1e-8
    fine = ExponentialPropagator().propagate(problem, model.grid(64)).final
    assert np.abs(fine - want).max() < 1e-8
    # the reference conserves population too (a check on the reference)
    assert np.abs(want[:, populations].sum(axis=1) - 1).max() < 1e-9


def test_simulate_matches_an_independent_radau_ensemble_average(case):
    """The whole simulate() at default numerics against a Radau average over a fixed rule
    of our own: 7-point Gauss-Hermite in angle, 2 positive-half Gauss-Hermite nodes in
    offset (Abramowitz and Stegun 25.4.46), different from the engine's rules."""
    setup, ref = case
    result = pumpsim.simulate(setup)
    init = initial_level_populations(setup)
    v = SOURCE["speed_m_s"]
    xa, wa = roots_hermitenorm(7)
    xy, wy = roots_hermitenorm(4)
    keep = xy > 0
    xy, wy = xy[keep], 2 * wy[keep] / wy.sum()
    total = 0.0
    for a, w1 in zip(SOURCE["divergence_rms_mrad"] * 1e-3 * xa, wa / wa.sum()):
        for y0, w2 in zip(SOURCE["width_rms_mm"] * 1e-3 * xy, wy):
            f = radau_final(ref, v, a, y0, init, rtol=1e-8, atol=1e-11)
            total = total + w1 * w2 * np.concatenate(
                [f[: ref.L + 1], ref.photons_per_beam(f), ref.deflection_per_beam(f, v)])
    L, B = ref.L + 1, len(ref.beam_names)
    pops = [result.final_populations[k] for k in ref.ids + ["other"]]
    assert np.abs(np.array(pops) - total[:L]).max() < 1e-4
    for i, name in enumerate(ref.beam_names):
        assert result.photons_per_atom[name] == pytest.approx(total[L + i], rel=1e-4)
        assert result.deflection[name] == pytest.approx(total[L + B + i], rel=1e-4)
    assert result.numerics.converged
