"""Slow work started by a user's action, run off the GUI thread while the event loop keeps going.

``off_thread`` keeps the caller's shape (it returns the result or raises the error) by waiting
in a local event loop: the window repaints, timers fire, and a progress dialog shows when the
work takes more than a moment.
"""

from __future__ import annotations

from typing import Any, Callable

from PySide6.QtCore import QEventLoop, QObject, Qt, Signal
from PySide6.QtWidgets import QProgressDialog, QWidget


class _Done(QObject):
    finished = Signal(object, object)       # result, exception


def off_thread(window: QWidget, title: str, text: str, fn: Callable[[], Any]) -> Any:
    """Run ``fn`` on a helper thread while the event loop keeps running; a progress dialog shows
    after a moment. Returns ``fn``'s result or raises its exception (for ``_guard``)."""
    import threading

    done = _Done()
    loop = QEventLoop()
    box: dict[str, Any] = {}

    def finished(result, exc) -> None:
        box["result"], box["exc"] = result, exc
        loop.quit()

    done.finished.connect(finished, Qt.ConnectionType.QueuedConnection)

    def work() -> None:
        try:
            result, exc = fn(), None
        except BaseException as e:     # handed back to the GUI thread and raised there
            result, exc = None, e
        done.finished.emit(result, exc)

    progress = QProgressDialog(text, "", 0, 0, window)
    progress.setWindowTitle(title)
    progress.setCancelButton(None)
    progress.setMinimumDuration(300)
    progress.setWindowModality(Qt.WindowModality.WindowModal)
    worker = threading.Thread(target=work, name="labbench-save", daemon=True)
    worker.start()
    if "exc" not in box:
        loop.exec()
    worker.join()       # it ends right after its signal; then ``done`` is let go on this thread
    progress.reset()
    progress.deleteLater()
    if box.get("exc") is not None:
        raise box["exc"]
    return box.get("result")


def off_process(window: QWidget, title: str, text: str, fn: Callable[..., Any], *args: Any) -> Any:
    """Like ``off_thread`` but ``fn(*args)`` (picklable) runs in a spawned helper process: for work
    that holds the interpreter lock for long stretches (building and checking an ONNX graph, whose
    first use also imports large modules), which a thread of this process would not let go."""
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    pool = ProcessPoolExecutor(max_workers=1, mp_context=mp.get_context("spawn"))
    try:
        future = pool.submit(fn, *args)
        return off_thread(window, title, text, future.result)
    finally:
        pool.shutdown(wait=False)
