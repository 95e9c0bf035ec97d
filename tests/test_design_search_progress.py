"""Long searches report progress, can be stopped, and keep the best design found so far.

The searches are ``fractional_factorial`` (the minimum-aberration search) and ``optimal_design`` (random
starts). Stopping comes from a progress callback returning False, or from Ctrl-C (a real SIGINT sent to a
subprocess below). Resolution III for any set of distinct generator columns of weight >= 2 is common
practice (no main effect is aliased with another).
"""

from __future__ import annotations

import io
import os
import signal
import subprocess
import sys
import time
import warnings

import pytest

from levelwise import LevelwiseError, SearchStoppedWarning, TextProgress, fractional_factorial, optimal_design


def test_fraction_search_reports_progress_in_order():
    calls = []
    design = fractional_factorial(16, runs=32, randomize=False, progress=lambda f, m: calls.append((f, m)))
    assert calls, "the search reported nothing"
    fractions = [f for f, _ in calls]
    assert all(0.0 <= f <= 1.0 for f in fractions)
    assert fractions == sorted(fractions)
    assert all(isinstance(m, str) and m for _, m in calls)
    assert len(design) == 32


def test_fraction_search_stopped_by_callback_keeps_a_valid_design():
    started = time.monotonic()
    # 20 factors in 32 runs searches for seconds; stop at the first report.
    design = fractional_factorial(20, runs=32, randomize=False, progress=lambda f, m: False)
    assert time.monotonic() - started < 20
    assert design.metadata["search_complete"] is False
    assert design.metadata["stopped"] == "cancelled"
    assert len(design) == 32
    assert design.resolution >= 3  # distinct columns of weight >= 2 (common practice)
    assert len(set(design.generators)) == 20 - 5


def test_fraction_with_generators_needs_no_search():
    calls = []
    fractional_factorial(5, generators=["E=ABCD"], progress=lambda f, m: calls.append(f))
    assert calls == []


def test_optimal_search_stopped_by_callback_keeps_best_start():
    calls = []

    def stop_after_two(fraction, message):
        calls.append(message)
        return len(calls) < 2

    design = optimal_design(3, "full_second_order", runs=12, starts=50, seed=3, randomize=False,
                            progress=stop_after_two)
    assert calls == ["start 1 of 50", "start 2 of 50"]
    assert design.metadata["starts_run"] == 2
    assert design.metadata["search_complete"] is False
    assert design.metadata["stopped"] == "cancelled"
    # The first two starts of the same seed, run to the end, give the same best design.
    full = optimal_design(3, "full_second_order", runs=12, starts=2, seed=3, randomize=False, progress=False)
    assert full.metadata["search_complete"] is True
    assert design.metadata["log_det"] == pytest.approx(full.metadata["log_det"], rel=1e-12)


def test_keyboard_interrupt_in_callback_keeps_best_so_far():
    calls = []

    def interrupt_on_third(fraction, message):
        calls.append(fraction)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return True

    with pytest.warns(SearchStoppedWarning, match="interrupted"):
        design = optimal_design(2, "A + B + A:B", runs=6, starts=10, seed=1, progress=interrupt_on_third)
    assert design.metadata["stopped"] == "interrupted"
    assert design.metadata["search_complete"] is False
    assert design.metadata["starts_run"] == 3  # the callback runs after each start is kept


def test_keyboard_interrupt_before_any_result_is_raised():
    """Stopped in the first greedy pass of a resolution IV search there is no safe design to return."""

    def interrupt(fraction, message):
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        fractional_factorial(20, runs=64, resolution=4, progress=interrupt)


def test_keyboard_interrupt_in_fraction_search_keeps_a_design():
    def interrupt(fraction, message):
        raise KeyboardInterrupt

    with pytest.warns(SearchStoppedWarning):
        design = fractional_factorial(20, runs=32, randomize=False, progress=interrupt)
    assert design.metadata["stopped"] == "interrupted"
    assert design.resolution >= 3


def test_bad_progress_is_refused_by_name():
    with pytest.raises(LevelwiseError, match="'progress'"):
        fractional_factorial(8, runs=16, progress="yes")


def test_text_progress_line():
    out = io.StringIO()
    line = TextProgress("Search", stream=out)
    assert line(0.5, "start 5 of 10") is True
    line.finish()
    text = out.getvalue()
    assert "Search:  50.0% (start 5 of 10)" in text
    assert text.endswith("\n") and "done" in text


def test_default_progress_is_silent_for_quick_searches(capsys):
    fractional_factorial(7, runs=16, randomize=False)
    assert capsys.readouterr().err == ""


SCRIPT = r"""
import sys, warnings
import levelwise as lw
warnings.simplefilter("always")
design = lw.optimal_design(4, "full_second_order", runs=20, starts=100000, seed=1, randomize=False, progress=True)
print("RESULT", design.metadata["stopped"], design.metadata["search_complete"], design.metadata["starts_run"],
      len(design), flush=True)
"""


def test_ctrl_c_returns_best_design_so_far():
    """A real SIGINT (what Ctrl-C sends) during a long search: the best design so far comes back, flagged."""
    proc = subprocess.Popen([sys.executable, "-c", SCRIPT], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env={**os.environ, "PYTHONUNBUFFERED": "1"})
    try:
        # Wait for the progress line (a start has finished), then interrupt.
        seen = ""
        deadline = time.monotonic() + 60
        while "start " not in seen and time.monotonic() < deadline:
            seen += proc.stderr.read(1)
        assert "start " in seen, seen
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    result = [line for line in out.splitlines() if line.startswith("RESULT")]
    assert result, out + err
    _, stopped, complete, starts_run, runs = result[0].split()
    assert (stopped, complete, runs) == ("interrupted", "False", "20")
    assert 1 <= int(starts_run) < 100000
    assert "SearchStoppedWarning" in err
    warnings.resetwarnings()
