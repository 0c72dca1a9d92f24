"""The branching limit at unlimited power and time (pumpsim.limits)."""

import numpy as np
import pytest
import scipy.linalg

import pumpsim
from pumpsim.limits import branching_limit, long_run
from sizing_fixtures import three_level


@pytest.mark.parametrize("b_g,b_t", [(0.5, 0.3), (0.2, 0.7), (0.05, 0.9), (0.6, 0.4)])
def test_three_levels_with_sink(tmp_path, b_g, b_t):
    # Optical pumping g -> e with e decaying to g (b_g), to the target (b_t) and to
    # an unlisted sink (b_o): every atom is re-excited until it leaves the cycle, so
    # the end fraction in the target is b_t / (b_t + b_o) (first-step analysis of an
    # absorbing Markov chain, e.g. J. R. Norris, "Markov Chains", 1997, section 1.3).
    setup = three_level(tmp_path, b_g=b_g, b_t=b_t)
    b_o = 1.0 - b_g - b_t
    lim = branching_limit(setup)
    assert lim.fraction == pytest.approx(b_t / (b_t + b_o), abs=1e-12)
    assert lim.final["other"] == pytest.approx(b_o / (b_t + b_o), abs=1e-12)
    assert lim.dark == ()


def test_repump_returns_dark_atoms(tmp_path):
    # Pump g -> e (e to g, m, dark d); repump d -> r (r to g, m, d, sink). First-step
    # analysis (Norris 1997, section 1.3) with the branchings normalised to the
    # decays that leave each driven pair:
    #   p(g) = a_m + a_d p(d),  p(d) = c_m + c_g p(g)
    #   => p(g) = (a_m + a_d c_m) / (1 - a_d c_g).
    scheme = """
    [species]
    name = "repump test atom (invented)"
    mass_u = 40.0
    [[level]]
    id = "g"
    energy_cm = 0.0
    J = 1
    [[level]]
    id = "m"
    energy_cm = 800.0
    J = 2
    [[level]]
    id = "d"
    energy_cm = 1500.0
    J = 0
    [[level]]
    id = "e"
    energy_cm = 20000.0
    J = 2
    lifetime_s = 1e-8
    [[level]]
    id = "r"
    energy_cm = 16000.0
    J = 1
    lifetime_s = 2e-8
    [[decay]]
    upper = "e"
    lower = "g"
    branching = 0.5
    [[decay]]
    upper = "e"
    lower = "m"
    branching = 0.35
    [[decay]]
    upper = "e"
    lower = "d"
    branching = 0.15
    [[decay]]
    upper = "r"
    lower = "g"
    branching = 0.3
    [[decay]]
    upper = "r"
    lower = "m"
    branching = 0.3
    [[decay]]
    upper = "r"
    lower = "d"
    branching = 0.3
    """
    from sizing_fixtures import write

    path = write(tmp_path, scheme)
    with open(path, "a") as f:
        f.write('\n[[beam]]\nname = "repump"\ntransition = ["d", "r"]\npower_mW = 1.0\n'
                'waist_mm = 1.0\n')
    setup = pumpsim.load_setup(path)
    a_m, a_d = 0.35 / 0.5, 0.15 / 0.5
    c_g, c_m, c_o = 0.3 / 0.7, 0.3 / 0.7, 0.1 / 0.7
    p_g = (a_m + a_d * c_m) / (1 - a_d * c_g)
    lim = branching_limit(setup)
    assert lim.fraction == pytest.approx(p_g, abs=1e-12)
    assert lim.final["other"] == pytest.approx(1 - p_g, abs=1e-12)
    # without the repump, d is a dark level that keeps a_d of the atoms
    alone = branching_limit(setup.with_value("beam.repump.transition", ["g", "e"]))
    assert alone.fraction == pytest.approx(a_m, abs=1e-12)
    assert alone.dark == ("d",)


def test_long_run_matches_matrix_exponential():
    # lim exp(Q t) p0 against scipy.linalg.expm at a time long after every decay
    # (general-purpose library check): two absorbing states, a closed pair, transients.
    rng = np.random.default_rng(3)
    n = 7
    Q = rng.uniform(0.5, 2.0, (n, n)) * (rng.uniform(size=(n, n)) < 0.5)
    Q[:, [0, 1]] = 0.0  # absorbing
    Q[:, 2] = 0.0
    Q[3, 2] = 1.3  # 2 <-> 3 closed pair
    Q[:, 3] = 0.0
    Q[2, 3] = 0.7
    np.fill_diagonal(Q, 0.0)
    Q[np.arange(n), np.arange(n)] = -Q.sum(axis=0)
    p0 = rng.uniform(size=n)
    p0 /= p0.sum()
    reference = scipy.linalg.expm(Q * 200.0) @ p0
    assert np.allclose(long_run(Q, p0), reference, atol=1e-10)


def test_ceiling_simulation_agrees_with_branching_limit(tmp_path):
    # At a peak saturation parameter of 1e4 and ~400 lifetimes of transit the
    # simulated fraction must reach the branching limit (common practice, no source).
    from pumpsim.sizing import ceiling_power, with_power

    setup = three_level(tmp_path)
    T = pumpsim.simulate(with_power(setup, "pump", ceiling_power(setup, "pump")))
    assert T.transfer_fraction == pytest.approx(branching_limit(setup).fraction, abs=1e-3)
