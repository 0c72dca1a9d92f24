"""The desktop window (pytest-qt, offscreen).

Cheap setups keep this file fast: a monoenergetic beam with no divergence
(one atom class, about 0.3 s per engine run) except where the demo itself is
the point. Sources of the outside checks are named beside them.
"""

import csv
import importlib.util
import math
import os
import subprocess
import sys
import threading
import time
import tomllib
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import h5py  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import constants as C  # noqa: E402

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

import pumpsim  # noqa: E402
import pumpsim.cli  # noqa: E402
from PySide6.QtWidgets import QLabel  # noqa: E402
from pumpsim.demo import demo_setup_path  # noqa: E402
from pumpsim.schema import fields_of  # noqa: E402
from pumpsim_gui import engine_process, studies, theme  # noqa: E402
from pumpsim_gui.edits import field_key, shown_fields  # noqa: E402
from pumpsim_gui.evaluate import Superseded, quick_estimate  # noqa: E402
from pumpsim_gui.profile_view import sublevel_name  # noqa: E402
from pumpsim_gui.window import MainWindow  # noqa: E402
from pumpsim_gui.worker import COARSE_AFTER_S, Freshness, LiveCompute, Update  # noqa: E402
from sizing_fixtures import three_level  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
SCHEME = (ROOT / "schemes" / "veridium.toml").as_posix()
RB87 = (ROOT / "schemes" / "rb87.toml").as_posix()
WAIT_MS = 60_000

CHEAP = f"""
scheme = "{SCHEME}"
target = "m"

[source]
kind = "monoenergetic"
speed_m_s = 400.0
temperature_K = 1150.0

[[beam]]
name = "pump"
transition = ["g", "e2"]
power_mW = 0.02
waist_mm = 1.0

[numerics]
tolerance = 1e-3
"""


# Sublevel mode, still cheap: one speed, Rb-87 D1 light sigma+ on F=2 -> F'=2 (32 sublevels).
SUBLEVEL = f"""
scheme = "{RB87}"
target = "5S1/2"
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

[numerics]
tolerance = 1e-3
"""


@pytest.fixture
def cheap_path(tmp_path):
    p = tmp_path / "cheap.toml"
    p.write_text(CHEAP, encoding="utf-8")
    return p


@pytest.fixture
def open_window(qtbot):
    """Make windows that never ask about unsaved changes and are closed after the test."""
    made = []

    def make(setup, **kw):
        w = MainWindow(setup, **kw)
        w.confirm_discard = lambda: "discard"
        qtbot.addWidget(w)
        w.resize(1300, 850)
        w.show()
        made.append(w)
        return w

    yield make
    for w in made:
        w.close()


def wait_engine(qtbot, w):
    """Until the engine result of the newest request is on screen; returns it."""
    qtbot.waitUntil(lambda: w.shown is not None and w.shown.stage == "engine"
                    and w.shown.generation == w.live.generation, timeout=WAIT_MS)
    return w.shown


def same_values(a, b):
    """Setups equal in every value (their file paths aside)."""
    return (replace(a, path=None, scheme=replace(a.scheme, path=None))
            == replace(b, path=None, scheme=replace(b.scheme, path=None)))


# -- opening, controls from the schema ------------------------------------------------

def test_window_opens_on_the_demo_with_a_control_per_schema_field(open_window, qtbot):
    setup = pumpsim.load_setup(demo_setup_path())
    w = open_window(setup)
    expected = {"target"} | {field_key(f) for f in shown_fields(setup, fields_of("source"))}
    expected |= {field_key(f) for f in fields_of("numerics")}
    expected |= {field_key(f) for f in shown_fields(setup, fields_of("") + fields_of("field"))}
    expected |= {field_key(f, b.name) for b in setup.beams
                 for f in shown_fields(setup, fields_of("beam"))}
    assert "beam.pump.polarization" not in expected  # level mode ignores it: no control
    assert set(w.panel.rows) == expected  # every field, generated, none hand-listed
    for key, (row, field, _) in w.panel.rows.items():
        if not field.choices:
            assert row.findChild(QLabel, "unit").text() == (field.unit or "(number)")
    power = w.panel.row("beam.pump.power_mW")
    assert power.slider is not None and power.scale.field.log  # log slider + exact entry
    assert power.entry.text() == "30"
    qtbot.waitUntil(lambda: w.shown is not None, timeout=WAIT_MS)
    assert w.readouts.fraction.text().endswith("%")
    assert "quick" in w.profile.heading.full.lower() or w.shown.stage != "quick"
    # the general laser caution is on show whenever powers are (IEC 60825-1 wording in pumpsim.safety)
    assert w.caution.isVisible() and "laser-safety program" in w.caution.label.text()
    assert "Class 3B" in w.panel.caution_labels["pump"].text()


# -- live results --------------------------------------------------------------------

def test_moving_a_slider_changes_the_readout_to_the_engine_value(open_window, qtbot, cheap_path):
    setup = pumpsim.load_setup(cheap_path)
    w = open_window(setup)
    before = wait_engine(qtbot, w).result.transfer_fraction
    row = w.panel.row("beam.pump.power_mW")
    row.move_slider(row.slider.value() + 120)  # about 0.5 decade more power
    assert w.setup.beam("pump").power > setup.beam("pump").power
    shown = wait_engine(qtbot, w).result
    expected = pumpsim.simulate(w.setup)  # the same setup, computed here
    assert shown.transfer_fraction == pytest.approx(expected.transfer_fraction, abs=1e-12)
    assert shown.transfer_fraction != pytest.approx(before, abs=1e-3)
    assert w.readouts.fraction.text() == f"{expected.transfer_fraction:.2%}"
    assert "Converged" in w.profile.heading.full


def test_rapid_moves_coalesce_and_end_on_the_newest(open_window, qtbot, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    row = w.panel.row("beam.pump.power_mW")
    for step in range(1, 16):
        row.move_slider(row.slider.value() + 5)
        qtbot.wait(5)
    shown = wait_engine(qtbot, w)
    assert shown.result.setup.beam("pump").power == w.setup.beam("pump").power
    assert w.live.generation == 16


def test_coarse_pass_runs_only_once_runs_have_proved_slow(qtbot, cheap_path):
    """The engine's first pass at the coarse tolerance is taken only after a run at
    the setup's own tolerance took over COARSE_AFTER_S; otherwise it would only delay
    the converged answer (project design, no source)."""
    setup = pumpsim.load_setup(cheap_path).with_value("numerics.tolerance", 1e-4)
    stages = []
    live = LiveCompute(full=lambda s, superseded: pumpsim.simulate(s))
    live.updated.connect(lambda u: stages.append((u.generation, u.stage)))
    try:
        first = live.request(setup)
        # Wait for both: the queued update reaches this thread in its own time, and
        # the worker thread records last_engine_s only after emitting it.
        qtbot.waitUntil(lambda: (first, "engine") in stages and live.last_engine_s > 0,
                        timeout=WAIT_MS)
        assert (first, "coarse") not in stages
        live.last_engine_s = COARSE_AFTER_S + 1.0  # as if that run had been slow
        second = live.request(setup)
        qtbot.waitUntil(lambda: (second, "engine") in stages, timeout=WAIT_MS)
        assert stages.index((second, "coarse")) < stages.index((second, "engine"))
    finally:
        live.stop()


def test_stale_results_never_overwrite_newer_ones(open_window, qtbot, cheap_path):
    """The engine result of an old request arrives after the quick one of a newer
    request (its run ignores being superseded): it must not be shown."""
    setup = pumpsim.load_setup(cheap_path)
    slow, started = threading.Event(), threading.Event()

    def full(s, superseded):
        if s.beam("pump").power == setup.beam("pump").power:
            started.set()
            slow.wait(10)  # the first request's run ends late, whatever happens
        return pumpsim.simulate(s)

    emitted = []
    live = LiveCompute(full=full)
    live.updated.connect(lambda u: emitted.append((u.generation, u.stage)))
    w = open_window(setup, live=live)
    # Edit only once the first engine run has begun: an edit during the quiet
    # wait before it would cancel it, and there would be no stale result.
    qtbot.waitUntil(started.is_set, timeout=WAIT_MS)
    assert w.apply_edit("beam.pump.power_mW", 3.0)
    qtbot.waitUntil(lambda: w.shown is not None and w.shown.generation == 2, timeout=WAIT_MS)
    slow.set()
    qtbot.waitUntil(lambda: (1, "engine") in emitted and (2, "engine") in emitted, timeout=WAIT_MS)
    shown = wait_engine(qtbot, w)
    assert (1, "engine") in emitted  # the stale engine result did arrive ...
    assert shown.generation == 2 and shown.result.setup.beam("pump").power == pytest.approx(3e-3)
    ranks = []
    w.displayed.connect(lambda u: ranks.append(u.rank))
    r_old = quick_estimate(setup)
    w._on_update(Update(1, "engine", r_old, time.perf_counter()))  # ... and is refused
    assert ranks == [] and w.shown.generation == 2


def test_freshness_orders_by_request_then_stage():
    f = Freshness()
    seq = [(1, "quick"), (1, "engine"), (3, "quick"), (2, "engine"), (3, "quick"), (3, "engine")]
    accepted = [f.accept(Update(g, s, None, 0.0)) for g, s in seq]
    assert accepted == [True, True, True, False, False, True]


def test_a_stale_engine_run_stops_without_ending_its_process(cheap_path):
    """The child answers a job flagged stale with "stopped" at its first refinement round
    and serves the next job; through EngineProcess a stale run never costs the process."""
    import multiprocessing
    import multiprocessing.sharedctypes

    setup = pumpsim.load_setup(cheap_path)
    ours, theirs = multiprocessing.Pipe()
    stop = multiprocessing.sharedctypes.RawValue("q", 1)  # job 1 is stale before it starts
    child = threading.Thread(target=engine_process._serve, args=(theirs, stop), daemon=True)
    child.start()
    ours.send((1, setup, None))
    assert ours.recv() == (None, "stopped")
    ours.send((2, setup, None))
    ok, result = ours.recv()
    assert ok and result.transfer_fraction == pumpsim.simulate(setup).transfer_fraction
    ours.close()
    child.join(WAIT_MS / 1000)

    engine = engine_process.EngineProcess(stop_grace=WAIT_MS / 1000)  # never killed here
    try:
        asked = []
        try:  # stale from the second look on; it may also finish first, which is fine too
            engine.simulate(setup, lambda: asked.append(1) or len(asked) > 1)
        except Superseded:
            pass
        pid = engine.child.proc.pid
        again = engine.simulate(setup)
        assert engine.child.proc.pid == pid and engine.replaced == 0
        assert again.transfer_fraction == result.transfer_fraction
    finally:
        engine.close()


def test_a_bad_value_shows_a_message_and_changes_nothing(open_window, qtbot, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    before, generation = w.setup, w.live.generation
    row = w.panel.row("beam.pump.power_mW")
    for text, words in (("-5", ">= 0"), ("lots", "not a number")):
        row.entry.setText(text)
        row.entry.editingFinished.emit()
        assert row.error.isVisible() and words in row.error.text()
        assert w.setup is before and w.live.generation == generation
    passes = w.panel.row("beam.pump.passes")
    passes.entry.setText("2.5")
    passes.entry.editingFinished.emit()
    assert "whole number" in passes.error.text() and w.setup is before


# -- sublevel mode ---------------------------------------------------------------------

def test_sublevel_view_curves_sum_to_levels_and_dark_fraction_is_the_engines(
        open_window, qtbot, tmp_path):
    """Sublevel curves add up to their level's curve (a level's population is the sum
    over its sublevels, docs/sublevel.md); sigma+ light on F=2 -> F'=2 cannot excite
    |F=2, m_F=+2> (Delta m_F = +1 would need m_F' = 3 > F'; dipole selection rules, e.g.
    D. A. Steck, Rubidium 87 D Line Data), so it is among the dark sublevels."""
    path = tmp_path / "rb87_sublevels.toml"
    path.write_text(SUBLEVEL, encoding="utf-8")
    setup = pumpsim.load_setup(path)
    w = open_window(setup)
    for key in ("mode", "field.B_gauss", "beam.pump.polarization"):  # from the schema
        assert key in w.panel.rows
    assert w.panel.row("mode").choice.currentData() == "sublevel"
    assert w.panel.row("beam.pump.reference_F").entry.text() == "[2, 2]"  # a pair, as in the file
    shown = wait_engine(qtbot, w).result
    view = w.profile
    assert view.show_choice.isVisible() and view.show_choice.isEnabled()
    assert not view.showing_sublevels
    levels = np.array([item.getData()[1] for item in view.lines]).T
    view.show_choice.setCurrentIndex(view.show_choice.findData("sublevels"))
    qtbot.waitUntil(lambda: len(view.lines) == len(shown.sublevels.labels) + 1, timeout=WAIT_MS)
    assert view.showing_sublevels
    curves = np.array([item.getData()[1] for item in view.lines]).T
    level_of = np.append(shown.sublevels.level_of, len(shown.levels) - 1)
    for k in range(len(shown.levels)):
        np.testing.assert_allclose(curves[:, level_of == k].sum(axis=1), levels[:, k],
                                   rtol=0, atol=1e-12)
    named = [item.name() for item in view.lines]
    assert "|F=2, m_F=+2⟩ 5S1/2" in named
    assert shown.sublevels.dark[shown.sublevels.labels.index("5S1/2 F=2 m=+2")]
    engine = pumpsim.simulate(w.setup)  # the same setup, computed here
    assert w.readouts.dark_fraction == pytest.approx(engine.sublevels.dark_fraction, abs=1e-12)
    assert f"{engine.sublevels.dark_fraction:.2%}" in w.readouts.dark.full
    header, rows = view.curves()
    assert "population_5S1/2 F=2 m=+2" in header and len(rows) == len(shown.z)
    view.show_choice.setCurrentIndex(view.show_choice.findData("levels"))
    assert len(view.lines) == len(shown.levels)


def test_linear_polarization_is_shown_as_its_own_entry(open_window, qtbot, tmp_path):
    path = tmp_path / "linear.toml"
    path.write_text(SUBLEVEL.replace('polarization = "sigma+"', "polarization = { linear_deg = 30 }"),
                    encoding="utf-8")
    w = open_window(pumpsim.load_setup(path))
    choice = w.panel.row("beam.pump.polarization").choice
    assert choice.currentText() == "{ linear_deg = 30 }"
    choice.setCurrentIndex(choice.findData("pi"))
    choice.activated.emit(choice.currentIndex())
    assert w.setup.beam("pump").polarization.kind == "pi"
    assert choice.findText("{ linear_deg = 30 }") < 0  # no longer the value: gone from the list


def test_sublevel_names_read_as_kets():
    assert sublevel_name("5P3/2 F=3 m=-3", "5P3/2") == "|F=3, m_F=-3⟩ 5P3/2"
    assert sublevel_name("g m=+1/2", "g") == "|m_J=+1/2⟩ g"  # no hyperfine structure


# -- the quick estimate against physics ------------------------------------------------

def test_quick_estimate_follows_weak_pumping_law(tmp_path):
    """Weak pumping of a three-level system: the target fraction is
    ``1 - exp(-b int R dt)`` with ``int R dt = sigma0 I0 w sqrt(pi/2) / (hbar omega v)``
    (standard rate-equation result, adiabatic elimination of the upper level;
    the law the engine is tested against too). Constants from scipy.constants."""
    setup = three_level(tmp_path, b_g=0.6, b_t=0.4, lifetime=1e-8, power=0.002, tol=1e-4)
    lam = 1e-2 / 20000.0  # m, from the energy difference
    gamma = 1e8  # 1/lifetime, the ground level is stable
    sigma0 = 3.0 * lam**2 / (2 * math.pi) * (0.6e8) / gamma  # g_k/g_i = 3, A of e -> g
    w, v, P = 1e-3, 500.0, 2e-6
    I0 = 2 * P / (math.pi * w * w)
    integral = sigma0 * I0 * w * math.sqrt(math.pi / 2) / (C.hbar * 2 * math.pi * C.c / lam * v)
    expected = 1 - math.exp(-0.4 * integral)
    isat = C.hbar * 2 * math.pi * C.c / lam * gamma / (sigma0 * (1 + 1 / 3))
    assert I0 < 0.01 * isat  # far below saturation: the upper level stays nearly empty
    got = quick_estimate(setup).transfer_fraction
    assert got == pytest.approx(expected, rel=2e-3)


def test_least_power_inverts_an_analytic_curve():
    """``f(P) = 1 - exp(-k P)`` inverts to ``P = -ln(1 - F) / k`` (algebra)."""
    k, F = 0.7, 0.9
    powers = np.logspace(-2, 3, 40)
    got = studies.least_power(powers, 1 - np.exp(-k * powers), F)
    assert got == pytest.approx(-math.log(1 - F) / k, rel=0.02)
    assert studies.least_power(powers, np.full(40, 0.5), F) is None


def test_routes_are_every_line_out_of_the_lower_level():
    """Branchings as given in schemes/veridium.toml; r's from its A values and
    lifetime: 1.4e7/s * 30 ns to m, 1 - 3.3e7/s * 30 ns to other."""
    setup = pumpsim.load_setup(demo_setup_path())
    routes = {r.upper: r for r in studies.route_list(setup, "pump")}
    assert set(routes) == {d.upper for d in setup.scheme.decays if d.lower == "g"}
    assert routes["e2"].branching_target == pytest.approx(0.52)
    assert routes["e3"].branching_other == pytest.approx(0.09)
    assert routes["r"].branching_target == pytest.approx(1.4e7 * 30e-9)
    assert routes["r"].branching_other == pytest.approx(1 - 3.3e7 * 30e-9)


def test_power_curve_tab_fills_in(open_window, qtbot, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    w.tabs.setCurrentWidget(w.power)
    qtbot.waitUntil(lambda: "quick" in w.power.done, timeout=WAIT_MS)
    f = w.power.values["quick"]["fraction"]
    assert np.isfinite(f).all() and np.all(np.diff(f) > -1e-6)  # more power, more transfer
    header, rows = w.power.curves()
    assert header[0] == "power_mW" and len(rows) == len(w.power.powers)


# -- files -----------------------------------------------------------------------------

def test_open_save_round_trip(open_window, qtbot, tmp_path):
    demo = pumpsim.load_setup(demo_setup_path())
    w = open_window(demo)
    assert not w.dirty
    target = tmp_path / "elsewhere" / "copy.toml"
    target.parent.mkdir()
    assert w.save_to(target)  # another folder: the scheme path is rewritten
    again = pumpsim.load_setup(target)
    assert same_values(again, demo)
    doc = tomllib.loads(target.read_text(encoding="utf-8"))  # parsed by the standard library
    assert {k: v for k, v in doc.items() if k != "scheme"} == {
        k: v for k, v in demo.document.items() if k != "scheme"}
    assert w.apply_edit("beam.repump.power_mW", 12.5) and w.dirty
    assert w.save_to(target) and not w.dirty
    assert w.open_path(target) and w.setup.beam("repump").power == pytest.approx(12.5e-3)


def test_a_bad_file_shows_a_message_and_changes_nothing(open_window, qtbot, tmp_path, cheap_path):
    setup = pumpsim.load_setup(cheap_path)
    w = open_window(setup)
    bad_value = tmp_path / "bad.toml"
    bad_value.write_text(CHEAP.replace("power_mW = 0.02", "power_mW = -1.0"), encoding="utf-8")
    broken = tmp_path / "broken.toml"
    broken.write_text("target = [unclosed", encoding="utf-8")
    for path, words in ((bad_value, "power_mW"), (broken, "broken.toml"),
                        (tmp_path / "missing.toml", "missing.toml")):
        assert not w.open_path(path)
        assert w.message.isVisible() and words in w.message.text and "Nothing was changed" in w.message.text
        assert w.setup is setup


def test_unsaved_changes_prompt_before_closing(open_window, qtbot, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    asked = []
    w.confirm_discard = lambda: asked.append(1) or "cancel"
    w.apply_edit("beam.pump.waist_mm", 2.0)
    w.close()
    assert asked and w.isVisible()
    w.confirm_discard = lambda: "discard"
    w.close()
    assert not w.isVisible()


def test_exports_are_valid(open_window, qtbot, tmp_path, cheap_path):
    w = open_window(pumpsim.load_setup(cheap_path))
    shown = wait_engine(qtbot, w).result
    h5 = tmp_path / "result.h5"
    assert w.export_result(h5)
    with h5py.File(h5, "r") as f:
        assert f.attrs["complete"]
        assert f["results"].attrs["transfer_fraction"] == shown.transfer_fraction
        assert f["profile/populations"].shape == shown.profile.shape
    table = tmp_path / "profile.csv"
    assert w.export_curves(table)
    with open(table, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    assert rows[0][0] == "z_mm" and len(rows) == len(shown.z) + 1
    assert float(rows[-1][rows[0].index("population_m")]) == pytest.approx(shown.transfer_fraction)
    png, svg = tmp_path / "plot.png", tmp_path / "plot.svg"
    assert w.export_plot(png) and w.export_plot(svg)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, section 5.2)
    root = ET.parse(svg).getroot()  # well-formed XML
    assert root.tag.endswith("svg")
    # the figure says where it comes from: setup file, key values, tool version
    text = " ".join(e.text or "" for e in root.iter())
    assert "cheap.toml" in text and f"pumpsim {pumpsim.__version__}" in text
    assert "power 0.02 mW" in text
    w.tabs.setCurrentWidget(w.levels)
    assert w.export_plot(tmp_path / "levels.png") and w.export_curves(tmp_path / "levels.csv")
    assert not w.export_plot(tmp_path / "plot.gif")
    assert "gif" in w.message.text


# -- look ------------------------------------------------------------------------------

def _luminance(colour):
    c = [int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    c = [x / 12.92 if x <= 0.03928 else ((x + 0.055) / 1.055) ** 2.4 for x in c]
    return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]


def _contrast(a, b):
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


@pytest.mark.parametrize("t", [theme.LIGHT, theme.DARK], ids=lambda t: t.name)
def test_both_themes_meet_contrast_ratios(t):
    """Relative luminance and contrast ratio as defined by WCAG 2.1
    (https://www.w3.org/TR/WCAG21/#dfn-contrast-ratio); thresholds 7, 4.5 and 3
    from its success criteria 1.4.6, 1.4.3 and 1.4.11."""
    assert _contrast(t.text, t.panel) >= 7 and _contrast(t.text, t.window) >= 7
    assert _contrast(t.caution_text, t.caution_bg) >= 7
    assert _contrast(t.error_text, t.error_bg) >= 7
    assert _contrast(t.muted, t.panel) >= 4.5
    for c in t.levels + (t.other, t.accent, t.target):
        assert _contrast(c, t.panel) >= 3


# -- the command -----------------------------------------------------------------------

def test_screenshot_command_writes_the_window(tmp_path, cheap_path):
    out = tmp_path / "shot.png"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    run = subprocess.run([sys.executable, "-m", "pumpsim.cli", "gui", "--screenshot", str(out),
                          str(cheap_path)], capture_output=True, text=True, env=env, timeout=300)
    assert run.returncode == 0, run.stderr
    from PySide6.QtGui import QImage

    image = QImage(str(out))
    assert not image.isNull() and image.width() > 800


def test_gui_command_says_what_is_missing(monkeypatch, capsys):
    import pumpsim.commands.gui as cmd

    real = importlib.util.find_spec
    monkeypatch.setattr(cmd.importlib.util, "find_spec",
                        lambda name, *a: None if name == "PySide6" else real(name, *a))
    assert pumpsim.cli.main(["gui"]) == 1
    assert "pumpsim[gui]" in capsys.readouterr().err


def test_switching_the_source_kind_from_its_control(open_window, qtbot, cheap_path):
    """A monoenergetic source becomes effusive: the effusive kind needs a temperature
    (present) and refuses a speed, so the speed key goes and its control with it."""
    w = open_window(pumpsim.load_setup(cheap_path))
    kind = w.panel.row("source.kind")
    kind.choice.setCurrentIndex(kind.choice.findData("effusive"))
    kind.choice.activated.emit(kind.choice.currentIndex())
    assert w.setup.source.kind == "effusive" and "speed_m_s" not in w.setup.document["source"]
    assert "source.speed_m_s" not in w.panel.rows and "source.temperature_K" in w.panel.rows
    qtbot.waitUntil(lambda: w.shown is not None and w.shown.result.setup.source.kind == "effusive",
                    timeout=WAIT_MS)


# -- a failing computation ---------------------------------------------------------------

def test_a_failed_computation_shows_a_message_and_keeps_the_edits(open_window, qtbot,
                                                                  cheap_path):
    """An exception in the engine stage of one request: the window says so, stays usable,
    keeps the unsaved setup, and the next edit computes (common practice, no source)."""
    setup = pumpsim.load_setup(cheap_path)

    def full(s, superseded):
        b = s.beam("pump")
        if (b.power, b.waist) == pytest.approx((4e-3, 1e-3)):  # the one request that fails
            raise RuntimeError("injected failure")
        return pumpsim.simulate(s)

    w = open_window(setup, live=LiveCompute(full=full))
    wait_engine(qtbot, w)
    assert not w.message.isVisible()
    assert w.apply_edit("beam.pump.power_mW", 4.0)
    edited = w.setup
    qtbot.waitUntil(lambda: "injected failure" in w.message.text, timeout=WAIT_MS)
    assert "engine computation failed: RuntimeError" in w.message.text
    assert "kept" in w.message.text
    assert w.setup is edited and w.dirty and "•" in w.windowTitle()
    qtbot.waitUntil(lambda: w.shown is not None and w.shown.generation == w.live.generation,
                    timeout=WAIT_MS)  # the quick estimate of the failed request is shown ...
    assert w.readouts.stage.text() == "computation failed"  # ... and says no result comes
    assert "engine run failed" in w.readouts.detail.text()
    assert not w.export_result_action.isEnabled()

    assert w.apply_edit("beam.pump.waist_mm", 1.5)  # the window still computes
    shown = wait_engine(qtbot, w)
    assert shown.result.setup.beam("pump").power == pytest.approx(4e-3)
    assert shown.result.setup.beam("pump").waist == pytest.approx(1.5e-3)
    expected = pumpsim.simulate(w.setup)
    assert w.readouts.fraction.text() == f"{expected.transfer_fraction:.2%}"
    assert w.readouts.stage.text() != "computation failed"
    assert not w.message.isVisible()  # the failure no longer describes what is shown
    assert w.dirty and w.export_result_action.isEnabled()
