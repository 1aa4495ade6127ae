"""Long work off the window's thread: one job at a time, with progress, time left and Cancel.

:class:`JobRunner` runs a plain function ``work(report)`` on Qt's thread pool
(:class:`QThreadPool`); the window stays responsive meanwhile. ``report(what,
done, total)`` is the statistics core's progress callback: it forwards the
count to the window through a queued signal and returns False once Cancel was
pressed, which makes the computation stop (:class:`calcbuilder.stats.CancelledError`).
The result, the error or the cancellation arrives on the window's thread, where
the caller applies it -- so nothing partial is ever applied or written.

The time left is the elapsed time scaled by the share still to do (no
statistics): shown once a few percent are done.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import QObject, QRunnable, QThreadPool, Signal

__all__ = ["Job", "JobRunner", "time_left"]

Work = Callable[[Callable[[str, int, int], bool]], Any]


def time_left(elapsed: float, done: int, total: int) -> str:
    """``"about 1 min 20 s left"`` from the elapsed seconds and the share done ("" too early)."""
    if total <= 0 or done <= 0 or done >= total or done / total < 0.03:
        return ""
    seconds = elapsed * (total - done) / done
    if seconds < 1:
        return "less than a second left"
    minutes, secs = divmod(round(seconds), 60)
    return f"about {minutes} min {secs} s left" if minutes else f"about {secs} s left"


class _Signals(QObject):
    progress = Signal(str, int, int)
    finished = Signal(object)
    failed = Signal(object)
    cancelled = Signal()


class Job(QRunnable):
    """One run of ``work`` on the thread pool; emits on :attr:`signals`."""

    def __init__(self, work: Work) -> None:
        super().__init__()
        self.setAutoDelete(False)
        self.work = work
        self.signals = _Signals()
        self._cancel = threading.Event()
        self.started_at = 0.0

    def cancel(self) -> None:
        """Ask the work to stop at its next progress report."""
        self._cancel.set()

    @property
    def cancel_requested(self) -> bool:
        return self._cancel.is_set()

    def report(self, what: str, done: int, total: int) -> bool:
        """The progress callback handed to the work: False once cancelled."""
        self.signals.progress.emit(what, int(done), int(total))
        return not self._cancel.is_set()

    def run(self) -> None:
        from ...stats.errors import CancelledError

        self.started_at = time.monotonic()
        try:
            result = self.work(self.report)
        except CancelledError:
            self.signals.cancelled.emit()
        except Exception as exc:  # every failure is shown to the author, never swallowed
            if self._cancel.is_set():
                self.signals.cancelled.emit()
            else:
                self.signals.failed.emit(exc)
        else:  # complete, even if Cancel came after the last report: the work decides
            self.signals.finished.emit(result)


class JobRunner(QObject):
    """Runs one :class:`Job` at a time and relays its signals with a description."""

    started = Signal(str)
    progress = Signal(str, int, int, str)
    finished = Signal(str, object)
    failed = Signal(str, object)
    cancelled = Signal(str)
    idle = Signal()

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(1)
        self.job: Job | None = None
        self.name = ""

    @property
    def busy(self) -> bool:
        return self.job is not None

    def start(self, name: str, work: Work) -> bool:
        """Start ``work`` unless a job is running (then False)."""
        if self.job is not None:
            return False
        job = Job(work)
        self.job, self.name = job, name
        job.signals.progress.connect(self._progress)
        # bound slots of this object (not lambdas), so they run on the window's thread
        job.signals.finished.connect(self._finished)
        job.signals.failed.connect(self._failed)
        job.signals.cancelled.connect(self._cancelled)
        self.started.emit(name)
        self.pool.start(job)
        return True

    def cancel(self) -> None:
        if self.job is not None:
            self.job.cancel()

    def wait(self, msecs: int = -1) -> bool:
        """Wait for the running job's thread (closing the window, tests)."""
        return bool(self.pool.waitForDone(msecs))

    def _progress(self, what: str, done: int, total: int) -> None:
        job = self.job
        if job is None:
            return
        left = time_left(time.monotonic() - job.started_at, done, total)
        self.progress.emit(what, done, total, left)

    def _finished(self, result: object) -> None:
        self._end("finished", result)

    def _failed(self, exc: object) -> None:
        self._end("failed", exc)

    def _cancelled(self) -> None:
        self._end("cancelled", None)

    def _end(self, how: str, value: Any) -> None:
        name, self.job, self.name = self.name, None, ""
        if how == "finished":
            self.finished.emit(name, value)
        elif how == "failed":
            self.failed.emit(name, value)
        else:
            self.cancelled.emit(name)
        self.idle.emit()
