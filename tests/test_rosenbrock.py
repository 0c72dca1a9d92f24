"""The sparse Rosenbrock propagator and the sparse rate model against independent references."""

from pathlib import Path

import numpy as np

import pumpsim
from pumpsim.demo import demo_setup_path
from pumpsim.model import RateModel
from pumpsim.setup_file import setup_from_document
from pumpsim.solvers import RadauPropagator, RosenbrockPropagator, SparseProblem
from pumpsim.sparse_model import SparseRateModel

RB87 = str(Path(__file__).resolve().parent.parent / "schemes" / "rb87.toml")
V, A, Y = np.array([250.0, 600.0]), np.array([0.0, 0.003]), np.array([0.0, 5e-4])


def rb_sublevel(power_mW=2.0, field=0.5):
    beams = [dict(name="pump", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                  polarization={"linear_deg": 30}, power_mW=power_mW, waist_mm=1.0),
             dict(name="repump", transition=["5S1/2", "5P1/2"], reference_F=[1, 2],
                  polarization="sigma+", power_mW=power_mW, waist_mm=1.0, position_mm=1.5,
                  angle_deg=80.0)]
    doc = {"scheme": RB87, "target": "5S1/2", "mode": "sublevel", "field": {"B_gauss": field},
           "source": {"kind": "monoenergetic", "speed_m_s": 300.0, "temperature_K": 350.0},
           "beam": beams}
    return setup_from_document(doc, None)


def test_sparse_model_builds_the_same_generator_as_the_dense_model():
    # same formulas (model.md), two assemblies: must agree entry for entry
    setup = rb_sublevel()
    dense = RateModel(setup).problem(V, A, Y)
    sparse = SparseRateModel(setup).problem(V, A, Y).dense()
    assert np.array_equal(dense.base, sparse.base)
    assert np.abs(dense.drives - sparse.drives).max() <= 1e-12 * np.abs(dense.drives).max()
    assert np.array_equal(dense.y0, sparse.y0)


def test_fourth_order_convergence_against_radau():
    # reference: scipy.integrate.solve_ivp Radau at rtol 1e-10 (general-purpose library);
    # RODAS4 is a fourth-order method (Hairer and Wanner, Solving ODEs II, 1996)
    model = RateModel(pumpsim.load_setup(demo_setup_path()))
    problem = model.problem(V, A, Y)
    ref = RadauPropagator(rtol=1e-10, atol=1e-13).propagate(problem, model.grid(8)).final
    errors = []
    for per in (8, 16, 32):
        final = RosenbrockPropagator().propagate(problem, model.grid(per)).final
        errors.append(np.abs(final - ref)[:, :model.n_states].max())
        # populations are conserved to round-off (the contract asks 1e-10)
        assert np.abs(final[:, :model.n_states].sum(axis=1) - 1).max() < 1e-12
    assert errors[-1] < 1e-8
    assert errors[0] / errors[1] > 8 and errors[1] / errors[2] > 8


def test_stiff_sublevel_problem_matches_radau():
    # 33 states, decay rate times transit time ~ 1e3, a field, mixed polarizations,
    # an angled beam; reference Radau as above
    model = SparseRateModel(rb_sublevel())
    problem = model.problem(V, A, Y)
    z = model.grid(32)
    ours = RosenbrockPropagator().propagate(problem, z).final
    ref = RadauPropagator(rtol=1e-10, atol=1e-13).propagate(problem.dense(), z).final
    S = model.n_states
    assert np.abs(ours[:, :S] - ref[:, :S]).max() < 1e-6
    assert np.abs(ours[:, S:] - ref[:, S:]).max() < 1e-5 * np.abs(ref[:, S:]).max()


def test_coarse_grids_stay_bounded_under_strong_pumping():
    # a frozen Jacobian treats a beam switching on within one step explicitly; the
    # substep guard must keep the result bounded on the coarsest grids the ensemble tries
    # (without the guard, one step per waist gives populations of order 1e14 here)
    model = SparseRateModel(rb_sublevel(power_mW=200.0))
    problem = model.problem(V, A, Y)
    S = model.n_states
    fine = RosenbrockPropagator().propagate(problem, model.grid(32)).final[:, :S]
    for per in (1, 2, 4):
        final = RosenbrockPropagator().propagate(problem, model.grid(per)).final[:, :S]
        assert final.min() > -0.01 and final.max() < 1.01  # inaccurate, but bounded
    assert np.abs(final - fine).max() < 1e-3


def test_dense_input_and_sparse_round_trip():
    model = RateModel(pumpsim.load_setup(demo_setup_path()))
    dense = model.problem(V, A, Y)
    sparse = SparseProblem.from_dense(dense)
    assert np.array_equal(sparse.dense().base, dense.base)
    z = model.grid(8)
    a = RosenbrockPropagator().propagate(dense, z).final
    b = RosenbrockPropagator().propagate(sparse, z).final
    assert np.array_equal(a, b)
