"""The density-matrix model against QuTiP's ``mesolve`` on the same master equation.

QuTiP (J. R. Johansson, P. D. Nation, F. Nori, Comput. Phys. Commun. 184 (2013)
1234) is an independent general-purpose master-equation solver (adaptive ODE
integration of the full Liouvillian). Hamiltonian, jump operators, dephasing
and rate terms are read off the model in Hilbert space; what is checked is the
real reduced coordinates, the closure that chooses the kept coherences, the
assembly of the generator and the integrator. ``benchmarks/bench_coherent.py``
times the same comparison.
"""

import math

import numpy as np
import pytest
from scipy.linalg import expm

from pumpsim.coherent import CoherentModel, CoherentPropagator
from test_coherent import final_states, lambda_case, rb87_case


def qutip_generator(model, v):
    """The master equation of one atom (speed ``v``, on the beams' axis) as QuTiP
    objects: the time-dependent Liouvillian (a ``QobjEvo``, time from ``z_start``),
    the initial density matrix and the kept state indices. States of levels no beam
    touches (and that start empty) are left out: they never fill."""
    qt = pytest.importorskip("qutip")
    L, fr = model.liouvillian, model.liouvillian.frame
    S, B = model.n_states, len(model.setup.beams)
    touched = {model.setup.scheme.index(x) for b in model.setup.beams for x in (b.lower, b.upper)}
    keep = [s for s in range(S) if model.basis.level_of[s] in touched or s == S - 1
            or model.initial[s] > 0]
    sub = np.ix_(keep, keep)
    z0 = model.z_start

    def field(shape):
        return lambda t: math.sqrt(shape.along(z0 + v * t))

    def Q(matrix):  # sparse, as QuTiP's own solvers prefer
        return qt.Qobj(matrix).to("CSR")

    def intensity(shape):
        return lambda t: float(shape.along(z0 + v * t))

    constant = []
    for members in L.jumps:
        op = np.zeros((S, S))
        for e, targets in members.items():
            for g, amp in targets:
                op[g, e] = amp
        if op[sub].any():
            constant.append(Q(op[sub]))
    for D, w in L.noise:
        constant.append(Q(np.diag(math.sqrt(2 * D) * (fr.potential @ w))[sub]))
    # the generator as one time-dependent Liouvillian: constant part, drives, rate terms
    liouvillian = [qt.liouvillian(Q(np.diag(fr.energy)[sub]), constant)]
    for b in range(B):
        H_b = Q((L.H[b] * model.field_scale[b])[sub])
        liouvillian.append([qt.liouvillian(H_b), field(model.shapes[b])])
    if model.has_rate_terms:
        drives = model.problem(np.array([v]), np.zeros(1), np.zeros(1)).drives[B:, 0] * v
        for t, (i, _) in enumerate(model.terms):
            for lo in keep:
                for up in keep:
                    if lo != up and drives[t, up, lo] > 0:
                        op = np.zeros((S, S))
                        op[up, lo] = math.sqrt(drives[t, up, lo])
                        liouvillian.append([qt.lindblad_dissipator(Q(op[sub])),
                                            intensity(model.shapes[i])])
    rho0 = qt.Qobj(np.diag(model.initial[:S])[sub])
    return qt.QobjEvo(liouvillian), rho0, keep


def populations(model, rho, keep):
    out = np.zeros(model.n_states)
    out[keep] = np.real(np.diag(rho.full()))
    return out


def qutip_final(model, v, atol=1e-11, rtol=1e-9):
    """Final state populations of one atom crossing the beams, by ``qutip.mesolve``."""
    qt = pytest.importorskip("qutip")
    generator, rho0, keep = qutip_generator(model, v)
    t_end = (model.z_end - model.z_start) / v
    res = qt.mesolve(generator, rho0, [0.0, t_end],
                     options={"atol": atol, "rtol": rtol, "nsteps": 10**7})
    return populations(model, res.states[-1], keep)


def test_lambda_system_matches_qutip(tmp_path):
    setup = lambda_case(tmp_path, p1=0.3, p2=0.6, widths=(0.0, 0.2), group=(None, None),
                        detuning2=0.4)
    model = CoherentModel(setup)
    assert model.liouvillian.pairs  # optical and Raman coherences are kept
    ours = final_states(model, CoherentPropagator(), 200.0, per_waist=64)[:model.n_states]
    assert np.max(np.abs(ours - qutip_final(model, 200.0))) < 1e-6


def test_rb87_d1_matches_qutip(tmp_path):
    """The 16 D1 sublevels of Rb-87 (and the loss sink) under sigma+ pump and repump,
    the pump 0.3 MHz wide and unrelated to the repump, in 1 G: 2 us (70 lifetimes) at
    the beams' centre, QuTiP's own Liouvillian (``liouvillian``: Hamiltonian and jump
    operators in Hilbert space) propagated exactly, against the model's reduced real
    generator. (A whole transit with ``mesolve`` takes minutes on this system; the
    Lambda test above and the analytic tests cover the integration along z.)"""
    qt = pytest.importorskip("qutip")
    setup = rb87_case(tmp_path, power_mW=0.05, widths=(0.3, 0.0), group=None)
    model = CoherentModel(setup)
    driven = {e.coupling.upper for e in model.liouvillian.frame.edges}
    assert len(driven) == 4  # F'=2, m = -1 .. +2 under sigma+ light
    v, tau = 300.0, 2e-6
    generator, rho0, keep = qutip_generator(model, v)
    at_centre = -model.z_start / v  # the beams sit at z = 0
    vec = qt.operator_to_vector(rho0)
    evolved = expm(generator(at_centre).full() * tau) @ vec.full()  # dense: 289 x 289
    rho = qt.vector_to_operator(qt.Qobj(evolved, dims=vec.dims))
    problem = model.problem(np.array([v]), np.zeros(1), np.zeros(1))
    ours = expm(problem.generator(0.0)[0] * v * tau) @ problem.y0[0]
    assert populations(model, rho, keep)[7] > 0.3  # pumping has happened
    assert np.max(np.abs(ours[:model.n_states] - populations(model, rho, keep))) < 1e-6
