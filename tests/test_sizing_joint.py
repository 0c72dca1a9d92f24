"""Sizing: the least power over waists, quick answers before the long work, the
default waist bounds, and a map whose markers are the map's own beam."""

import math

import numpy as np
import pytest
import scipy.constants as sc
from scipy.integrate import quad
from scipy.optimize import brentq, minimize_scalar

from pumpsim.executors import SerialExecutor
from pumpsim.sizing import default_bounds, size
from sizing_fixtures import three_level

B_G, B_T, WIDTH, SPEED = 0.5, 0.3, 1e-3, 500.0
ALONG = 10e-3  # long waist along: low intensity, so R / Gamma < 1e-2 (weak pumping)


def weak_T(P, wc):
    """Transfer fraction of the fixture in weak pumping, averaged over offsets.

    Adiabatic elimination of e (C. J. Foot, "Atomic Physics", 2005, ch. 7):
    T(y) = b_t/(1 - b_g) (1 - exp(-(1 - b_g) K(y))), with K(y) the excitations of an
    atom at offset y, sigma0 I(y) sqrt(pi/2) w_a / (hbar omega v), I(y) = 2P/(pi w_a
    w_c) exp(-2 y^2/w_c^2); offsets Gaussian with rms WIDTH. Integrated with scipy.
    """
    lam = 1e-2 / 20000.0
    sigma0 = 3 * lam**2 / (2 * math.pi) * B_G
    K0 = sigma0 * 2 * P * math.sqrt(math.pi / 2) / (math.pi * wc * sc.hbar
                                                     * 2 * math.pi * sc.c / lam * SPEED)

    def f(y):
        K = K0 * math.exp(-2 * y * y / wc**2)
        return B_T / (1 - B_G) * -math.expm1(-(1 - B_G) * K) * math.exp(
            -y * y / (2 * WIDTH**2)) / (math.sqrt(2 * math.pi) * WIDTH)

    return 2 * quad(f, 0, 12 * WIDTH, epsabs=1e-12)[0]


class Counting(SerialExecutor):
    """Serial executor that counts simulations (to see what ran before what)."""

    def __init__(self):
        self.count = 0

    def submit(self, fn, *args):
        self.count += 1
        return super().submit(fn, *args)


@pytest.fixture(scope="module")
def joint(tmp_path_factory):
    setup = three_level(tmp_path_factory.mktemp("joint"), b_g=B_G, b_t=B_T, width=1.0,
                        waist=10.0, tol=1e-4)
    lines = []
    r = size(setup, "pump", 0.3, along=(ALONG, ALONG), across=(0.5e-3, 6e-3), map_points=3,
             report=lines.append)
    return setup, r, lines


def test_least_power_over_waists_matches_weak_pumping(joint):
    # The least power over the waist across, and the waist it needs, from the
    # offset-averaged weak-pumping law (weak_T) minimised with scipy.
    setup, r, _ = joint
    F = 0.3

    def least(wc):
        return brentq(lambda P: weak_T(P, wc) - F, 1e-9, 1e-2, xtol=1e-14)

    best = minimize_scalar(least, bounds=(0.5e-3, 6e-3), method="bounded",
                           options={"xatol": 1e-7})
    j = r.joint
    assert j is not None and j.at_bound["across"] is None
    assert j.power == pytest.approx(best.fun, rel=5e-3)
    assert j.waist_across == pytest.approx(best.x, rel=0.1)  # a flat optimum
    assert j.power <= r.search.power  # never worse than the setup's waist
    assert j.outcome.transfer_fraction >= F - setup.numerics.tolerance


def test_map_markers_are_the_maps_beam(joint):
    # The map holds every point at one waist across, the optimum's; its cell at the
    # optimum's power and waist is the optimum's own simulation (common practice,
    # no source: a marker and the map under it describe the same beam).
    _, r, _ = joint
    m, j = r.map, r.joint
    assert m["across"] == j.waist_across
    col = list(m["power"]).index(j.power)
    row = list(m["waist"]).index(j.waist)
    assert m["fraction"][row, col] == j.outcome.transfer_fraction


def test_ceiling_power_is_not_cautioned_as_a_proposal(joint):
    # The ceiling's power (peak saturation 1e4) is a numerical limit: more than 5 mW
    # here, it would read as a Class 3B proposal (IEC 60825-1 visible limit, from
    # memory). Cautions are for powers shown or proposed as operating points.
    _, r, lines = joint
    pc = r.search.ceiling_power
    assert pc > 5e-3
    assert not any(f"{pc * 1e3:.4g} mW" in c for c in r.cautions)
    assert any("not a proposed power" in line for line in lines)


def test_quick_answers_come_first(joint):
    # Branching limit, ceiling and least power at this waist, then the cost of the
    # rest, then the joint optimum (so that stopping a run loses nothing known).
    _, _, lines = joint
    order = ["branching limit", "ceiling", "least power for F at this waist", "next:",
             "least power over waists"]
    at = [next(i for i, line in enumerate(lines) if line.startswith(o)) for o in order]
    assert at == sorted(at)
    assert "--map 0" in lines[at[3]] and "--no-waist-search" in lines[at[3]]


def test_unreachable_by_branching_runs_no_waist_search(tmp_path):
    # F above b_t / (b_t + b_o) = 0.6 (J. R. Norris, "Markov Chains", 1997, section
    # 1.3): said before any simulation, and only the three simulations of the
    # ceiling, zero power and the setup's power run.
    setup = three_level(tmp_path)
    ex, seen = Counting(), []
    r = size(setup, "pump", 0.7, executor=ex, map_points=0,
             report=lambda line: seen.append((ex.count, line)))
    assert seen[0][0] == 0 and seen[0][1].startswith("branching limit")
    assert "out of reach at any power and waist" in seen[1][1]
    assert ex.count == 3 and r.waist is None and r.joint is None
    assert r.limited_by == "branching"


def test_transit_limit_checked_at_the_largest_waists(tmp_path):
    # A 1 us decay and 0.1 us through a 0.05 mm waist: out of reach at this waist even
    # at unlimited power (common practice, no source). With the waist along allowed up
    # to 3 mm (6 us) the target is reachable, and the joint search finds it; with
    # 0.06 mm at most it is not, and no waist search runs (6 simulations: the ceiling,
    # zero and the setup's power, here and at the largest waists).
    setup = three_level(tmp_path, lifetime=1e-6, speed=1000.0, waist=0.05)
    ex = Counting()
    r = size(setup, "pump", 0.5, executor=ex, along=(0.05e-3, 0.06e-3),
             across=(0.05e-3, 0.05e-3), map_points=0)
    assert ex.count == 6 and r.joint is None and r.limited_by == "transit"
    r = size(setup, "pump", 0.5, along=(0.05e-3, 3e-3), across=(0.05e-3, 0.05e-3),
             map_points=0)
    assert not r.search.reachable and r.joint is not None
    assert r.joint.outcome.transfer_fraction >= 0.5 - setup.numerics.tolerance
    assert r.to_dict()["reachable"] is True and r.to_dict()["power_mW"] is None


def test_default_waist_bounds(tmp_path):
    # A factor 3 either way; across, never narrower than the atomic beam's rms width
    # (a narrower beam leaves most atoms in its wings: common practice, no source).
    setup = three_level(tmp_path, waist=1.5, width=1.0)
    (alo, ahi), (clo, chi) = default_bounds(setup, "pump")
    assert (alo, ahi) == pytest.approx((0.5e-3, 4.5e-3))
    assert (clo, chi) == pytest.approx((1.0e-3, 4.5e-3))
    narrow = three_level(tmp_path, waist=0.6, width=1.0)  # already below the width
    assert default_bounds(narrow, "pump")[1][0] == pytest.approx(0.6e-3)
    assert np.isclose(default_bounds(three_level(tmp_path, waist=3.0), "pump")[1][0], 1e-3)
