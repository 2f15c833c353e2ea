"""Sinks on their own threads: the render hands finished rows over and goes on computing.

:class:`BackgroundSink` wraps any sink (``rows(row0, rgb8)`` and optionally ``close()``) with a
thread and a bounded queue, so encoding (PNG deflate, GeoTIFF compression, which release the GIL)
overlaps the next windows' compute. Rows reach the wrapped sink in the order given; at most
``depth`` bands wait in the queue, so memory stays bounded. An error in the sink is raised again
in the render's thread at the next hand-over or at :meth:`BackgroundSink.finish`.
"""
from __future__ import annotations

import queue
import threading
import time

import numpy as np

__all__ = ["BackgroundSink"]

_STOP = object()


class BackgroundSink:
    """Feed ``sink`` from a thread of its own; call :meth:`finish` (or :meth:`abort`) at the end.

    ``name`` names the thread; ``depth`` bands may wait (default 2) besides the one the sink
    works on. Arrays handed over must not be changed afterwards by the caller (the engine
    allocates each band anew). ``close``: after the last rows, also call the sink's ``close()``
    on its thread (the file's end written beside other work, e.g. the check or another sink's
    end; not after an error): from :meth:`end` on, which does not wait.
    """

    def __init__(self, sink, name: str = "sink", depth: int = 2, close: bool = False):
        self.sink = sink
        self._close = bool(close)
        # bands handed over and not done yet (waiting, or the one the sink works on); the end
        # is queued without waiting for room
        self._room = threading.Semaphore(max(1, depth) + 1)
        self._queue: queue.Queue = queue.Queue()
        self._ended = False
        self._error: BaseException | None = None
        #: seconds the wrapped sink worked (on its thread), seconds the caller waited for it
        self.busy = 0.0
        self.waited = 0.0
        self._thread = threading.Thread(target=self._loop, name=f"compose-{name}", daemon=True)
        self._thread.start()

    def _loop(self) -> None:
        while True:
            item = self._queue.get()
            if item is _STOP:
                if self._close and self._error is None:
                    t = time.perf_counter()
                    try:
                        self.sink.close()
                    except BaseException as exc:  # noqa: BLE001 - handed to the render's thread
                        self._error = exc
                    self.busy += time.perf_counter() - t
                return
            if self._error is not None:
                self._room.release()
                continue                      # drain after a failure, keep the producer moving
            t = time.perf_counter()
            try:
                self.sink.rows(*item)
            except BaseException as exc:      # noqa: BLE001 - handed to the render's thread
                self._error = exc
            self.busy += time.perf_counter() - t
            self._room.release()

    def _raise(self) -> None:
        if self._error is not None:
            error, self._error = self._error, None
            raise error

    @property
    def alpha(self) -> bool:
        """The wrapped sink takes an alpha band too (see :class:`compose.engine.Sink`)."""
        return bool(getattr(self.sink, "alpha", False))

    def rows(self, row0: int, rgb8: np.ndarray, *alpha8: np.ndarray) -> None:
        """Queue rows (and the alpha band, for a sink that takes one) for the sink (blocks while
        ``depth`` bands are waiting)."""
        self._raise()
        t = time.perf_counter()
        self._room.acquire()
        self._queue.put((row0, rgb8, *alpha8))
        self.waited += time.perf_counter() - t

    def end(self) -> None:
        """No more rows: the thread hands on what is queued (and, with ``close``, closes the
        sink) while the caller goes on; :meth:`finish` waits for it."""
        if not self._ended:
            self._ended = True
            self._queue.put(_STOP)

    def finish(self) -> None:
        """Wait until every queued band reached the sink (and, with ``close``, the sink is
        closed); raise the sink's error, if any."""
        t = time.perf_counter()
        self.end()
        self._thread.join()
        self.waited += time.perf_counter() - t
        self._raise()

    def abort(self) -> None:
        """Stop the thread after a failure elsewhere (queued bands are still handed over; the
        sink is not closed, unless its thread was closing it already)."""
        self._close = False
        self.end()
        self._thread.join()
        self._error = None
