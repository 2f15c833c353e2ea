"""BackgroundSink: order kept, errors raised in the caller's thread, bounded queue."""
import threading

import numpy as np
import pytest

from compose.output.background import BackgroundSink


class _Collect:
    def __init__(self, fail_at=None):
        self.got = []
        self.threads = set()
        self.fail_at = fail_at

    def rows(self, row0, rgb8):
        self.threads.add(threading.current_thread().name)
        if row0 == self.fail_at:
            raise OSError("disk full")
        self.got.append((row0, rgb8.copy()))


def test_rows_arrive_in_order_on_another_thread():
    sink = _Collect()
    bg = BackgroundSink(sink, "test", depth=1)
    bands = [np.full((2, 3, 3), i, np.uint8) for i in range(20)]
    for i, b in enumerate(bands):
        bg.rows(2 * i, b)
    bg.finish()
    assert [r for r, _ in sink.got] == list(range(0, 40, 2))
    assert all((b == g).all() for b, (_, g) in zip(bands, sink.got))
    assert sink.threads == {"compose-test"}


def test_sink_error_is_raised_in_the_render_thread():
    bg = BackgroundSink(_Collect(fail_at=4), "test")
    with pytest.raises(OSError, match="disk full"):
        for i in range(50):
            bg.rows(2 * i, np.zeros((2, 3, 3), np.uint8))
        bg.finish()
    bg.abort()


def test_busy_and_waited_account_for_the_sink_work():
    """``busy``: seconds the sink worked on its thread; ``waited``: seconds the caller was held.
    A slow sink fed faster than it works holds the caller (bounded queue)."""
    import time

    class _Slow:
        def rows(self, row0, rgb8):
            time.sleep(0.02)

    bg = BackgroundSink(_Slow(), "test", depth=1)
    for i in range(6):
        bg.rows(i, np.zeros((1, 1, 3), np.uint8))
    bg.finish()
    assert bg.busy >= 6 * 0.02
    assert bg.waited > 0


class _Closing(_Collect):
    def __init__(self, fail_at=None):
        super().__init__(fail_at)
        self.closed_on = None
        self.rows_when_closed = None

    def close(self):
        self.closed_on = threading.current_thread().name
        self.rows_when_closed = len(self.got)


def test_close_runs_on_the_sink_thread_after_the_last_rows():
    sink = _Closing()
    bg = BackgroundSink(sink, "test", close=True)
    for i in range(5):
        bg.rows(i, np.zeros((1, 2, 3), np.uint8))
    bg.finish()
    assert sink.closed_on == "compose-test" and sink.rows_when_closed == 5


def test_no_close_after_a_sink_error_or_an_abort():
    failed = _Closing(fail_at=1)
    bg = BackgroundSink(failed, "test", close=True)
    with pytest.raises(OSError, match="disk full"):
        for i in range(3):
            bg.rows(i, np.zeros((1, 2, 3), np.uint8))
        bg.finish()
    bg.abort()
    assert failed.closed_on is None
    aborted = _Closing()
    bg = BackgroundSink(aborted, "test", close=True)
    bg.rows(0, np.zeros((1, 2, 3), np.uint8))
    bg.abort()
    assert aborted.closed_on is None and aborted.got


def test_default_leaves_the_sink_open():
    sink = _Closing()
    bg = BackgroundSink(sink, "test")
    bg.rows(0, np.zeros((1, 2, 3), np.uint8))
    bg.finish()
    assert sink.closed_on is None


def test_end_does_not_wait_and_finish_does():
    # ``end`` queues the end behind the rows and returns while the sink is still busy and no
    # room is left for another band (were it to wait for room, this test would hang); the sink
    # is closed on its thread after the last rows; ``finish`` waits for it all.
    go = threading.Event()

    class _Held(_Closing):
        def rows(self, row0, rgb8):
            go.wait()
            super().rows(row0, rgb8)

    sink = _Held()
    bg = BackgroundSink(sink, "test", depth=1, close=True)
    for i in range(2):                  # one band in the sink, one waiting: no room left
        bg.rows(i, np.zeros((1, 2, 3), np.uint8))
    bg.end()
    assert sink.closed_on is None and sink.got == []
    go.set()
    bg.finish()
    assert sink.closed_on == "compose-test" and sink.rows_when_closed == 2
