"""Progress on stderr with the time left (a clock under the test's control, no timing)."""

import io

import pumpsim.progress as progress
from pumpsim.progress import RunProgress, clock


def test_run_progress_extrapolates_a_power_law_error_to_the_tolerance(monkeypatch):
    # error falling as a power of the time: 1e-2 at 1 s and 1e-3 at 4 s fall another
    # factor 10 by 16 s (e ~ t^-p with 4^p = 10: arithmetic, no source needed)
    now = [100.0]
    monkeypatch.setattr(progress.time, "monotonic", lambda: now[0])
    out = io.StringIO()
    notes = RunProgress(1e-4, out)
    now[0] += 1
    notes("grid: 8 steps per waist, error estimate 1e-2")
    now[0] += 3
    notes("grid: 16 steps per waist, error estimate 1e-3")
    first, second = out.getvalue().splitlines()
    assert first == "  grid: 8 steps per waist, error estimate 1e-2"  # quicker than RUN_DELAY
    assert second == f"  grid: 16 steps per waist, error estimate 1e-3  [4s, about {clock(12)} left]"
    # the parts refined add up: an offset rule's change joins the grid's error, 1.25e-3
    # at 8 s is 1e-2 / 8 (e ~ 1/t), which reaches 1e-4 at 100 s
    now[0] += 4
    notes("offset rule 2 -> 4 nodes: change 2.5e-4")
    assert out.getvalue().splitlines()[-1].endswith(f"[8s, about {clock(92)} left]")
    now[0] += 1
    notes("offset rule 4 -> 8 nodes: change 1e-6")
    notes("grid: 32 steps per waist, error estimate 1e-6")  # within the tolerance now
    assert out.getvalue().splitlines()[-1].endswith("error estimate 1e-6  [9s]")


def test_run_progress_says_it_is_computing_when_a_round_is_long(monkeypatch):
    now = [0.0]
    monkeypatch.setattr(progress.time, "monotonic", lambda: now[0])
    out = io.StringIO()
    notes = RunProgress(1e-4, out)
    now[0] = progress.LOG_EVERY + 1
    notes._beat_once()
    assert out.getvalue() == f"  still computing  [{clock(progress.LOG_EVERY + 1)}]\n"
