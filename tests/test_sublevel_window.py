"""The window with a sublevel target (pytest-qt, offscreen): chooser, headline, curves,
level diagram."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

import pumpsim  # noqa: E402
from pumpsim_gui.window import MainWindow  # noqa: E402

RB87 = (Path(__file__).resolve().parent.parent / "schemes" / "rb87.toml").as_posix()
WAIT_MS = 60_000

# one speed, sigma+ D1 pump F=2 -> F'=2 and a repump F=1 -> F'=2: optical pumping into the
# stretched state |F=2, m_F=+2>, which sigma+ D1 light cannot excite (no m_F' = 3 in F' <= 2;
# dipole selection rules, e.g. Foot, Atomic Physics, 2005, ch. 7)
SETUP = f"""
scheme = "{RB87}"
target = "5S1/2 F=2 m=+2"
mode = "sublevel"

[source]
kind = "monoenergetic"
speed_m_s = 100.0
initial = {{ "5S1/2" = 1.0 }}

[[beam]]
name = "pump"
transition = ["5S1/2", "5P1/2"]
power_mW = 0.05
waist_mm = 1.0
polarization = "sigma+"
reference_F = [2, 2]

[[beam]]
name = "repump"
transition = ["5S1/2", "5P1/2"]
power_mW = 0.05
waist_mm = 1.0
polarization = "sigma+"
reference_F = [1, 2]

[numerics]
tolerance = 1e-3
"""


@pytest.fixture
def window(qtbot, tmp_path):
    path = tmp_path / "stretched.toml"
    path.write_text(SETUP, encoding="utf-8")
    w = MainWindow(pumpsim.load_setup(path))
    w.confirm_discard = lambda: "discard"
    qtbot.addWidget(w)
    w.resize(1300, 850)
    w.show()
    yield w
    w.close()


def engine_result(qtbot, w):
    qtbot.waitUntil(lambda: w.shown is not None and w.shown.stage == "engine"
                    and w.shown.generation == w.live.generation, timeout=WAIT_MS)
    return w.shown.result


def test_headline_chooser_and_curves_follow_the_sublevel_target(window, qtbot):
    w = window
    r = engine_result(qtbot, w)
    stretched = r.sublevels.populations()["5S1/2 F=2 m=+2"]
    assert r.transfer_fraction == pytest.approx(stretched, abs=1e-12) and stretched > 0.9
    assert w.readouts.fraction.text() == f"{stretched:.2%}"
    assert "5S1/2 F=2 m=+2" in w.readouts.title.text()
    # before the lasers an unpolarized source fills each of the 8 ground sublevels alike
    assert w.readouts.before_lasers(r) == pytest.approx(1 / 8, abs=1e-9)
    # the level view adds the target's own curve, ending at the headline value
    view = w.profile
    names = [item.name() for item in view.lines]
    target_curve = view.lines[names.index("target 5S1/2 F=2 m=+2")].getData()[1]
    assert target_curve[-1] == pytest.approx(stretched, abs=1e-12)
    # the chooser offers hyperfine levels and sublevels; picking |2,0> retargets the run
    choice = w.panel.row("target").choice
    offered = [choice.itemData(i) for i in range(choice.count())]
    assert {"5S1/2", "5S1/2 F=1", "5S1/2 F=2", "5S1/2 F=2 m=0", "5P3/2 F=3 m=-3"} <= set(offered)
    choice.setCurrentIndex(offered.index("5S1/2 F=2 m=0"))
    choice.activated.emit(offered.index("5S1/2 F=2 m=0"))
    qtbot.waitUntil(lambda: w.setup.target == "5S1/2 F=2 m=0", timeout=WAIT_MS)
    r0 = engine_result(qtbot, w)
    assert r0.transfer_fraction == pytest.approx(r0.sublevels.populations()["5S1/2 F=2 m=0"],
                                                 abs=1e-12)
    assert r0.transfer_fraction < 0.05  # sigma+ light empties m = 0 towards m = +2


def test_level_diagram_draws_hyperfine_levels_and_each_lasers_component(window, qtbot):
    w = window
    w.levels.display(w.setup)
    texts = [item.toPlainText() for item in w.levels.plot.getPlotItem().items
             if hasattr(item, "toPlainText")]
    assert any("pump" in s and "F=2→F'=2" in s for s in texts)
    assert any("repump" in s and "F=1→F'=2" in s for s in texts)
    assert {"F=1", "F=2"} <= set(texts)  # the ground level's hyperfine levels, labelled
    # the sublevel curves: one per sublevel plus other, the target's drawn wider
    view = w.profile
    r = engine_result(qtbot, w)
    view.show_choice.setCurrentIndex(view.show_choice.findData("sublevels"))
    qtbot.waitUntil(lambda: len(view.lines) == len(r.sublevels.labels) + 1, timeout=WAIT_MS)
    widths = {item.name(): item.opts["pen"].widthF() for item in view.lines if item.name()}
    target = next(n for n in widths if n.endswith("— target"))
    assert target.startswith("|F=2, m_F=+2⟩")
    assert widths[target] > max(v for n, v in widths.items() if n != target)
    assert np.isfinite(list(widths.values())).all()


def test_routes_tab_offers_components_and_polarizations_and_applies_one(window, qtbot):
    # one route per line, hyperfine component F=2 -> F' (|F - F'| <= 1) and polarization
    # (sigma+, sigma-, pi): 5P1/2 has F' = 1, 2 and 5P3/2 F' = 1, 2, 3 (angular-momentum
    # selection rules; common practice, no source)
    from pumpsim_gui import studies

    w = window
    routes = studies.route_list(w.setup, "pump")
    assert len(routes) == (2 + 3) * 3 and len({r.name for r in routes}) == len(routes)
    (now,) = [r for r in routes if r.is_set(w.setup.beam("pump"))]
    assert now.name == "5S1/2 → 5P1/2 F=2->F'=2 sigma+"
    cyc = next(r for r in routes if r.name == "5S1/2 → 5P3/2 F=2->F'=3 sigma+")
    assert w.apply_edits(cyc.edits("pump"))
    b = w.setup.beam("pump")
    assert (b.upper, b.polarization.kind, b.reference_F.Fp) == ("5P3/2", "sigma+", 3.0)
    assert w.undo() and w.setup.beam("pump").upper == "5P1/2"  # one step
