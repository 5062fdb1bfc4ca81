"""Computation off the GUI thread: frozen requests in, results out by signal.

The window sends :class:`Request` objects; the worker runs :meth:`Study.run` in its own thread
and answers with the request id, so the window can drop stale results. A newer request makes
the running one stop at its next progress tick.
"""

from __future__ import annotations

import gc
import threading
import traceback
from dataclasses import dataclass

from PySide6.QtCore import QObject, QThread, Signal, Slot

from mwreach.coverage.spec import StudySpec
from mwreach.coverage.study import Study

__all__ = ["Request", "Worker", "Computer", "SearchThread"]


class Cancelled(Exception):
    """Raised inside the progress callback to abandon a superseded or cancelled run."""


@dataclass(frozen=True)
class Request:
    """An immutable unit of work."""

    req_id: int
    spec: StudySpec
    bearings: tuple[float, ...] | None = None  # None: the study's own
    interference: bool = True
    label: str = "computing"


class Worker(QObject):
    progress = Signal(int, int, int)  # req_id, done, total
    finished = Signal(int, object)  # req_id, StudyResult
    failed = Signal(int, str)  # req_id, message
    cancelled = Signal(int)

    def __init__(self):
        super().__init__()
        self._latest = 0
        self._lock = threading.Lock()

    def supersede(self, req_id: int) -> None:
        """Called from the GUI thread: runs older than ``req_id`` should stop."""
        with self._lock:
            self._latest = max(self._latest, req_id)

    def cancel_all(self) -> None:
        with self._lock:
            self._latest += 1_000_000

    def _stale(self, req_id: int) -> bool:
        with self._lock:
            return req_id < self._latest

    @Slot(object)
    def run(self, req: Request) -> None:
        if self._stale(req.req_id):
            self.cancelled.emit(req.req_id)
            return

        step = [0]

        def tick(done, total):
            if self._stale(req.req_id):
                raise Cancelled
            if done * 20 // total > step[0] or done == total:  # about 20 updates per run
                step[0] = done * 20 // total
                self.progress.emit(req.req_id, done, total)

        try:
            result = Study(req.spec).run(bearings=req.bearings, progress=tick,
                                         interference=req.interference)
        except Cancelled:
            self.cancelled.emit(req.req_id)
            return
        except Exception as exc:  # any failure reaches the user as a message
            msg = f"{type(exc).__name__}: {exc}" if not isinstance(exc, ValueError) else str(exc)
            self.failed.emit(req.req_id, msg + ("" if isinstance(exc, ValueError)
                                                else "\n" + traceback.format_exc(limit=3)))
            return
        if self._stale(req.req_id):
            self.cancelled.emit(req.req_id)
            return
        self.finished.emit(req.req_id, result)


class Computer(QObject):
    """Owns the worker thread; hands out request ids; forwards only the newest results."""

    submit_signal = Signal(object)
    result = Signal(object, object)  # Request, StudyResult
    error = Signal(object, str)
    progress = Signal(str, int, int)  # label, done, total
    idle = Signal()

    def __init__(self, parent=None):
        super().__init__(parent)
        self._thread = QThread()
        self._worker = Worker()
        self._worker.moveToThread(self._thread)
        self.submit_signal.connect(self._worker.run)
        self._worker.finished.connect(self._on_finished)
        self._worker.failed.connect(self._on_failed)
        self._worker.progress.connect(self._on_progress)
        self._worker.cancelled.connect(self._on_cancelled)
        self._thread.start()
        self._next = 0
        self._requests: dict[int, Request] = {}

    def submit(self, spec: StudySpec, bearings=None, interference=True, label="computing") -> int:
        # Python's cyclic garbage collector may run in whichever thread allocates; if it ran in
        # the worker it could finalise Qt objects (old plot items, closed dialogs) off the GUI
        # thread, which aborts Qt. Collection is paused while a run is in flight and done here,
        # on the GUI thread, when the worker is idle.
        gc.disable()
        self._next += 1
        req = Request(self._next, spec, None if bearings is None else tuple(bearings),
                      interference, label)
        self._requests[req.req_id] = req
        self._worker.supersede(req.req_id)
        self.submit_signal.emit(req)
        return req.req_id

    def cancel(self) -> None:
        self._worker.cancel_all()

    @property
    def latest(self) -> int:
        return self._next

    def _on_progress(self, req_id, done, total):
        req = self._requests.get(req_id)  # a late report of a finished run is dropped
        if req_id == self._next and req is not None:
            self.progress.emit(req.label, done, total)

    def _collect(self):
        if not self._requests:
            gc.enable()
            gc.collect(1)  # the young generations: cheap; older ones follow automatically

    def _on_finished(self, req_id, result):
        req = self._requests.pop(req_id, None)
        if req is not None and req_id == self._next:
            self.result.emit(req, result)
            self.idle.emit()
        self._collect()

    def _on_failed(self, req_id, msg):
        req = self._requests.pop(req_id, None)
        if req is not None and req_id == self._next:
            self.error.emit(req, msg)
            self.idle.emit()
        self._collect()

    def _on_cancelled(self, req_id):
        self._requests.pop(req_id, None)
        if req_id == self._next:
            self.idle.emit()
        self._collect()

    def shutdown(self) -> None:
        self._worker.cancel_all()
        self._thread.quit()
        self._thread.wait()
        self._requests.clear()
        gc.enable()


class _StoppableRun(QThread):
    """A long run off the GUI thread that reports progress and can be stopped: ``done(result)``
    when finished (or stopped: what is done so far), ``failed(message)`` on an error. A
    subclass's :meth:`work` calls the core with :meth:`progress`, which raises
    KeyboardInterrupt once :meth:`stop` is asked — the core keeps what is done."""

    progressed = Signal(int, int)
    done = Signal(object)
    failed = Signal(str)

    def __init__(self, parent=None):
        super().__init__(parent)
        self._stop = False

    def stop(self):
        self._stop = True

    def progress(self, done, total, _elapsed=None):
        self.progressed.emit(done, total)
        if self._stop:
            raise KeyboardInterrupt

    def work(self):
        raise NotImplementedError

    def run(self):
        try:
            self.done.emit(self.work())
        except Exception as exc:  # shown to the user as a message, not a console trace
            self.failed.emit(f"{type(exc).__name__}: {exc}")


class SearchThread(_StoppableRun):
    """A site search off the GUI thread (coverage.search.run_search)."""

    def __init__(self, spec, settings, parent=None):
        super().__init__(parent)
        self.spec, self.settings = spec, settings

    def work(self):
        from mwreach.coverage.search import run_search

        return run_search(self.spec, self.settings, None, self.progress)


class ChannelThread(_StoppableRun):
    """A channel search off the GUI thread (coverage.channels.run_channels)."""

    def __init__(self, spec, doc, from_khz, to_khz, parent=None):
        super().__init__(parent)
        self.spec, self.doc, self.band = spec, doc, (from_khz, to_khz)

    def work(self):
        from mwreach.coverage.channels import run_channels

        return run_channels(self.spec, self.doc, *self.band, progress=self.progress)


class ExposureThread(QThread):
    """An RF exposure screening off the GUI thread (coverage.exposure.screening):
    ``done(dict)`` or ``failed(message)``."""

    done = Signal(object)
    failed = Signal(str)

    def __init__(self, spec, period: str, parent=None):
        super().__init__(parent)
        self.spec, self.period = spec, period

    def run(self):
        from mwreach.coverage.exposure import screening

        try:
            conf = self.spec.exposure or {}
            self.done.emit(screening(self.spec, self.period, conf.get("height_m", 2.0),
                                     max_m=300.0, grid=False, profile=False,
                                     far_step_m=5.0))
        except Exception as exc:  # shown to the user as a message, not a console trace
            self.failed.emit(f"{type(exc).__name__}: {exc}")
