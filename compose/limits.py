"""Resource bounds and the source policy of one run, checked before any work starts.

A :class:`Limits` holds what a run may use: the largest canvas (pixels), whether remote and
virtual sources (URLs, ``/vsi*`` paths, GDAL XML wrappers such as VRT or tile-service files) may
be read, and the largest style file. The command line sets them for the run (``--max-pixels``,
``--allow-remote``) with :func:`use_limits`; library callers get the safe defaults or pass their
own the same way. A style file cannot change them.

The fixed bounds below are plain engineering limits (our own choices, no source): far beyond
any map a person makes, small enough that a hostile style cannot exhaust the machine.
"""
from __future__ import annotations

import contextlib
import contextvars
import math
from collections.abc import Iterator
from dataclasses import dataclass, replace

from compose.errors import StyleError

__all__ = ["Limits", "current_limits", "use_limits", "check_canvas_size", "DEFAULT_MAX_PIXELS",
           "BYTES_PER_PIXEL", "MAX_STYLE_BYTES", "MAX_NESTING", "MAX_STRING", "MAX_COORDINATE",
           "MAX_LABEL_CHARS", "MAX_PATH_CHARS"]

#: Largest canvas by default: 4 gigapixels (a 63,000 px square), raised with ``--max-pixels``.
DEFAULT_MAX_PIXELS = 4_000_000_000
#: Bytes each canvas pixel costs in the written outputs before compression (RGB PNG rows +
#: GeoTIFF, RGBA at most), used for the size estimate in the refusal message.
BYTES_PER_PIXEL = 7
#: Largest style file read (bytes); style files are a few kB.
MAX_STYLE_BYTES = 1 << 20
#: Deepest nesting of tables and arrays in a style file (the vocabulary needs 5).
MAX_NESTING = 16
#: Longest string value of a style file (characters).
MAX_STRING = 4096
#: Largest absolute coordinate of ``map.extent`` in CRS units (1e9 m is 25 times round the earth).
MAX_COORDINATE = 1e9
#: Label texts from the data are cut to this many characters (with an ellipsis).
MAX_LABEL_CHARS = 200
#: Longest source path accepted (characters; Linux allows 4096 bytes).
MAX_PATH_CHARS = 4096


@dataclass(frozen=True, slots=True)
class Limits:
    """What one run may use. max_pixels: canvas width x height; allow_remote: read URLs,
    ``/vsi*`` paths and GDAL XML wrappers (VRT, tile services)."""

    max_pixels: int = DEFAULT_MAX_PIXELS
    allow_remote: bool = False


_CURRENT: contextvars.ContextVar[Limits] = contextvars.ContextVar("compose_limits", default=Limits())  # noqa: B039 (frozen)


def current_limits() -> Limits:
    """The limits in force (defaults unless inside :func:`use_limits`)."""
    return _CURRENT.get()


@contextlib.contextmanager
def use_limits(limits: Limits | None = None, **changes) -> Iterator[Limits]:
    """Run the block under ``limits`` (or the current ones with ``changes``, e.g.
    ``allow_remote=True``)."""
    new = replace(limits or current_limits(), **changes)
    token = _CURRENT.set(new)
    try:
        yield new
    finally:
        _CURRENT.reset(token)


def _size(n: float) -> str:
    for unit, scale in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{n / 1e3:.3g} kB"


def check_canvas_size(width: float, height: float, where: str = "map") -> tuple[int, int]:
    """Whole pixel counts for a canvas of ``width`` x ``height`` pixels (floats, possibly huge or
    infinite), or :class:`StyleError` naming the size, the estimated bytes and ``--max-pixels``
    when it exceeds :attr:`Limits.max_pixels`."""
    limit = current_limits().max_pixels
    if not (math.isfinite(width) and math.isfinite(height)):
        raise StyleError(f"{where}: map.extent / map.pixel give a canvas of infinite size")
    fw, fh = (float(max(1, math.ceil(v - 1e-9))) for v in (width, height))
    if fw * fh > limit:
        shown = f"{int(fw)} x {int(fh)}" if max(fw, fh) < 1e12 else f"{fw:.3g} x {fh:.3g}"
        raise StyleError(
            f"{where}: the canvas would be {shown} px ({fw * fh / 1e9:.3g} gigapixels, about "
            f"{_size(fw * fh * BYTES_PER_PIXEL)} of output before compression), over the limit "
            f"of {limit:,} px; raise map.pixel or shrink map.extent, or allow more with "
            f"--max-pixels")
    return int(fw), int(fh)
