"""Route comparison (pumpsim.routes)."""

import pytest

from pumpsim.routes import candidates, compare
from sizing_fixtures import two_routes


def test_more_branching_to_target_ranks_first(tmp_path):
    # Equal cross-sections (same wavelength, J and A to g, sigma0 = (g_k/g_i)
    # lambda^2/(2 pi) A/Gamma, Foot, "Atomic Physics", 2005): the route that sends
    # more of its decays to the target needs less power and has the higher branching
    # limit b_t / (b_t + b_o) (Norris, "Markov Chains", 1997, section 1.3).
    setup = two_routes(tmp_path)
    assert candidates(setup, "pump") == ("e1", "e2")
    routes = compare(setup, "pump", 0.3)
    assert [r.upper for r in routes] == ["e2", "e1"]
    assert routes[0].sigma0 == pytest.approx(routes[1].sigma0, rel=1e-12)
    e2, e1 = (r.to_dict() for r in routes)
    assert (e2["branching_target"], e2["branching_other"]) == pytest.approx((0.4, 0.1))
    assert (e1["branching_target"], e1["branching_other"]) == pytest.approx((0.2, 0.3))
    assert e2["power_mW"] < e1["power_mW"]
    assert e2["branching_limit"] == pytest.approx(0.4 / 0.5)
    assert e1["branching_limit"] == pytest.approx(0.2 / 0.5)
    for d in (e1, e2):
        assert d["confirmed_fraction"] >= 0.3 - 1e-3 and d["cautions"]


def test_unreachable_route_ranks_after_reachable(tmp_path):
    # F = 0.5 is above e1's limit 0.4 but below e2's 0.8 (Norris 1997, section 1.3);
    # --routes restricts the list.
    setup = two_routes(tmp_path)
    routes = compare(setup, "pump", 0.5)
    assert [(r.upper, r.search.reachable) for r in routes] == [("e2", True), ("e1", False)]
    assert routes[1].to_dict()["power_mW"] is None
    assert [r.upper for r in compare(setup, "pump", 0.5, routes=["e1"])] == ["e1"]
