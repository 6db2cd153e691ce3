"""The window's figures quoted in README.md: a tolerance slider dragged with the mouse.

``python benchmarks/window.py`` prints, for the demo at 25 deg C (issue 13's workload: the
demo with its operating range and service life removed) and for the demo over its
operating range, the time from the newest mouse move to the redrawn plots and yield while
dragging, and from the release to everything redrawn with every board. ``python
benchmarks/engine.py --only window`` prints the same (it calls :func:`report`).

``--compare REV`` times the window of git revision ``REV`` (exported with ``git archive``
to a temporary folder, never checked out) against the work tree's, alternating child
processes old, new, old, new ... so both share the machine's load alike; medians of wall
and CPU time (every thread of the process). Timings are not tests.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = 5000
WORKLOADS = ("25C", "range")  # see workload()
LABELS = {"25C": "demo at 25 °C (range and life removed)", "range": "demo over its operating range"}


@dataclass
class Latency:
    """One workload's figures, each list sorted (s): ``drag``, per frame painted while
    dragging, from the request of the newest mouse move it shows to the spread plots and
    the histogram painted with it; ``release``, per release, from the release to the last
    paint of the plots, histogram and spread budget with every board; ``rate`` frames
    painted per second while dragging; ``drag_cpu`` CPU time (s, every thread) per frame
    while dragging; ``release_cpu`` CPU time (s) per release."""

    drag: list[float] = field(default_factory=list)
    release: list[float] = field(default_factory=list)
    rate: list[float] = field(default_factory=list)
    drag_cpu: list[float] = field(default_factory=list)
    release_cpu: list[float] = field(default_factory=list)

    def add(self, other: "Latency") -> None:
        for name in ("drag", "release", "rate", "drag_cpu", "release_cpu"):
            getattr(self, name).extend(getattr(other, name))

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("drag", "release", "rate", "drag_cpu", "release_cpu")}

    @classmethod
    def from_dict(cls, d: dict) -> "Latency":
        return cls(**d)

    def text(self) -> str:
        def pct(xs: list[float], q: float) -> float:
            xs = sorted(xs)
            return xs[min(len(xs) - 1, int(q * len(xs)))] * 1e3 if xs else math.nan

        med = lambda xs: float(np.median(xs)) * 1e3 if xs else math.nan  # noqa: E731
        return (f"drag: median {pct(self.drag, 0.5):.0f} ms, 90th percentile {pct(self.drag, 0.9):.0f} ms "
                f"({len(self.drag)} frames, {np.median(self.rate) if self.rate else math.nan:.0f} a second, "
                f"{med(self.drag_cpu):.0f} ms CPU a frame); release: median {pct(self.release, 0.5):.0f} ms, "
                f"worst {pct(self.release, 1.0):.0f} ms ({med(self.release_cpu):.0f} ms CPU)")


def workload(name: str):
    """The design of workload ``name`` at :data:`SAMPLES` boards, read from the work tree's
    demo file (the same design whichever revision's window is timed): ``"25C"`` the demo
    without its operating range and service life (issue 13 as filed), ``"range"`` the demo
    as shipped, judged over its operating range (if the file names none: -40..85 deg C and
    a 20-year life at 40 deg C, as the demo has them)."""
    from tolspread.designfile import load

    d = load(ROOT / "filters" / "data" / "demo_design.json").with_analysis(samples=SAMPLES)
    if name == "25C":
        return d.with_analysis(operating_range_c=None, judge_at_c=(), service_hours=0.0)
    if d.analysis.operating_range_c is None:
        d = d.with_analysis(operating_range_c=(-40.0, 85.0), service_hours=175_320.0, service_temp_c=40.0)
    return d


def slider_latency(design, drags: int = 6, moves: int = 30, move_ms: int = 16) -> Latency:
    """What a user sees while dragging a tolerance slider (C2's) of ``design``, driven by
    mouse events on the slider's handle (press, a move every ``move_ms`` ms as a 60 Hz
    mouse gives, release), ``drags`` times ``moves`` moves (see :class:`Latency`).

    The clock stops when the plots have painted the frame in their own paint events (timed
    by wrapping pyqtgraph's GraphicsView.paintEvent), as the window paints it: while
    dragging the spread plots and the histogram; after the release also the spread
    budget's chart (the last of these paints within 100 ms of the result)."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QEventLoop, QPoint, Qt, QTimer
    from PySide6.QtTest import QTest
    from PySide6.QtWidgets import QApplication, QStyle, QStyleOptionSlider

    from tolspread.app.qt_main import make_window

    getattr(__import__("tolspread.evaluate", fromlist=["x"]), "reuse_freed_memory", lambda: False)()  # as the tolspread program does at start

    app = QApplication.instance() or QApplication([])

    def wait(ms: int) -> None:
        """Run the event loop for ``ms`` ms as the window's own loop does (QEventLoop.exec
        lets other threads take the GIL; QTest.qWait holds it and starves the worker)."""
        loop = QEventLoop()
        QTimer.singleShot(ms, loop.quit)
        loop.exec()

    # [shown at, asked at, preview, painted at]: the clock stops at the frame's paints
    frames: list[list] = []
    import pyqtgraph.widgets.GraphicsView as graphics_view

    paint = graphics_view.GraphicsView.paintEvent
    timed = {"spread_plots", "histogram", "budget_chart"}

    def timed_paint(view, ev):
        out = paint(view, ev)
        if frames and view.objectName() in timed and (view.objectName() != "budget_chart" or not frames[-1][2]):
            frames[-1][3] = time.perf_counter()
        return out

    graphics_view.GraphicsView.paintEvent = timed_paint  # before the window is made (Qt binds it then)
    try:
        window = make_window(None)
        session = window.session
        session.replace_design(design, None)
        window.resize(1600, 950)
        window.show()
        while session.busy or session.last_view is None:  # the first result
            wait(10)
        asked: dict[int, float] = {}  # generation -> when its evaluation was asked for
        ask = session.request

        def timed_request(*args, **kwargs) -> int:
            t = time.perf_counter()
            g = ask(*args, **kwargs)
            asked[g] = t
            return g

        session.request = timed_request  # type: ignore[method-assign]

        def shown(view) -> None:
            frames.append([time.perf_counter(), asked.get(view.generation, math.nan), view.preview, None])

        session.view_ready.connect(shown)
        slider = window.parts.rows["C2"].slider

        def handle() -> QPoint:
            opt = QStyleOptionSlider()
            slider.initStyleOption(opt)
            return slider.style().subControlRect(QStyle.ComplexControl.CC_Slider, opt,
                                                 QStyle.SubControl.SC_SliderHandle, slider).center()

        out = Latency()
        for k in range(drags):
            step = 1 if k % 2 == 0 else -1  # back and forth: the handle stays inside the groove
            pos = handle()
            QTest.mousePress(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
            frames.clear()
            t_start, c_start = time.perf_counter(), time.process_time()
            for _ in range(moves):
                pos = QPoint(pos.x() + step, pos.y())
                QTest.mouseMove(slider, pos)
                wait(move_ms)  # the event loop runs between mouse moves, as it does for a user
            wait(100)  # the last frames of the drag
            cpu = time.process_time() - c_start
            done = [f for f in frames if f[2] and f[3] is not None]
            out.drag += [f[3] - f[1] for f in done]
            if done:
                out.rate.append(len(done) / (done[-1][3] - t_start))
                out.drag_cpu.append(cpu / len(done))
            frames.clear()
            t0, c0 = time.perf_counter(), time.process_time()
            QTest.mouseRelease(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
            while not any(not f[2] for f in frames):
                if time.perf_counter() - t0 > 60:
                    raise RuntimeError("no result after the slider's release")
                wait(1)
            wait(100)  # its paints
            end = max(f[3] or math.inf for f in frames if not f[2])
            out.release.append(end - t0)
            out.release_cpu.append(time.process_time() - c0)  # includes the 100 ms idle wait's little CPU
            frames.clear()
        session.undo_stack.setClean()
        window.close()
        app.processEvents()
    finally:
        graphics_view.GraphicsView.paintEvent = paint
    out.drag.sort()
    out.release.sort()
    return out


def report(drags: int = 6, names: tuple[str, ...] = WORKLOADS) -> None:
    """Print the workloads' figures (what ``benchmarks/engine.py --only window`` prints)."""
    for name in names:
        print(f"window, {LABELS[name]}, {SAMPLES} boards, slider C2 dragged with the mouse "
              f"(a move every 16 ms, previews on the first 1000 boards):")
        print("  " + slider_latency(workload(name), drags=drags).text())


def _export(rev: str, into: Path) -> Path:
    """Revision ``rev``'s files in ``into`` as an importable ``tolspread`` package
    (filters/ as tolspread, app/ as tolspread.app, as pyproject's package-dir maps them)."""
    tree = into / "tree"
    tree.mkdir()
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", rev, "filters", "app"],
                             check=True, capture_output=True).stdout
    subprocess.run(["tar", "-x", "-C", str(tree)], input=archive, check=True)
    pkg = into / "pkg"
    pkg.mkdir()
    (pkg / "tolspread").symlink_to(tree / "filters")
    (tree / "filters" / "app").symlink_to(tree / "app")
    return pkg


def _child(name: str, drags: int, pythonpath: str | None) -> Latency:
    env = dict(os.environ)
    if pythonpath:
        env["PYTHONPATH"] = pythonpath
    res = subprocess.run([sys.executable, __file__, "--child", name, "--drags", str(drags)], env=env,
                         check=True, capture_output=True, text=True, cwd=str(ROOT))
    return Latency.from_dict(json.loads(res.stdout.strip().splitlines()[-1]))


def compare(rev: str, rounds: int, drags: int, names: tuple[str, ...] = WORKLOADS) -> None:
    """Revision ``rev`` against the work tree, alternating child processes (see the module notes)."""
    with tempfile.TemporaryDirectory(prefix="tolspread-old-") as tmp:
        old_path = str(_export(rev, Path(tmp)))
        for name in names:
            got = {"old": Latency(), "new": Latency()}
            for _ in range(rounds):
                for which, path in (("old", old_path), ("new", None)):
                    got[which].add(_child(name, drags, path))
            print(f"window, {LABELS[name]}, {SAMPLES} boards, {rounds} x {drags} drags each, alternating:")
            for which in ("old", "new"):
                label = f"{rev}" if which == "old" else "work tree"
                print(f"  {label:>10s}: {got[which].text()}")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--compare", metavar="REV", help="time git revision REV against the work tree")
    ap.add_argument("--rounds", type=int, default=4, help="alternations old/new with --compare")
    ap.add_argument("--drags", type=int, default=6, help="drags per workload (per child with --compare)")
    ap.add_argument("--workload", choices=WORKLOADS, help="only this workload (25C or range)")
    ap.add_argument("--child", choices=WORKLOADS, help=argparse.SUPPRESS)
    args = ap.parse_args()
    names = (args.workload,) if args.workload else WORKLOADS
    if args.child:
        import tolspread

        print(f"tolspread from {Path(tolspread.__file__).parent}", file=sys.stderr)
        print(json.dumps(slider_latency(workload(args.child), drags=args.drags).to_dict()))
        return 0
    if args.compare:
        compare(args.compare, args.rounds, args.drags, names)
        return 0
    report(args.drags, names)
    return 0


if __name__ == "__main__":
    sys.exit(main())
