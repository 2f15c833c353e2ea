"""A draft check's raster reads, started when the layer is prepared, each on its own thread.

A draft (:mod:`compose.check.draft`) is one small window, but its raster layers still decode
every block of their files (a decimated read, or the full-resolution rows a relief samples):
on a large canvas that is most of the draft's time, and it does not depend on anything else
the render prepares. Starting these reads while the rest is prepared (vector sources read,
labels placed) lets GDAL's decoding run beside that work on another core. A read covers the
draft canvas with :data:`PAD` pixels of margin; the window's padded region is cut out of it
(reads are seam-free, so a pixel's value does not depend on the window it is read with).
"""
from __future__ import annotations

import threading
from collections.abc import Callable
from concurrent.futures import Future

import numpy as np

from compose.canvas import Canvas, Window

__all__ = ["PAD", "EarlyRead"]

#: Margin of the early read, in canvas pixels: at least any layer's margin (the engine's window
#: margin is the largest of them); a window reaching further is read when painted instead.
PAD = 16


class EarlyRead:
    """``read(window)`` for the whole canvas (padded by :data:`PAD`) on its own thread."""

    def __init__(self, canvas: Canvas, read: Callable[[Window], np.ndarray]) -> None:
        self.window = canvas.whole(PAD)
        self.future: Future = Future()
        thread = threading.Thread(target=self._run, args=(read,), name="draft-read", daemon=True)
        thread.start()

    def _run(self, read) -> None:
        try:
            self.future.set_result(read(self.window))
        except BaseException as exc:        # re-raised where the paint takes it
            self.future.set_exception(exc)

    def take(self, window: Window) -> np.ndarray | None:
        """A copy of ``window``'s padded region (the last two axes), or None when it does not
        lie inside the early read; raises what the read raised."""
        r0, c0, h, w = window.padded
        R0, C0, H, W = self.window.padded
        if r0 < R0 or c0 < C0 or r0 + h > R0 + H or c0 + w > C0 + W:
            return None
        return np.array(self.future.result()[..., r0 - R0:r0 - R0 + h, c0 - C0:c0 - C0 + w])

    def wait(self) -> None:
        """Wait until the read is over (before its source is closed), ignoring its outcome."""
        try:
            self.future.exception()
        except BaseException:               # pragma: no cover - cancelled
            pass
