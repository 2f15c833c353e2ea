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

__all__ = ["PAGE_WIDTH", "PROOF_WIDTH", "PreviewSink", "PagePictures", "PicturesJob", "box_reduce",
           "jpeg_uri", "png_uri", "figure_uri"]

PAGE_WIDTH = 1600        # widest map copy on the page, pixels
PROOF_WIDTH = 800        # widest proof panel, pixels
JPEG_QUALITY = 90
PREVIEW_QUALITY = 85     # JPEG quality of the layer previews


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
    """Box-average (h, w, 3) uint8 by the smallest integer factor k that fits ``max_width``
    (blocks cut by the right and bottom edges averaged over their pixels): the pixels
    :class:`PreviewSink` makes of the same image, from integer sums of k strided views."""
    h, w = rgb8.shape[:2]
    k = math.ceil(w / max_width)
    if k <= 1:
        return rgb8
    hb, wb = h // k, w // k                       # whole blocks down and across
    H, W = -(-h // k), -(-w // k)
    acc = np.dtype(np.uint16 if k <= 16 else np.uint64)     # k * k * 255 fits
    sums = np.zeros((H, W, 3), np.uint64 if k > 16 else np.uint32)
    if hb and wb:
        core = rgb8[:hb * k, :wb * k]
        rows: np.ndarray = core[0::k].astype(acc)
        for i in range(1, k):
            np.add(rows, core[i::k], out=rows)
        block: np.ndarray = rows[:, 0::k].copy()
        for i in range(1, k):
            np.add(block, rows[:, i::k], out=block)
        if hb == H and wb == W and k <= 16:
            # whole blocks only: the quotient below with the one count, without the sums'
            # and counts' arrays (the same float32 operations on the same values)
            whole = np.divide(block, np.float32(k * k), dtype=np.float32)
            return np.rint(whole, out=whole).astype(np.uint8)
        sums[:hb, :wb] = block
    if wb < W and hb:
        sums[:hb, wb] = rgb8[:hb * k, wb * k:].reshape(hb, k, -1, 3).sum(axis=(1, 2))
    if hb < H and wb:
        sums[hb, :wb] = rgb8[hb * k:, :wb * k].reshape(h - hb * k, wb, k, 3).sum(axis=(0, 2))
    if hb < H and wb < W:
        sums[hb, wb] = rgb8[hb * k:, wb * k:].sum(axis=(0, 1))
    count = (np.minimum(k, h - np.arange(H) * k)[:, None]
             * np.minimum(k, w - np.arange(W) * k)[None, :])[..., None]
    if k <= 16:
        # sums below 2**24 and counts up to 256: float32's correctly rounded quotient is the
        # exact one wherever that is a whole number and a half, and stays over 1 / 512 away
        # from one elsewhere, so it rounds (half to even) as the exact quotient does
        mean = np.divide(sums, count, dtype=np.float32)
    else:
        mean = sums / count.astype(np.float64)
    return np.rint(mean, out=mean).astype(np.uint8)       # means of uint8: 0 to 255


def _uri(data: bytes, mime: str) -> str:
    return f"data:{mime};base64," + base64.b64encode(data).decode("ascii")


def jpeg_uri(rgb8: np.ndarray, quality: int = JPEG_QUALITY) -> str:
    """A ``data:image/jpeg`` URI (no chroma subsampling, so thin coloured lines stay clean; the
    standard Huffman tables: optimised ones saved about 2 % of the bytes for three times the
    encoding time, the same pixels either way)."""
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(rgb8, dtype=np.uint8)).save(
        buf, format="JPEG", quality=quality, subsampling=0)
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
    :data:`PROOF_WIDTH` wide, the proofs' source (None: reduced from ``map`` when needed);
    ramps: the page's ramps section made ahead from the same style and ramps
    (:func:`compose.output.html.ramps_section`; None: made with the page).
    """

    map: np.ndarray
    layers: tuple[tuple[str, np.ndarray, np.ndarray], ...]
    proofs: dict[str, np.ndarray]
    legend: bytes | None = None
    small: np.ndarray | None = None
    ramps: str | None = None
    #: JPEG ``data:`` URIs made already, by (id of the image, quality) (:class:`PicturesJob`)
    jpegs: dict[tuple[int, int], str] | None = None


class PicturesJob:
    """The review page's pictures made on two threads while the render does other work (the
    check, the encoders' end, waiting for the page process): numpy and Pillow let other threads
    run while they compute and encode. One thread makes the map's reduced copy, its proofs
    (``proofs(image)``: :func:`compose.proof.proof_images`) and their JPEGs, the other the layer previews
    (``previews()``: [(alone, stack)] per layer, in ``names``' order) and theirs.
    ``image()``: the map as written, at most :data:`PAGE_WIDTH` wide (a :class:`PreviewSink`'s
    ``image``). :meth:`result` gives the :class:`PagePictures` (no legend), with ``jpegs``;
    :meth:`close` (always) waits for the threads."""

    def __init__(self, image, previews, names: list[str], proofs, map_quality: int = JPEG_QUALITY,
                 preview_quality: int = PREVIEW_QUALITY):
        from concurrent.futures import ThreadPoolExecutor

        self._pool = ThreadPoolExecutor(2, thread_name_prefix="review-pictures")
        self._map = self._pool.submit(self._map_pictures, image, proofs, map_quality)
        self._layers = self._pool.submit(self._layer_pictures, previews, names, preview_quality)

    @staticmethod
    def _map_pictures(image, proof_images, quality: int):
        from compose.timeline import span

        with span("html pictures: map and proofs"):
            copy = image()
            small = box_reduce(copy, PROOF_WIDTH)
            proofs = proof_images(small)
            # keyed by the ids of arrays the pictures keep (so no other array has them)
            uris = {(id(img), quality): jpeg_uri(img, quality)
                    for img in [copy, small, *proofs.values()]}
        return copy, small, proofs, uris

    @staticmethod
    def _layer_pictures(previews, names: list[str], quality: int):
        from compose.timeline import span

        with span("html pictures: layers"):
            layers = tuple((n, a, s) for n, (a, s) in zip(names, previews()))
            uris = {}
            for i, (_, alone, stack) in enumerate(layers):     # the first layer: alone only
                for img in (alone, stack) if i else (alone,):
                    uris[(id(img), quality)] = jpeg_uri(img, quality)
        return layers, uris

    def result(self) -> PagePictures:
        copy, small, proofs, uris = self._map.result()
        layers, more = self._layers.result()
        return PagePictures(map=copy, layers=layers, proofs=proofs, small=small,
                            jpegs={**uris, **more})

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)
