"""Route ranking criteria (compare --rank-by) and the legibility of the figures."""

import json
import math

import numpy as np
import pytest

import pumpsim
from pumpsim.cli import main
from pumpsim.routes import compare
from sizing_fixtures import write

# Two lines out of g (both J = 0 -> 1, lifetime 20 ns): a visible one at 500 nm that
# mostly returns to g (b_g 0.7, b_t 0.3), and an ultraviolet one at 333 nm that mostly
# feeds the target (b_g 0.3, b_t 0.7). Invented.
VISIBLE_AND_UV = """
[species]
name = "visible-and-UV test atom (invented)"
mass_u = 40.0
[[level]]
id = "g"
energy_cm = 0.0
J = 0
[[level]]
id = "m"
energy_cm = 1000.0
J = 0
[[level]]
id = "ev"
energy_cm = 20000.0
J = 1
lifetime_s = 2e-8
[[level]]
id = "eu"
energy_cm = 30000.0
J = 1
lifetime_s = 2e-8
[[decay]]
upper = "ev"
lower = "g"
branching = 0.7
[[decay]]
upper = "ev"
lower = "m"
branching = 0.3
[[decay]]
upper = "eu"
lower = "g"
branching = 0.3
[[decay]]
upper = "eu"
lower = "m"
branching = 0.7
"""


def excitations_for(F, b_g, b_t):
    """Excitations per pass an atom left in g would see, to reach F in weak pumping:
    p_g = exp(-(1 - b_g) K) and T = b_t/(1 - b_g) (1 - p_g) (adiabatic elimination;
    C. J. Foot, "Atomic Physics", 2005, ch. 7), so K = -ln(1 - F (1 - b_g)/b_t) /
    (1 - b_g). The power needed goes as K hbar omega / sigma0."""
    return -math.log(1 - F * (1 - b_g) / b_t) / (1 - b_g)


def photons_for(F, b_t):
    """Photons per atom absorbed to reach F when the upper level decays only to g
    and the target: each absorption sends the atom to the target with probability
    b_t, so F = b_t N (common practice, no source)."""
    return F / b_t


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    path = write(tmp_path_factory.mktemp("rank"), VISIBLE_AND_UV, upper="ev", tol=1e-4,
                 waist=3.0)
    return pumpsim.load_setup(path)


def test_rank_by_each_criterion(setup):
    # Photons per atom follow from the branchings alone (photons_for): 1.67 on the
    # visible line against 0.71 on the UV line. The power goes as K hbar omega /
    # sigma0 (excitations_for), sigma0 = (g_k/g_i) lambda^2/(2 pi) A/Gamma: the
    # visible line, with 5.25 times the cross-section, needs about 0.3 times the
    # power. Deflection of one pass: N hbar k / (m v), less on the UV line (1.07
    # against 1.67 visible recoils).
    F = 0.5
    by = {k: compare(setup, "pump", F, rank_by=k) for k in ("power", "photons", "deflection",
                                                             "visible")}
    ev = next(r for r in by["power"] if r.upper == "ev")
    eu = next(r for r in by["power"] if r.upper == "eu")
    assert ev.search.outcome.photons_per_atom["pump"] == pytest.approx(
        photons_for(F, 0.3), rel=0.02)
    assert eu.search.outcome.photons_per_atom["pump"] == pytest.approx(
        photons_for(F, 0.7), rel=0.02)
    assert ev.search.power / eu.search.power == pytest.approx(
        (2 / 3) * (excitations_for(F, 0.7, 0.3) / excitations_for(F, 0.3, 0.7))
        / (1.5**2 * 7 / 3),
        rel=0.03)
    assert [r.upper for r in by["power"]] == ["ev", "eu"]
    assert [r.upper for r in by["photons"]] == ["eu", "ev"]
    assert [r.upper for r in by["deflection"]] == ["eu", "ev"]
    assert [r.upper for r in by["visible"]] == ["ev", "eu"]


def test_rank_by_on_the_command_line(setup, capsys):
    assert main(["compare", str(setup.path), "--target-fraction", "0.5", "--workers", "1",
                 "--rank-by", "photons", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["rank_by"] == "photons" and [r["upper"] for r in d["routes"]] == ["eu", "ev"]
    with pytest.raises(SystemExit) as e:
        main(["compare", str(setup.path), "--rank-by", "colour"])
    assert e.value.code == 2
    # the UV line is cautioned as such; no caution names a ceiling's power
    assert any("ultraviolet" in c for c in d["cautions"])
    for r in d["routes"]:
        assert not any(f"{r['ceiling_power_mW']:.4g} mW" in c for c in d["cautions"])


def _overlaps(boxes):
    boxes = sorted(boxes, key=lambda b: b.x0)
    return [(a, b) for a, b in zip(boxes, boxes[1:]) if a.x1 > b.x0 + 0.5]


@pytest.mark.parametrize("lo, hi", [(1e-2, 1e6), (0.3, 40.0), (1e3, 2e5)])
def test_log_tick_labels_never_run_together(lo, hi):
    # Rendered with matplotlib's Agg canvas: the drawn x tick labels of a log power
    # axis do not overlap, whatever its span (common practice, no source).
    from pumpsim.plots import _figure, _plain_log

    fig = _figure((8.0, 5.0))
    ax = fig.add_subplot()
    ax.plot([lo, hi], [0, 1])
    ax.set_xscale("log")
    _plain_log(ax.xaxis)
    ax.set_xlim(lo, hi)
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    labels = [t for t in ax.xaxis.get_majorticklabels() + ax.xaxis.get_minorticklabels()
              if t.get_text() and t.get_visible() and lo <= t.get_position()[0] <= hi]
    assert len(labels) >= 3
    assert _overlaps([t.get_window_extent(r) for t in labels]) == []


def test_coinciding_routes_stay_visible(tmp_path):
    # Two routes with identical curves: each is drawn with its own dash and marker,
    # the lower-ranked on top and thinner, so neither hides the other.
    from pumpsim.plots import plot_compare
    from pumpsim.routes import route_curves
    from sizing_fixtures import two_routes

    setup = two_routes(tmp_path)
    routes = compare(setup, "pump", 0.3)
    same = np.geomspace(1e-6, 1e-3, 5), np.linspace(0.1, 0.5, 5)
    curves = {r.upper: same for r in routes}
    import matplotlib.figure

    saved = {}
    real = matplotlib.figure.Figure.savefig

    def keep(fig, path, **kw):
        saved["fig"] = fig
        return real(fig, path, **kw)

    matplotlib.figure.Figure.savefig = keep
    try:
        plot_compare(setup, routes, 0.3, curves, tmp_path / "c.png")
    finally:
        matplotlib.figure.Figure.savefig = real
    lines = [ln for ln in saved["fig"].axes[0].get_lines() if len(ln.get_xdata()) == 5]
    assert len(lines) == 2
    a, b = lines
    assert (a.get_linestyle(), a.get_marker()) != (b.get_linestyle(), b.get_marker())
    assert b.get_zorder() > a.get_zorder() and b.get_linewidth() < a.get_linewidth()
    assert route_curves  # the function the command uses to build these curves
