"""The layer drawn over part of the data, and the opacity that makes an on-map rule pass.

A haze (an area or raster drawn semi-transparent over the map) or any other layer drawn over
one twin but not the other moves the colours the reader sees under it toward its own colour: by
a share ``opacity`` with blend "normal" (W3C Compositing and Blending Level 1, source-over,
in gamma-encoded sRGB), and by a share of what it multiplies with the other blends. The gap it
opens between twins (or between the arms of a diverging ramp) grows about in proportion to its
opacity for small opacities, so the opacity that closes the gap to a target is estimated as

    new opacity = opacity x (target - own gap) / (measured gap - own gap)

where "own gap" is what the ramps differ by before any layer is blended, and ``target`` is
:data:`TARGET_SHARE` of the limit (the margin takes up the curvature of L* and C*ab against the
encoded mix; our design choice, no source). The estimate is tested by applying it and checking
again (tests/check/test_covering.py).
"""
from __future__ import annotations

import math

from compose.check.context import CheckContext, layer_key
from compose.check.report import Change

__all__ = ["TARGET_SHARE", "covering_layer", "covering_step"]

TARGET_SHARE = 0.6       # aim at 60 % of the limit (our design choice, no source)
#: Kinds whose marks cover an area (a line, point or label is too thin to shift a twin).
AREA_KINDS = ("areas", "field", "classes", "relief")


def covering_layer(ctx: CheckContext, under: list):
    """The layer drawn after every layer of ``under`` (specs) that covers an area and most of
    the canvas (coverage x opacity): the likeliest cause of a colour shift over part of them.
    None when no such layer is drawn."""
    order = [s.name for s in ctx.stats.layers]
    names = {sp.name for sp in under}
    first = min(order.index(n) for n in names if n in order)
    found = []
    for spec, s in ctx.layers():
        if spec.name in names or spec.name not in order or order.index(spec.name) <= first:
            continue
        if spec.kind not in AREA_KINDS or spec.opacity <= 0.0:
            continue
        found.append((ctx.coverage(s) * spec.opacity, spec))
    return max(found, key=lambda t: t[0])[1] if found else None


def covering_step(ctx: CheckContext, under: list, value: float, limit: float, own: float,
                  what: str) -> tuple[str, Change] | None:
    """A fix that makes the layer drawn over ``under`` fainter so that the measured gap
    ``value`` (> ``limit``; ramps' own gap ``own``) falls to :data:`TARGET_SHARE` of the limit;
    ``what`` names the pair in the text. None when no layer covers them or the ramps' own gap
    leaves no room."""
    spec = covering_layer(ctx, under)
    target = TARGET_SHARE * limit
    if spec is None or value <= own or own >= target:
        return None
    a0 = float(spec.opacity)
    a = math.floor(a0 * (target - own) / (value - own) * 100.0) / 100.0
    a = max(0.0, min(a, a0 - 0.01))
    how = ("" if spec.blend == "normal" else f' (blend "{spec.blend}")')
    if a < 0.05:
        text = (f'"{spec.name}"{how} is drawn over {what} and shifts one more than the other: '
                f"it must all but vanish to let them match (opacity = 0, now {a0:g}); or draw it "
                "over both alike")
        return text, Change(layer_key(spec.name), {"opacity": 0.0})
    text = (f'"{spec.name}"{how} is drawn over {what} and shifts one more than the other: make '
            f"it fainter, opacity = {a:g} (now {a0:g}); or draw it over both alike")
    return text, Change(layer_key(spec.name), {"opacity": a})
