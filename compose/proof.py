"""Proofs of a map: how it reads in grey and to viewers with a colour-vision deficiency.

* **grey** -- every pixel becomes the sRGB grey of the same CIELAB L*: its luminance
  Y = 0.2126 R + 0.7152 G + 0.0722 B of linear RGB (IEC 61966-2-1 matrix, Y row) encoded back
  per channel, so L*(grey) = L*(pixel). Not an average of the encoded channels.
* **deutan, protan, tritan** -- Machado, Oliveira & Fernandes (2009) matrices at severity 100
  applied to linear RGB, clipped to [0, 1], encoded (what colorspacious and colour-science do;
  the tritan matrix is Machado's approximation, not a validated tritanopia model).

Pixels go through lookup tables, never a colour library: 256-entry decode table, 3 x 3 matrix in
float32, then a 65536-entry encode table (index = round(linear x 65535)), which is within 0.03 of
an 8-bit code of the exact encoding. :class:`ProofSink` receives the finished rows of a render
band by band (see :class:`compose.engine.Sink`), streams each proof to its PNG and keeps a small
box-averaged copy of the map and each proof for the contact sheet, so memory stays bounded by
the band, not the canvas.
"""
from __future__ import annotations

import contextlib
import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from compose.check.catalog import PROOF_RULES
from compose.color.cvd import cvd_matrix
from compose.color.srgb import linear_to_srgb, srgb_to_linear
from compose.color.wcag import WCAG_Y
from compose.output.png import PngWriter
from compose.output.thumb import BoxThumbnail

__all__ = ["PROOFS", "ENCODE_SIZE", "gray_proof", "cvd_proof", "proof_image", "proof_images",
           "ProofSink",
           "ProofResult", "proof_paths", "write_proofs", "write_sheet", "PROOF_RULES"]

PROOFS = ("gray", "deutan", "protan", "tritan")
TITLES = {"map": "map", "gray": "grey (same CIELAB L*)", "deutan": "deutan (Machado 2009, 100 %)",
          "protan": "protan (Machado 2009, 100 %)", "tritan": "tritan (Machado 2009, 100 %)"}
ENCODE_SIZE = 65536
CHUNK_ROWS = 64          # rows per step inside a band (keeps float planes in cache)
SHEET_PANEL = 480        # longest side of a panel on the contact sheet, pixels

_DECODE = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
_ENCODE = np.clip(np.rint(linear_to_srgb(np.arange(ENCODE_SIZE) / (ENCODE_SIZE - 1.0)) * 255),
                  0, 255).astype(np.uint8)
_Y = WCAG_Y.astype(np.float32)


def _encode(lin: np.ndarray) -> np.ndarray:
    """Linear light float32 (...) -> 8-bit sRGB codes, clipping to [0, 1] first."""
    np.clip(lin, 0.0, 1.0, out=lin)
    lin *= np.float32(ENCODE_SIZE - 1)
    return np.take(_ENCODE, np.rint(lin).astype(np.int32))


def _planes(rgb8: np.ndarray) -> list[np.ndarray]:
    return [np.take(_DECODE, rgb8[..., c]) for c in range(3)]


def gray_proof(rgb8: np.ndarray, planes: list[np.ndarray] | None = None) -> np.ndarray:
    """8-bit sRGB (..., 3) -> 8-bit grey (..., 3) of the same CIELAB L* (all channels equal).
    ``planes``: the image's linear R, G, B planes when already decoded."""
    r, g, b = planes if planes is not None else _planes(np.asarray(rgb8, dtype=np.uint8))
    y = r * _Y[0] + g * _Y[1] + b * _Y[2]
    gray = _encode(y)
    return np.repeat(gray[..., None], 3, axis=-1)


def cvd_proof(rgb8: np.ndarray, kind: str, severity: float = 100.0,
              planes: list[np.ndarray] | None = None) -> np.ndarray:
    """8-bit sRGB (..., 3) -> 8-bit sRGB (..., 3) as seen with CVD ``kind`` (protan, deutan,
    tritan) at ``severity`` 0-100 (Machado et al. 2009, linear RGB). ``planes``: the image's
    linear R, G, B planes when already decoded."""
    m = cvd_matrix(kind, severity).astype(np.float32)
    if planes is None:
        planes = _planes(np.asarray(rgb8, dtype=np.uint8))
    out = np.empty(np.shape(rgb8), dtype=np.uint8)
    for c in range(3):
        lin = planes[0] * m[c, 0] + planes[1] * m[c, 1] + planes[2] * m[c, 2]
        out[..., c] = _encode(lin)
    return out


def proof_image(rgb8: np.ndarray, proof: str, planes: list[np.ndarray] | None = None
                ) -> np.ndarray:
    """One proof (``'gray'`` or a CVD kind) of an 8-bit image (..., 3) (``planes``: its linear
    planes when already decoded)."""
    if proof == "gray":
        return gray_proof(rgb8, planes)
    if proof not in PROOFS:
        raise ValueError(f"'{proof}' is not a proof; one of: {', '.join(PROOFS)}")
    return cvd_proof(rgb8, proof, planes=planes)


#: rows per step of :func:`proof_images` (its float planes stay in the cache)
IMAGE_ROWS = 32


def _encode_into(lin: np.ndarray, out: np.ndarray) -> None:
    """:func:`_encode` of ``lin`` (overwritten) into ``out``, uint8 of its shape."""
    np.clip(lin, 0.0, 1.0, out=lin)
    lin *= np.float32(ENCODE_SIZE - 1)
    np.rint(lin, out=lin)
    np.take(_ENCODE, lin.astype(np.int32), out=out)


def proof_images(rgb8: np.ndarray) -> dict[str, np.ndarray]:
    """Every proof of :data:`PROOFS` of an 8-bit image (h, w, 3): the pixels of
    :func:`proof_image` (the same float32 operations in the same order), made
    :data:`IMAGE_ROWS` rows at a time into preallocated planes (the review page's 750 x 750
    proofs 89 -> 53 ms, measured here)."""
    rgb8 = np.asarray(rgb8, dtype=np.uint8)
    if rgb8.ndim != 3:
        planes = _planes(rgb8)
        return {proof: proof_image(rgb8, proof, planes) for proof in PROOFS}
    h, w = rgb8.shape[:2]
    out = {proof: np.empty((h, w, 3), np.uint8) for proof in PROOFS}
    matrices = {proof: cvd_matrix(proof, 100.0).astype(np.float32) for proof in PROOFS[1:]}
    lin = np.empty((IMAGE_ROWS, w), np.float32)
    term = np.empty((IMAGE_ROWS, w), np.float32)
    code = np.empty((IMAGE_ROWS, w), np.uint8)

    def mix(planes, weights, n):
        # planes[0] w0 + planes[1] w1 + planes[2] w2, added left to right as in gray_proof
        acc, tmp = lin[:n], term[:n]
        np.multiply(planes[0], weights[0], out=acc)
        np.multiply(planes[1], weights[1], out=tmp)
        acc += tmp
        np.multiply(planes[2], weights[2], out=tmp)
        acc += tmp
        _encode_into(acc, code[:n])
        return code[:n]

    for r in range(0, h, IMAGE_ROWS):
        chunk = rgb8[r:r + IMAGE_ROWS]
        n = chunk.shape[0]
        planes = _planes(chunk)
        gray = mix(planes, _Y, n)
        for c in range(3):
            out["gray"][r:r + n, :, c] = gray
        for proof, m in matrices.items():
            for c in range(3):
                out[proof][r:r + n, :, c] = mix(planes, m[c], n)
    return out


class ProofSink:
    """A render sink writing the grey and CVD proofs as PNG streams (``paths``: proof -> file)
    and keeping thumbnails of the map and each proof for :func:`write_sheet`."""

    def __init__(self, paths: dict[str, Path], width: int, height: int, dpi: float | None = None,
                 panel: int = SHEET_PANEL):
        self.width, self.height = int(width), int(height)
        self.writers: dict[str, PngWriter] = {}
        try:
            for proof in PROOFS:
                if proof in paths:
                    self.writers[proof] = PngWriter(paths[proof], width, height, 3, dpi=dpi)
        except BaseException:
            self.abort()
            raise
        factor = max(1, math.ceil(max(width, height) / panel))
        self.thumbs = {k: BoxThumbnail(width, height, factor) for k in ("map",) + PROOFS}

    def rows(self, row0: int, rgb8: np.ndarray) -> None:
        """Take finished rows (n, width, 3) uint8, north to south."""
        for r in range(0, rgb8.shape[0], CHUNK_ROWS):
            chunk = rgb8[r:r + CHUNK_ROWS]
            self.thumbs["map"].add(row0 + r, chunk)
            planes = _planes(chunk)
            for proof in PROOFS:
                img = proof_image(chunk, proof, planes)
                if proof in self.writers:
                    self.writers[proof].write_rows(img)
                self.thumbs[proof].add(row0 + r, img)

    def close(self) -> None:
        """Finish every PNG (raises if the render delivered fewer rows than the canvas has)."""
        for w in self.writers.values():
            w.close()

    def abort(self) -> None:
        """Close the files without finishing them (after a failure)."""
        for w in self.writers.values():
            with contextlib.suppress(Exception):
                w.abort()

    def thumbnails(self) -> dict[str, np.ndarray]:
        """The box-averaged map and proofs, (h, w, 3) uint8 each."""
        return {k: t.image() for k, t in self.thumbs.items()}


def write_sheet(path: Path, thumbnails: dict[str, np.ndarray], title: str = "",
                caption: str = "") -> None:
    """A contact sheet PNG: the map and each proof side by side, each labelled (matplotlib)."""
    from matplotlib.figure import Figure

    keys = [k for k in ("map",) + PROOFS if k in thumbnails]
    h, w = thumbnails[keys[0]].shape[:2]
    dpi = 100
    scale = max(1.0, 240.0 / w)                 # tiny maps are enlarged to a legible panel
    pw, ph = w * scale / dpi, h * scale / dpi
    gap, top, bottom = 0.15, 0.45, 0.35
    fig = Figure(figsize=(len(keys) * (pw + gap) + gap, ph + top + bottom), dpi=dpi)
    W, H = fig.get_size_inches()
    for i, k in enumerate(keys):
        ax = fig.add_axes([(gap + i * (pw + gap)) / W, bottom / H, pw / W, ph / H])
        ax.imshow(thumbnails[k], interpolation="nearest" if scale > 1 else "antialiased")
        ax.set_title(TITLES.get(k, k), fontsize=8)
        ax.set_axis_off()
    if title:
        # the map's title as written: a "$" is a dollar, never the start of mathtext
        fig.text(0.5, 1 - 0.08 / H, title, ha="center", va="top", fontsize=10, parse_math=False)
    if caption:
        fig.text(0.5, 0.08 / H, caption, ha="center", va="bottom", fontsize=7, parse_math=False)
    import io

    from compose.page.dates import dated_png

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    Path(path).write_bytes(dated_png(buf.getvalue()))   # SOURCE_DATE_EPOCH's tIME, or none


def proof_paths(style, out_dir: Path) -> dict[str, Path]:
    """Where each proof of ``style`` goes: NAME.proof-{gray,deutan,protan,tritan,sheet}.png."""
    out_dir = Path(out_dir)
    paths = {p: out_dir / f"{style.name}.proof-{p}.png" for p in PROOFS}
    paths["sheet"] = out_dir / f"{style.name}.proof-sheet.png"
    return paths


@dataclass
class ProofResult:
    """What :func:`write_proofs` produced: files, timings and the check report of the render
    (its grayscale-order and CVD class rules are the proofs' metrics, see PROOF_RULES)."""

    outputs: dict[str, Path]
    width: int
    height: int
    seconds: dict[str, float] = field(default_factory=dict)
    report: object | None = None


def write_proofs(style, out_dir: Path, *, overwrite: bool = False,
                 progress: Callable[[int, int], None] | None = None) -> ProofResult:
    """Render ``style`` in memory and write its proofs and contact sheet into ``out_dir``.

    Every file is written to a temporary name and renamed into place only when all succeeded.
    """
    from compose.caution import CAUTION
    from compose.check import check_style
    from compose.engine import prepare, run
    from compose.output.transaction import OutputSet

    t0 = time.perf_counter()
    paths = proof_paths(style, out_dir)
    outputs = OutputSet(paths, overwrite=overwrite, name=style.name)
    from compose.page.write import blocked_for

    try:
        run_ = prepare(style, keep_clear=blocked_for)
    except BaseException:
        outputs.close()
        raise
    try:
        canvas = run_.canvas
        with contextlib.ExitStack():
            tmp = outputs.temporaries()
            sink = ProofSink({p: tmp[p] for p in PROOFS}, canvas.width, canvas.height, canvas.dpi)
            try:
                stats = run(run_, [sink], progress=progress)
                sink.close()
            except BaseException:
                sink.abort()
                raise
            report = check_style(style, stats, run_.ramps)
            title = getattr(style.map, "title", "") or style.name
            write_sheet(tmp["sheet"], sink.thumbnails(), title, CAUTION)
        outputs.commit()
        seconds = dict(run_.seconds)
        seconds["total"] = time.perf_counter() - t0
        return ProofResult(paths, canvas.width, canvas.height, seconds, report)
    finally:
        run_.close()
        outputs.close()
