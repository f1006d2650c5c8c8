"""Workers: run core functions off the GUI thread.

A :class:`Worker` wraps a plain function.  If the function accepts the
keyword arguments ``report`` and/or ``cancelled`` it receives a progress
callback ``report(done, total, message)`` and a predicate that turns true
when the user pressed Cancel.  Results and errors come back as Qt signals,
delivered in the GUI thread.
"""

from __future__ import annotations

import inspect
import threading
import traceback
from collections.abc import Callable

from PySide6.QtCore import QObject, QRunnable, Qt, QThread, QThreadPool, Signal
from PySide6.QtWidgets import QProgressDialog, QWidget

from phasewise.core.errors import PhasewiseError

__all__ = ["Worker", "WorkerPool", "Cancelled"]


#: Workers still running, kept alive even if their window goes first.
_LIVE: set = set()


class Cancelled(Exception):
    """Raised inside a worker function to stop early after a cancel."""


class WorkerSignals(QObject):
    progress = Signal(int, int, str)
    result = Signal(object)
    error = Signal(str)
    cancelled = Signal()
    finished = Signal()


class Worker(QRunnable):
    """One call of ``fn(*args, **kwargs)`` in a thread of a pool."""

    def __init__(self, fn: Callable, *args, **kwargs) -> None:
        super().__init__()
        self.setAutoDelete(False)
        self.fn = fn
        self.args = args
        self.kwargs = kwargs
        self.signals = WorkerSignals()
        self._cancel = threading.Event()
        self.done = threading.Event()
        try:
            params = inspect.signature(fn).parameters
        except (TypeError, ValueError):
            params = {}
        if "report" in params:
            self.kwargs["report"] = self._report
        if "cancelled" in params:
            self.kwargs["cancelled"] = self._cancel.is_set

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def is_cancelled(self) -> bool:
        return self._cancel.is_set()

    def _report(self, done: int, total: int, message: str = "") -> None:
        if self._cancel.is_set():
            raise Cancelled()
        self.signals.progress.emit(int(done), int(total), str(message))

    def run(self) -> None:  # runs in the pool's thread
        try:
            self._run()
        except RuntimeError:  # the window (and the signal's receivers) went away first
            pass
        finally:
            self.done.set()
            _LIVE.discard(self)

    def _run(self) -> None:
        if self._cancel.is_set():  # cancelled while waiting in the queue: never start
            self.signals.cancelled.emit()
            self.signals.finished.emit()
            return
        try:
            result = self.fn(*self.args, **self.kwargs)
        except Cancelled:
            self.signals.cancelled.emit()
        except PhasewiseError as exc:
            self.signals.error.emit(str(exc))
        except Exception as exc:  # a bug: show it, keep the window alive
            traceback.print_exc()
            self.signals.error.emit(f"{type(exc).__name__}: {exc}")
        else:
            if self._cancel.is_set():
                self.signals.cancelled.emit()
            else:
                self.signals.result.emit(result)
        finally:
            self.signals.finished.emit()


class WorkerPool(QObject):
    """A thread pool that keeps its workers alive until they finish."""

    def __init__(self, parent: QObject | None = None, max_threads: int = 2) -> None:
        super().__init__(parent)
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(max_threads)
        self._running: set[Worker] = set()
        self.closed = False

    def _guard(self, fn: Callable) -> Callable:
        # results that arrive after the window closed are dropped
        def call(*args):
            if not self.closed:
                fn(*args)

        return call

    def shutdown(self, msecs: int = 15000) -> None:
        """Cancel every worker, wait for them, and drop their late signals."""
        self.cancel_all()
        self.wait(msecs)
        self.closed = True

    def start(
        self,
        fn: Callable,
        *args,
        on_result: Callable | None = None,
        on_error: Callable | None = None,
        on_progress: Callable | None = None,
        on_finished: Callable | None = None,
        **kwargs,
    ) -> Worker:
        worker = Worker(fn, *args, **kwargs)
        if self.closed:
            # a timer that fires after the window closed (a fold's rest timer)
            # must not start a thread that outlives the window: never run
            return worker
        if on_result:
            worker.signals.result.connect(self._guard(on_result))
        if on_error:
            worker.signals.error.connect(self._guard(on_error))
        if on_progress:
            worker.signals.progress.connect(self._guard(on_progress))
        if on_finished:
            worker.signals.finished.connect(self._guard(on_finished))
        worker.signals.finished.connect(lambda w=worker: self._running.discard(w))
        self._running.add(worker)
        _LIVE.add(worker)
        self.pool.start(worker)
        return worker

    @property
    def busy(self) -> bool:
        return bool(self._running)

    def cancel_all(self) -> None:
        for worker in list(self._running):
            worker.cancel()

    def wait(self, msecs: int = 30000) -> bool:
        return self.pool.waitForDone(msecs)

    def run_with_progress(
        self,
        parent: QWidget,
        title: str,
        fn: Callable,
        *args,
        on_result: Callable | None = None,
        on_error: Callable | None = None,
        **kwargs,
    ) -> Worker:
        """Start ``fn`` with a progress dialog that has a Cancel button."""
        dialog = QProgressDialog(title, "Cancel", 0, 0, parent)
        dialog.setWindowTitle(title)
        dialog.setMinimumDuration(300)
        dialog.setAutoClose(False)
        dialog.setAutoReset(False)

        def progress(done: int, total: int, message: str) -> None:
            dialog.setMaximum(max(total, 1))
            dialog.setValue(done)
            if message:
                dialog.setLabelText(f"{title}\n{message}")

        def finished() -> None:
            dialog.close()
            dialog.deleteLater()

        worker = self.start(
            fn,
            *args,
            on_result=on_result,
            on_error=on_error,
            on_progress=progress,
            on_finished=finished,
            **kwargs,
        )
        dialog.canceled.connect(worker.cancel)
        worker.progress_dialog = dialog
        return worker


class GuiThread(QObject):
    """``gui_thread(fn)`` runs ``fn()`` in this object's thread: now if called there,
    else queued (the desk model's ``dispatch``: ledger writes may come from workers)."""

    call = Signal(object)

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.call.connect(lambda fn: fn(), Qt.ConnectionType.QueuedConnection)

    def __call__(self, fn: Callable) -> None:
        if QThread.currentThread() == self.thread():
            fn()
        else:
            self.call.emit(fn)
