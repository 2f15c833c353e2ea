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
