"""Pictures for the HTML proof page: a downsampled copy of the map, per-layer previews, proofs,
and their encoding as ``data:`` URIs (JPEG for map images, PNG for figures; Pillow, which
matplotlib depends on).

The map copy is box-averaged by an integer factor (``PreviewSink`` while rendering); the
render hands it, the layer previews, the proofs of the map copy and the legend to the page as
:class:`PagePictures`.
"""
from __future__ import annotations

import base64
import io
import math
from dataclasses import dataclass

import numpy as np

from compose.color import interface as ui
from compose.output.thumb import BoxThumbnail

__all__ = ["PAGE_WIDTH", "PROOF_WIDTH", "PreviewSink", "PagePictures", "box_reduce", "jpeg_uri",
           "png_uri", "figure_uri"]

PAGE_WIDTH = 1600        # widest map copy on the page, pixels
PROOF_WIDTH = 800        # widest proof panel, pixels
JPEG_QUALITY = 90


class PreviewSink(BoxThumbnail):
    """A render sink keeping a box-averaged copy of the map at most ``max_width`` pixels wide.

    A map that fits (factor 1) is kept as its own 8-bit rows: the same pixels without summing
    them in floats and dividing them back."""

    def __init__(self, width: int, height: int, max_width: int = PAGE_WIDTH):
        super().__init__(width, height, math.ceil(width / max_width))
        self.copy = np.empty((height, width, 3), np.uint8) if self.k == 1 else None

    def add(self, row0: int, rgb8: np.ndarray) -> None:
        if self.copy is not None:
            self.copy[row0:row0 + rgb8.shape[0]] = rgb8
        else:
            super().add(row0, rgb8)

    rows = add

    def image(self) -> np.ndarray:
        return self.copy if self.copy is not None else super().image()


def box_reduce(rgb8: np.ndarray, max_width: int = PAGE_WIDTH) -> np.ndarray:
    """Box-average (h, w, 3) uint8 by the smallest integer factor that fits ``max_width``."""
    sink = PreviewSink(rgb8.shape[1], rgb8.shape[0], max_width)
    if sink.k == 1:
        return rgb8
    sink.rows(0, rgb8)
    return sink.image()


def _uri(data: bytes, mime: str) -> str:
    return f"data:{mime};base64," + base64.b64encode(data).decode("ascii")


def jpeg_uri(rgb8: np.ndarray, quality: int = JPEG_QUALITY) -> str:
    """A ``data:image/jpeg`` URI (no chroma subsampling, so thin coloured lines stay clean)."""
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(rgb8, dtype=np.uint8)).save(
        buf, format="JPEG", quality=quality, subsampling=0, optimize=True)
    return _uri(buf.getvalue(), "image/jpeg")


def png_uri(data: bytes) -> str:
    """A ``data:image/png`` URI of PNG bytes."""
    return _uri(data, "image/png")


def figure_uri(fig, dpi: float = 110) -> str:
    """A matplotlib Figure rendered to a PNG ``data:`` URI."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor=ui.PAPER.hex)
    return png_uri(buf.getvalue())


@dataclass(frozen=True)
class PagePictures:
    """The pictures a render hands to its review page, gathered during the render's one walk.

    map: the map box-averaged to at most :data:`PAGE_WIDTH` wide, (h, w, 3) uint8; layers:
    (layer name, the layer alone over the background, the stack up to it) per drawn layer, each
    (h, w, 3) uint8 at most :data:`compose.previews.PREVIEW_SIDE` a side; proofs: proof name
    (:data:`compose.proof.PROOFS`) -> that proof of the map copy, reduced to at most
    :data:`PROOF_WIDTH` wide; legend: the legend PNG; small: the map reduced to at most
    :data:`PROOF_WIDTH` wide, the proofs' source (None: reduced from ``map`` when needed).
    """

    map: np.ndarray
    layers: tuple[tuple[str, np.ndarray, np.ndarray], ...]
    proofs: dict[str, np.ndarray]
    legend: bytes | None = None
    small: np.ndarray | None = None
