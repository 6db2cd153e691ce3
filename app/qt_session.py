"""The session model: the design being edited, its file, undo history, and evaluations.

Widgets never change a design themselves: they call :meth:`Session.apply_checked` (one
undoable edit, if the loader's rules accept it), or :meth:`Session.try_tolerance` while a
tolerance slider is dragged and :meth:`Session.commit_tolerance` when it is released. The
session alone holds the tolerances being tried (:attr:`Session.what_if`); the window only
shows them. The session asks a worker thread for an evaluation after each change; results
carry a generation number and stale ones are dropped, so a newer request always wins and
the window never waits.

A session asks for its first evaluation as soon as it is made, and again whenever its
design is replaced (New, Open, restore), so a window shows figures without any edit.
"""
from __future__ import annotations

import threading
import time
import traceback
from pathlib import Path
from types import MappingProxyType
from typing import Mapping

from PySide6.QtCore import QObject, QThread, QTimer, Signal, Slot
from PySide6.QtGui import QUndoCommand, QUndoStack

from ..design import Design
from ..designfile import check_design, dumps, load, save
from ..errors import Cancelled, InputError, ValidationError
from ..evaluate import Prepared, prepare
from ..grades import Grade
from ..liveview import SecondQuantity, ViewData, ViewRequest, compute_view, prepared_for
from ..memory import check_boards


PREVIEW_BOARDS = 1000  # boards evaluated while a slider is being dragged
FRAME_S = 1 / 60  # previews are shown at most once per frame of a 60 Hz screen; a full result at once


class _Worker(QObject):
    """Runs the newest pending request; older pending ones are skipped.

    A running full evaluation stops when any newer request arrives. A running preview
    (a slider held) is finished even when newer previews wait, so a drag shows frames
    however fast the mouse moves; it stops only for a full request or a cancel."""

    finished = Signal(object)          # ViewData
    failed = Signal(int, str, str)     # generation, message, details
    stopped = Signal(int)              # generation cancelled or superseded mid-run
    progress = Signal(int, int, int)   # generation, done, total

    def __init__(self) -> None:
        super().__init__()
        self._lock = threading.Lock()
        self._pending: ViewRequest | None = None
        self._latest = 0
        self._latest_full = 0  # the newest request for every board
        self._cancelled = 0  # requests up to this generation are cancelled
        self._prepared: Prepared | None = None

    def submit(self, req: ViewRequest) -> None:
        """Called from the GUI thread: replace whatever is pending."""
        with self._lock:
            self._pending = req
            self._latest = req.generation
            if req.boards is None:
                self._latest_full = req.generation

    def cancel_through(self, generation: int) -> None:
        with self._lock:
            self._latest = max(self._latest, generation + 1)
            self._cancelled = max(self._cancelled, generation)
            if self._pending is not None and self._pending.generation <= generation:
                self._pending = None

    def _stale(self, req: ViewRequest) -> bool:
        """True when ``req``'s result is no longer wanted (see the class notes)."""
        with self._lock:
            if req.boards is None:
                return req.generation < self._latest
            return req.generation < self._latest_full or req.generation <= self._cancelled

    @Slot()
    def run_pending(self) -> None:
        while True:
            with self._lock:
                req, self._pending = self._pending, None
            if req is None:
                return
            try:
                self._prepared = prepared_for(req.design, self._prepared)
                big = req.design.analysis.samples >= 50_000
                view = compute_view(
                    req, self._prepared,
                    progress=(lambda d, t, g=req.generation: self.progress.emit(g, d, t)) if big else None,
                    should_stop=lambda r=req: self._stale(r))
            except Cancelled:
                self.stopped.emit(req.generation)
                continue
            except InputError as exc:
                self.failed.emit(req.generation, str(exc), "")
                continue
            except Exception as exc:  # noqa: BLE001 - shown to the user, never crashes the window
                self.failed.emit(req.generation, f"evaluation failed: {exc}", traceback.format_exc())
                continue
            if not self._stale(req):
                self.finished.emit(view)


class _EditCommand(QUndoCommand):
    def __init__(self, session: "Session", before: Design, after: Design, text: str) -> None:
        super().__init__(text)
        self._session = session
        self._before = before
        self._after = after

    def redo(self) -> None:
        self._session._set_design(self._after)

    def undo(self) -> None:
        self._session._set_design(self._before)


class Session(QObject):
    """The open design and everything that follows from it."""

    design_changed = Signal(object)       # Design
    view_ready = Signal(object)           # ViewData
    evaluation_failed = Signal(str, str)  # message, details
    busy_changed = Signal(bool)
    progress = Signal(int, int)           # done, total
    path_changed = Signal(object)         # Path | None
    dirty_changed = Signal(bool)
    evaluation_stopped = Signal(int)      # generation
    run_cancelled = Signal(object, object)  # Design whose run was cancelled, ViewData still shown (or None)
    design_replaced = Signal(object)      # Design (New, Open, restore: a different design, not an edit)
    edit_refused = Signal(str, str)       # the edit's name, the reason (one line)
    _wake = Signal()

    def __init__(self, design: Design, path: Path | None = None) -> None:
        super().__init__()
        self._design = design
        self._path = path
        self._generation = 0
        self._shown_generation = 0
        self._second: SecondQuantity = "phase"
        self._trying: dict[str, float] = {}  # ref -> tolerance (%) being tried (a slider held)
        self._what_if: tuple[Grade, ...] | None = None  # the grades the tried tolerances give
        self.undo_stack = QUndoStack(self)
        # a slot of this object (not a lambda): Qt drops the connection when the session goes,
        # so the undo stack's own teardown cannot emit into a deleted session
        self.undo_stack.cleanChanged.connect(self._on_clean_changed)
        self._thread = QThread()
        self._thread.setObjectName("tolspread-evaluation")
        self._worker = _Worker()
        self._worker.moveToThread(self._thread)
        self._wake.connect(self._worker.run_pending)
        self._worker.finished.connect(self._on_view_finished)
        self._worker.failed.connect(self._on_view_failed)
        self._worker.progress.connect(self._on_progress)
        self._worker.stopped.connect(self._preview_done)
        self._worker.stopped.connect(self.evaluation_stopped)
        self._thread.start()
        self._running_design: Design | None = None
        self._closed = False
        self.last_view: ViewData | None = None
        # frame pacing: a preview arriving within FRAME_S of the last one shown waits for
        # the next frame, and only the newest waiting one is shown then
        self._shown_at = -1.0
        self._held: ViewData | None = None
        self._previewing = False  # the newest request is a preview: older previews may still be shown
        # one preview at a time: the next starts when this one has been shown (see request)
        self._preview_running = 0  # generation of the preview being computed (0: none)
        self._next_preview: ViewRequest | None = None  # the newest preview asked for meanwhile
        self._preview_s = 0.0  # how long the last preview took to compute (s)
        self._preview_start = QTimer(self)  # starts the next preview when it would arrive a frame on
        self._preview_start.setSingleShot(True)
        self._preview_start.timeout.connect(self._start_preview)
        self._frame = QTimer(self)
        self._frame.setSingleShot(True)
        self._frame.timeout.connect(self._show_held)
        self.request()  # the first figures come without any edit

    # --- reading -------------------------------------------------------------------------
    @property
    def design(self) -> Design:
        return self._design

    @property
    def path(self) -> Path | None:
        return self._path

    @property
    def dirty(self) -> bool:
        return not self.undo_stack.isClean()

    @property
    def busy(self) -> bool:
        return self._shown_generation < self._generation

    @property
    def second(self) -> SecondQuantity:
        return self._second

    @property
    def what_if(self) -> Mapping[str, float]:
        """The tolerances (%) being tried, by reference designator: empty unless a
        tolerance slider is held (read-only; :meth:`try_tolerance` changes it)."""
        return MappingProxyType(dict(self._trying))

    @property
    def closed(self) -> bool:
        """True after :meth:`shutdown`: no more evaluations, no more signals."""
        return self._closed

    @Slot(bool)
    def _on_clean_changed(self, clean: bool) -> None:
        self.dirty_changed.emit(not clean)

    # --- editing -------------------------------------------------------------------------
    def apply(self, design: Design, text: str) -> None:
        """Make ``design`` the current design as one undoable edit named ``text`` (any
        what-if ends). ``design`` must already pass :func:`filters.designfile.check_design`:
        edits from widgets go through :meth:`apply_checked`."""
        if design == self._design:
            self._end_what_if()
            self.request()
            return
        self.undo_stack.push(_EditCommand(self, self._design, design, text))

    def apply_checked(self, design: Design, text: str) -> str | None:
        """Make ``design`` the current design as one undoable edit named ``text`` if the
        loader accepts it (:func:`filters.designfile.check_design`: the rules a saved file is
        opened with), so whatever the window accepts saves into a file that opens.

        Returns None, or the reason it was refused (one line; the design is unchanged and
        :attr:`edit_refused` carries ``text`` and the reason)."""
        try:
            checked = check_design(design)
            if checked.analysis.samples != self._design.analysis.samples:  # the memory rule (filters/memory.py)
                check_boards(prepare(checked), checked.analysis.samples, "analysis.samples")
        except InputError as exc:
            reason = exc.lines()[0] if isinstance(exc, ValidationError) else str(exc)
            self.edit_refused.emit(text, reason)
            return reason
        self.apply(checked, text)
        return None

    def _set_design(self, design: Design) -> None:
        self._design = design
        self._end_what_if()
        # the evaluation starts before the widgets show the new design, not after them
        self.request()
        self.design_changed.emit(design)

    # --- what-if tolerances (a slider being dragged) ------------------------------------
    def tolerance_design(self, tolerances: Mapping[str, float]) -> Design:
        """The current design with each part of ``tolerances`` (ref -> %) at that what-if
        tolerance, as the loader builds it: what a drag previews and what its release
        applies are this one design (raises :class:`ValidationError` if refused)."""
        design = self._design
        for ref, pct in tolerances.items():
            design = design.with_part(ref, tolerance_pct=pct)
        return check_design(design)

    def try_tolerance(self, ref: str, pct: float) -> str | None:
        """Show part ``ref`` at ``pct`` % without editing the design (a slider held).

        The first :data:`PREVIEW_BOARDS` boards (the same boards the full run starts with)
        are evaluated, so the curves follow the hand. Returns None, or the reason the
        loader's rules refuse that tolerance (the preview then stays as it was)."""
        trying = {**self._trying, ref: pct}
        try:
            grades = self.tolerance_design(trying).part_grades()
        except ValidationError as exc:
            return exc.lines()[0]
        self._trying, self._what_if = trying, grades
        self.request(boards=PREVIEW_BOARDS)
        return None

    def commit_tolerance(self, ref: str, pct: float) -> str | None:
        """Make part ``ref``'s tolerance ``pct`` % one undoable edit (the slider released):
        the design :meth:`tolerance_design` gives, the one the preview showed. The what-if
        ends; on a refusal every board of the unchanged design is evaluated again and the
        reason returned (:attr:`edit_refused` carries it too)."""
        text = f"{ref} tolerance ±{pct:g} %"
        try:
            design = self.tolerance_design({ref: pct})
        except ValidationError as exc:
            reason = exc.lines()[0]
            self.end_what_if()  # the preview of the refused tolerance must not stay on screen
            self.edit_refused.emit(text, reason)
            return reason
        self.apply(design, text)
        return None

    def end_what_if(self) -> int:
        """Stop trying tolerances without an edit: every board of the design as it is is
        evaluated again. Returns the generation number of that evaluation."""
        self._end_what_if()
        return self.request()

    def _end_what_if(self) -> None:
        self._trying = {}
        self._what_if = None

    def set_second(self, second: SecondQuantity) -> None:
        if second != self._second:
            self._second = second
            self.request()

    def replace_design(self, design: Design, path: Path | None) -> None:
        """Open a different design (New, Open, restore): clears the undo history."""
        self.undo_stack.clear()
        self._path = path
        self.path_changed.emit(path)
        self._set_design(design)
        self.undo_stack.setClean()
        self.dirty_changed.emit(False)
        self.design_replaced.emit(design)

    # --- files ---------------------------------------------------------------------------
    def open(self, path: Path) -> None:
        """Load ``path`` (raises InputError; the current design stays on failure)."""
        design = load(path)
        self.replace_design(design, Path(path))

    def save_as(self, path: Path) -> None:
        """Save atomically to ``path`` (raises InputError; the old file stays intact)."""
        save(self._design, path)
        self._path = Path(path)
        self.path_changed.emit(self._path)
        self.undo_stack.setClean()

    def text(self) -> str:
        return dumps(self._design)

    # --- evaluation ----------------------------------------------------------------------
    def request(self, boards: int | None = None) -> int:
        """Ask for an evaluation of the current state; returns its generation number.

        ``boards`` limits it to the first that many boards (a preview). One preview is
        computed at a time: one asked for while another is being computed waits until
        that one has been shown, and then only the newest waiting one starts (a drag's
        newest position), so the worker never computes frames nobody sees while the
        window draws the last one; it starts late enough to arrive a frame
        (:data:`FRAME_S`) after the last shown, not early to wait for its frame."""
        if self._closed:
            return self._generation
        self._generation += 1
        self._previewing = boards is not None
        self._running_design = self._design
        req = ViewRequest(self._generation, self._design, self._what_if, self._second,
                          budget=boards is None, boards=boards)
        self._next_preview = req if boards is not None else None
        if boards is None:
            self._preview_running = 0
            self._preview_start.stop()
            self._submit(req)
        elif not self._preview_running and not self._preview_start.isActive():
            self._start_preview()
        self.busy_changed.emit(True)
        return self._generation

    def _submit(self, req: ViewRequest) -> None:
        self._worker.submit(req)
        self._wake.emit()

    @Slot()
    def _start_preview(self) -> None:
        """Start the newest preview asked for, if any: at once, or (frames at most every
        :data:`FRAME_S`) when, computed as long as the last, it arrives one frame after the
        last one shown. It then shows the hand's newest position, not one that waited."""
        req = self._next_preview
        if req is None or self._closed or self._preview_running:
            return
        early = self._shown_at + FRAME_S - self._preview_s - time.perf_counter()
        if early > 0.001:
            self._preview_start.start(max(1, round(1000 * early)))
            return
        self._next_preview, self._preview_running = None, req.generation
        self._submit(req)

    def _preview_done(self, generation: int) -> None:
        """The preview ``generation`` was shown, failed or stopped: start the newest one
        asked for meanwhile, if any."""
        if generation != self._preview_running:
            return
        self._preview_running = 0
        self._start_preview()

    def cancel(self) -> None:
        """Stop the running evaluation; the last shown result stays.

        Emits :attr:`run_cancelled` with the design whose run was stopped and the view still
        shown, so the window can say which run its figures belong to."""
        if not self.busy:
            return
        self._worker.cancel_through(self._generation)
        self._next_preview, self._preview_running = None, 0
        self._preview_start.stop()
        self._held = None  # a preview waiting for its frame is not shown either
        self._frame.stop()
        self._shown_generation = self._generation
        self.busy_changed.emit(False)
        self.run_cancelled.emit(self._running_design, self.last_view)

    @Slot(object)
    def _on_view_finished(self, view: ViewData) -> None:
        if self._closed:
            return
        if view.generation < self._generation and not (view.preview and self._previewing):
            self._preview_done(view.generation)
            return  # a newer request is on its way
        self._held = None
        wait = self._shown_at + FRAME_S - time.perf_counter()
        if view.preview and wait > 0:
            self._held = view
            if not self._frame.isActive():
                self._frame.start(max(1, round(1000 * wait)))
            return
        self._frame.stop()
        self._show(view)

    @Slot()
    def _show_held(self) -> None:
        view, self._held = self._held, None
        if view is not None and not self._closed and (view.generation >= self._generation or self._previewing):
            self._show(view)
        elif view is not None:
            self._preview_done(view.generation)

    def _show(self, view: ViewData) -> None:
        self._shown_at = time.perf_counter()
        self._shown_generation = view.generation
        self.last_view = view
        self.busy_changed.emit(False)
        self.view_ready.emit(view)
        if view.preview:
            self._preview_s = min(view.elapsed_s, FRAME_S)
            self._preview_done(view.generation)

    @Slot(int, str, str)
    def _on_view_failed(self, generation: int, message: str, details: str) -> None:
        if self._closed:
            return
        self._preview_done(generation)
        if generation < self._generation:
            return
        self._shown_generation = generation
        self.busy_changed.emit(False)
        self.evaluation_failed.emit(message, details)

    @Slot(int, int, int)
    def _on_progress(self, generation: int, done: int, total: int) -> None:
        if self._closed:
            return
        if generation == self._generation:
            self.progress.emit(done, total)

    def evaluate_now(self) -> ViewData:
        """Evaluate synchronously on the calling thread (library-level tests only: the
        window, ``--screenshot`` and the acceptance tests wait for the worker instead)."""
        self._generation += 1
        self._previewing = False
        self._next_preview, self._preview_running = None, 0
        self._preview_start.stop()
        req = ViewRequest(self._generation, self._design, self._what_if, self._second)
        self._worker.cancel_through(self._generation - 1)
        view = compute_view(req)
        self._on_view_finished(view)
        return view

    def shutdown(self) -> None:
        """Stop the worker and disconnect everything (the window is closing); safe to call twice.

        After this no signal of the session fires: a slot can never run against a widget
        that is being deleted."""
        if self._closed:
            return
        self._closed = True
        self._worker.cancel_through(self._generation)
        self.blockSignals(True)
        self.undo_stack.blockSignals(True)  # its teardown emits cleanChanged
        self._thread.quit()
        self._thread.wait(30_000)

