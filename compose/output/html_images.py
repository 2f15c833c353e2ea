"""Pictures for the HTML proof page: a downsampled copy of the map, per-layer previews, proofs,
and their encoding as ``data:`` URIs (JPEG for map images, PNG for figures; Pillow, which
matplotlib depends on).

The map copy is box-averaged by an integer factor (``PreviewSink`` while rendering, or
:func:`read_preview` from the written PNG). Proofs of the page are the proof files when they are
present and newer than the map, else computed from the map copy: grey of the same CIELAB L*
(luminance Y encoded back) and the Machado et al. (2009) CVD simulations at severity 100.
"""
from __future__ import annotations

import base64
import io
import math
from pathlib import Path

import numpy as np

from compose.color import interface as ui
from compose.output.thumb import BoxThumbnail

__all__ = ["PAGE_WIDTH", "PREVIEW_SIDE", "PROOF_KINDS", "PreviewSink", "box_reduce",
           "read_preview", "jpeg_uri", "png_uri", "figure_uri", "layer_previews", "page_proofs"]

PAGE_WIDTH = 1600        # widest map copy on the page, pixels
PREVIEW_SIDE = 600       # longest side of the per-layer previews, pixels
PROOF_KINDS = ("gray", "deutan", "protan", "tritan")
JPEG_QUALITY = 90


class PreviewSink(BoxThumbnail):
    """A render sink keeping a box-averaged copy of the map at most ``max_width`` pixels wide."""

    def __init__(self, width: int, height: int, max_width: int = PAGE_WIDTH):
        super().__init__(width, height, math.ceil(width / max_width))


def box_reduce(rgb8: np.ndarray, max_width: int = PAGE_WIDTH) -> np.ndarray:
    """Box-average (h, w, 3) uint8 by the smallest integer factor that fits ``max_width``."""
    sink = PreviewSink(rgb8.shape[1], rgb8.shape[0], max_width)
    if sink.k == 1:
        return rgb8
    sink.rows(0, rgb8)
    return sink.image()


def read_preview(path: Path, max_width: int = PAGE_WIDTH) -> np.ndarray:
    """A written PNG as (h, w, 3) uint8, box-averaged to at most ``max_width`` pixels wide."""
    from PIL import Image

    with Image.open(path) as im:
        k = max(1, math.ceil(im.width / max_width))
        im = im.convert("RGB")
        if k > 1:
            im = im.reduce(k)
        return np.asarray(im)


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


def layer_previews(run_) -> list[tuple]:
    """[(spec, alone, stack)] per drawn layer of a prepared run (a preview canvas, see
    :func:`compose.engine.preview_canvas`): the layer alone over the background, and the layers
    up to and including it. One run of the engine per image, the sources opened once."""
    from compose.engine import ArraySink, run

    def draw(only: frozenset[int]) -> np.ndarray:
        sink = ArraySink(run_.canvas)
        run(run_, [sink], measure=False, only=only)
        return sink.image

    out = []
    for i, layer in enumerate(run_.layers):
        alone = draw(frozenset({i}))
        stack = alone if i == 0 else draw(frozenset(range(i + 1)))
        out.append((layer.spec, alone, stack))
    return out


def _proof_local(rgb8: np.ndarray, kind: str) -> np.ndarray:
    """The proof transform on an 8-bit image (used when compose.proof offers none)."""
    from compose.color.cvd import simulate_cvd
    from compose.color.srgb import linear_to_srgb, srgb_to_linear
    from compose.color.wcag import WCAG_Y

    rgb = rgb8 / 255.0
    if kind == "gray":
        y = srgb_to_linear(rgb) @ WCAG_Y
        out = np.repeat(linear_to_srgb(y)[..., None], 3, axis=-1)
    else:
        out = simulate_cvd(rgb, kind, 100.0)
    return np.clip(np.rint(out * 255), 0, 255).astype(np.uint8)


def _proof(rgb8: np.ndarray, kind: str) -> np.ndarray:
    try:
        from compose.proof import proof_image
    except ImportError:
        return _proof_local(rgb8, kind)
    return proof_image(rgb8, kind)


def page_proofs(preview: np.ndarray, name: str, out_dir: Path | None, map_png: Path | None,
                size: tuple[int, int] | None) -> tuple[dict[str, np.ndarray], str]:
    """(proof -> image at the preview's size, where they came from).

    The files ``NAME.proof-KIND.png`` in ``out_dir`` are used when all four exist, are not older
    than ``map_png`` and have the map's pixel ``size`` (width, height); otherwise the proofs are
    computed from ``preview``.
    """
    if out_dir is not None and map_png is not None and size is not None and map_png.exists():
        files = {k: Path(out_dir) / f"{name}.proof-{k}.png" for k in PROOF_KINDS}
        if all(f.exists() for f in files.values()):
            fresh = all(f.stat().st_mtime >= map_png.stat().st_mtime - 1.0 for f in files.values())
            if fresh and all(_png_size(f) == tuple(size) for f in files.values()):
                images = {k: read_preview(f, preview.shape[1]) for k, f in files.items()}
                if all(im.shape == preview.shape for im in images.values()):
                    return images, "from the proof files " + ", ".join(f.name for f in files.values())
    return ({k: _proof(preview, k) for k in PROOF_KINDS},
            "computed from the page's copy of the map (same transforms as the proof files)")


def _png_size(path: Path) -> tuple[int, int]:
    from PIL import Image

    with Image.open(path) as im:
        return im.width, im.height
