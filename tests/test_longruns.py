"""Long runs: a million boards in chunks with bounded memory, and stopping them quickly
(from the window's session within 200 ms, and Ctrl-C on the command line)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import tracemalloc
from dataclasses import replace

import numpy as np
import pytest

from tolspread.designfile import load_demo
from tolspread.errors import Cancelled
from tolspread.evaluate import evaluate


def test_chunked_results_do_not_depend_on_the_chunk_size():
    # Invariant of the block-seeded sampler: chunking changes memory use, not the numbers.
    d = load_demo()
    a = evaluate(d, samples=5000, curves=False, chunk=4096)
    b = evaluate(d, samples=5000, curves=False, chunk=300)
    np.testing.assert_array_equal(a.values, b.values)
    np.testing.assert_array_equal(a.margins, b.margins)
    np.testing.assert_array_equal(a.metrics["cutoff_hz"], b.metrics["cutoff_hz"])


def test_memory_of_a_metrics_only_run_does_not_grow_with_the_frequency_grid():
    # Without curves the peak memory is the per-board results (values, cached scores,
    # metrics, margins: well under 1,000 bytes a board) plus a fixed number of chunks in
    # flight. Curves would add 404 frequencies x 8 bytes = 3,232 bytes a board for the gain
    # alone. Measured here: about 560 bytes a board, plus about 90 MiB for the chunks.
    d = load_demo()
    peaks = {}
    for n in (100_000, 300_000):
        tracemalloc.start()
        evaluate(d, samples=n, curves=False)
        peaks[n] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    per_board = (peaks[300_000] - peaks[100_000]) / 200_000
    assert per_board < 1000, per_board
    assert peaks[300_000] < 300_000 * 3232 / 2


def test_cancel_stops_between_chunks():
    d = load_demo()
    calls = {"n": 0}

    def stop() -> bool:
        calls["n"] += 1
        return calls["n"] > 3

    t = time.perf_counter()
    with pytest.raises(Cancelled):
        evaluate(d, samples=1_000_000, curves=False, should_stop=stop)
    assert time.perf_counter() - t < 2.0


@pytest.mark.gui
def test_window_session_cancels_a_million_board_run_within_200_ms(qtbot):
    from tolspread.app.qt_session import Session

    d = load_demo()
    big = replace(d, analysis=replace(d.analysis, samples=1_000_000))
    session = Session(d)
    try:
        with qtbot.waitSignal(session.view_ready, timeout=20000):
            session.request()
        session.replace_design(big, None)  # starts the long run on the worker
        with qtbot.waitSignal(session.progress, timeout=20000):
            pass  # the run is under way
        t0 = time.perf_counter()
        with qtbot.waitSignal(session.evaluation_stopped, timeout=5000):
            session.cancel()
        assert time.perf_counter() - t0 < 0.2
        assert not session.busy
        assert session.last_view is not None and session.last_view.samples == d.analysis.samples
    finally:
        session.shutdown()


@pytest.mark.slow
def test_ctrl_c_stops_the_command_line_cleanly(tmp_path):
    env = dict(os.environ, TOLSPREAD_CONFIG_DIR=str(tmp_path))
    out = tmp_path / "r.json"
    # 3.5 million boards: within the demo's memory rule (3,947,368 over its range), a minute of work
    proc = subprocess.Popen([sys.executable, "-m", "tolspread.app.cli", "analyze", "--samples", "3500000",
                             "--json", str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
                            text=True)
    time.sleep(3.0)
    t0 = time.perf_counter()
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=30)
    assert time.perf_counter() - t0 < 2.0
    assert proc.returncode == 130
    assert "Traceback" not in err and "stopped" in err
    assert not out.exists()  # nothing half-written
