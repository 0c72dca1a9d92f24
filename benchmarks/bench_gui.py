"""How fast the window answers a slider move on the demo setup.

Run:  QT_QPA_PLATFORM=offscreen python benchmarks/bench_gui.py [--moves N] [--pause S] [--setup FILE]

Opens the window offscreen on the demo, waits for its first converged
result, then moves the pump-power slider (as a user's drag would: the
slider's own valueChanged path) and times, from the move:

* first update: the quick estimate handed to the views (target 50 ms), and
  painted: the window's next repaint after it done as well;
* coarse: the engine's result at the coarse tolerance (1e-3) on screen, when
  the window takes that pass (only after a run at the setup's tolerance took
  over a second; not on the demo);
* converged: the engine's result at the setup's tolerance on screen (target 1 s);

for single moves made after the window has sat for ``--pause`` seconds (as a
user reads a result), the same moves made at once after each converged result
(the worst case: that result's frame is painted first), the paused moves
again while the power x waist study computes in its tab (the live result
comes first, so their ratio to the first run should be near 1), and the end
of a 20-step drag at 60 Hz. The script waits in Qt's own event wait, as a real
window does, rather than spinning. Baselines
measured in the same run: the quick estimate and ``pumpsim.simulate`` (at the
coarse and at the setup's tolerance) called directly, without the window.
Figures are medians over the moves, with their range; the machine's load is
printed too, since other work shares its cores.
"""

import argparse
import os
import statistics
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

FIRST_TARGET_S, CONVERGED_TARGET_S = 0.050, 1.0
DRAG_STEPS, DRAG_INTERVAL_S = 20, 1 / 60


def wait(app, condition, timeout=600.0):
    """Run the event loop until ``condition()``: blocked in Qt's own wait between events,
    as a real window is, rather than spinning (which would take CPU from the engine)."""
    from PySide6.QtCore import QEventLoop, QTimer

    tick = QTimer()
    tick.start(10)  # wakes the loop to look at the condition; arrivals are timed in slots
    end = time.perf_counter() + timeout
    try:
        while not condition():
            if time.perf_counter() > end:
                raise TimeoutError("no result in time")
            app.processEvents(QEventLoop.ProcessEventsFlag.WaitForMoreEvents)
    finally:
        tick.stop()


def idle(app, seconds):
    """Let the window sit, as a user reads what it shows."""
    end = time.perf_counter() + seconds
    wait(app, lambda: time.perf_counter() >= end)


def spread(xs, scale=1.0, digits=0):
    """``median [min-max]`` of some timings."""
    return (f"{statistics.median(xs) * scale:.{digits}f} "
            f"[{min(xs) * scale:.{digits}f}-{max(xs) * scale:.{digits}f}]")


def main():
    import numpy as np

    import pumpsim
    from pumpsim.demo import demo_setup_path
    from pumpsim_gui.app import application
    from pumpsim_gui.evaluate import quick_estimate
    from pumpsim_gui.window import MainWindow

    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--moves", type=int, default=5, help="single moves to time (default 5)")
    ap.add_argument("--setup", help="setup file (default: the demo)")
    ap.add_argument("--pause", type=float, default=0.5,
                    help="seconds the window sits after each converged result before the "
                         "next single move, as a user reads it (default 0.5); the moves "
                         "are then repeated with no pause, the worst case")
    args = ap.parse_args()

    setup = pumpsim.load_setup(args.setup or demo_setup_path())
    t = time.perf_counter()
    quick_estimate(setup)
    t_quick = time.perf_counter() - t
    t = time.perf_counter()
    pumpsim.simulate(setup.with_value("numerics.tolerance", 1e-3))
    t_coarse = time.perf_counter() - t
    t = time.perf_counter()
    pumpsim.simulate(setup)
    t_engine = time.perf_counter() - t

    app = application()
    w = MainWindow(setup)
    w.confirm_discard = lambda: "discard"
    w.resize(1480, 940)
    w.show()
    seen = []
    w.displayed.connect(lambda u: seen.append((time.perf_counter(), u.generation, u.stage)))

    def arrival(gen, stage):
        return next((s for s, g, st in seen if g == gen and st == stage), None)

    def current_engine():
        return w.shown is not None and w.shown.stage == "engine" and \
            w.shown.generation == w.live.generation

    wait(app, current_engine)
    row = w.panel.row(f"beam.{setup.beams[0].name}.power_mW")
    def single_moves(pause):
        first, painted, coarse, converged = [], [], [], []
        for k in range(args.moves):
            idle(app, pause)
            t0 = time.perf_counter()
            row.move_slider(row.slider.value() + (40 if k % 2 == 0 else -40))
            gen = w.live.generation
            wait(app, lambda: any(g == gen for _, g, _ in seen))
            app.processEvents()  # the repaint the update asked for
            painted.append(time.perf_counter() - t0)
            wait(app, lambda: arrival(gen, "engine") is not None)
            first.append(min(s for s, g, _ in seen if g == gen) - t0)
            if arrival(gen, "coarse") is not None:
                coarse.append(arrival(gen, "coarse") - t0)
            converged.append(arrival(gen, "engine") - t0)
        return first, painted, coarse, converged

    # Each set of moves starts from the same record of the last engine run, so that all
    # take the same path (the coarse first pass comes only after a run over a second).
    start_s = w.live.last_engine_s

    def moves(pause):
        w.live.last_engine_s = start_s
        return single_moves(pause)

    runs = {f"after a {args.pause:g} s pause": moves(args.pause)}
    # the same moves with the power x waist study computing in its tab: the live result
    # must come first (studies wait for it), so its time should match the first run's
    w.tabs.setCurrentWidget(w.map)
    wait(app, lambda: np.isfinite(w.map.values["quick"]["fraction"]).any())
    runs[f"after a {args.pause:g} s pause, map study running"] = moves(args.pause)
    w.tabs.setCurrentWidget(w.profile)
    runs["at once after the converged result"] = moves(0.0)

    for step in range(DRAG_STEPS):
        t0 = time.perf_counter()
        row.move_slider(row.slider.value() + 2)
        idle(app, DRAG_INTERVAL_S - (time.perf_counter() - t0))
    gen = w.live.generation
    wait(app, lambda: arrival(gen, "engine") is not None)
    drag_first = arrival(gen, "quick")
    drag_first = None if drag_first is None else drag_first - t0
    drag_converged = arrival(gen, "engine") - t0
    shown_during_drag = len({g for _, g, st in seen if st == "quick" and g > gen - DRAG_STEPS})
    w.close()

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"setup: {setup.path}   machine load (1 min): {load:.1f} on {os.cpu_count()} cores")
    print("baselines, same run, no window:")
    print(f"  quick estimate direct       {t_quick * 1e3:9.1f} ms")
    print(f"  pumpsim.simulate, tol 1e-3  {t_coarse:9.2f} s")
    print(f"  pumpsim.simulate, tol {setup.numerics.tolerance:<6g}{t_engine:9.2f} s")
    plain = statistics.median(runs[f"after a {args.pause:g} s pause"][3])
    for name, (first, painted, coarse, converged) in runs.items():
        med_first, med_conv = statistics.median(first), statistics.median(converged)
        print(f"single slider moves ({args.moves}) {name}, median [min-max]:")
        print(f"  first update to the views   {spread(first, 1e3)} ms   target "
              f"{FIRST_TARGET_S * 1e3:.0f} ms   ratio to direct quick estimate "
              f"{med_first / t_quick:.2f}")
        print(f"  ... and painted             {spread(painted, 1e3)} ms")
        if coarse:
            print(f"  converged to 1e-3 on screen {spread(coarse, 1, 2)} s")
        print(f"  converged on screen         {spread(converged, 1, 2)} s   target "
              f"{CONVERGED_TARGET_S:.0f} s    ratio to direct simulate {med_conv / t_engine:.2f}"
              f", to the first run {med_conv / plain:.2f}")
    print(f"drag of {DRAG_STEPS} moves at 60 Hz: {shown_during_drag} quick updates shown during it;")
    drag_coarse = arrival(gen, "coarse")
    print(f"  after the last move: first update "
          f"{'(already beaten by the engine)' if drag_first is None else f'{drag_first * 1e3:.1f} ms'}, "
          + ("" if drag_coarse is None else f"converged to 1e-3 {drag_coarse - t0:.2f} s, ")
          + f"converged {drag_converged:.2f} s")


if __name__ == "__main__":
    main()
