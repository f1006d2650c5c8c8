"""The window's worker pool starts nothing once it is shut down."""

import threading

from phasewise.app.desk.workers import WorkerPool


def test_nothing_starts_after_shutdown(qtbot):
    pool = WorkerPool()
    ran = threading.Event()
    done = []
    pool.start(lambda: 1, on_result=done.append)
    qtbot.waitUntil(lambda: done == [1], timeout=5000)  # a worker runs before shutdown
    pool.shutdown()
    # what a fold's rest timer firing after the window closed would do
    pool.start(ran.set, on_result=done.append)
    assert pool.wait(2000)
    qtbot.wait(50)
    assert not ran.is_set() and done == [1] and not pool.busy
