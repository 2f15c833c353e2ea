"""The draft check: the same rules on a reduced canvas of the same extent.

The canvas keeps its extent and its dpi and takes a pixel a whole number of times coarser (4 at
the demo's 1500 x 1500), so the longer side has at most :data:`DRAFT_SIDE` pixels and every draft
pixel is a block of whole canvas pixels: sources on the canvas's grid are read with GDAL's
decimated reads (block averages, from overviews where a file has them) instead of at full
resolution (:class:`compose.sources.raster.RasterSource`, ``decimate``). Keeping the dpi keeps
strokes, halos and labels as wide in pixels as in the full render (a 0.5 pt line stays one drawn
line on its halo instead of dissolving into sub-pixel blends), which is what the contrast rules
judge; everything measured by share or percentile (ground, themes, grey order, relief) is a
sample of the same map. Its verdict agrees with the full check's on every example style, rule by
rule (tests/check/test_draft.py).

A file aligned with the canvas, without an overview at the draft's scale and of more than
:data:`compose.layers.early.DECIMATE_BLOCKS` blocks is not decimated (a decimated read decodes
every block: about 1 CPU-s for an 8192 x 8192 float32 deflate file): the draft reads an evenly
spread sample of about :data:`compose.layers.early.SAMPLE_BLOCKS` (16) whole blocks, and each draft
pixel takes one full-resolution cell of a block read -- its own where its block was read, else the
same place in the nearest block read in its row of blocks
(:class:`compose.layers.early.BlockSample`). The raster values are then the full map's own,
arranged as a mosaic of the blocks read: every share and percentile is estimated from that sample
of blocks instead of the whole canvas, which errs most on maps whose themes change from region to
region at a scale coarser than the sample's spacing. Measured on six maps of 256 blocks (three
smooth, three whose theme and terrain change by region; 16 blocks sampled;
tests/layers/test_early.py), the largest differences from the full check were: ground L* 0.4,
relief spread 0.1 L*, theme chroma 1.4, grey order 0.033, relief shift 0.05, overlay contrast share
0.03 -- every verdict the same (with 32 blocks: 0.4, 0.4, 0.8, 0.036, 0.014, 0.048). The 8192
benchmark's files repeat one block, so its draft measures no sampling error. Rasters aligned alike
sample the same blocks, so a theme and its relief stay paired cell by cell; the example styles'
files are small enough to be decimated as before.
"""
from __future__ import annotations

from compose.canvas import DRAFT_SIDE, Canvas

__all__ = ["DRAFT_SIDE", "draft_canvas", "describe_draft"]


def draft_canvas(canvas: Canvas, side: int = DRAFT_SIDE) -> Canvas:
    """``canvas`` at a pixel a whole number of times coarser so its longer side is at most ``side``
    pixels, same extent and dpi (the canvas itself when it is already that small; made by
    :meth:`compose.canvas.Canvas.draft`, which a command forking the draft's marks process uses
    before this package is imported)."""
    return canvas.draft(side)


def describe_draft(draft: Canvas, full: Canvas) -> str:
    """``"384 x 384 of 1500 x 1500 px"``: what a draft report says it checked."""
    return f"{draft.width} x {draft.height} of {full.width} x {full.height} px"
