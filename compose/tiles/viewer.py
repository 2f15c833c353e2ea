"""index.html beside a tile pyramid: a self-contained viewer (our own plain script, no network)
that pans by dragging, zooms with the wheel or the + / - buttons between the zooms rendered,
and shows the caution line."""
from __future__ import annotations

import html
import json

from compose.tiles.grid import ORIGIN, TILE

__all__ = ["viewer_html"]

_SCRIPT = r"""
(function () {
  const cfg = JSON.parse(document.getElementById("cfg").textContent);
  const view = document.getElementById("view"), layer = document.getElementById("tiles");
  const O = cfg.origin, T = cfg.tile;
  let z = cfg.zooms[0];
  // the centre of the view in Web Mercator metres
  let cx = (cfg.bounds[0] + cfg.bounds[2]) / 2, cy = (cfg.bounds[1] + cfg.bounds[3]) / 2;
  const span = (zz) => 2 * O / Math.pow(2, zz);          // tile width in metres
  function fit() {                                        // deepest zoom showing the whole extent
    const w = view.clientWidth, h = view.clientHeight;
    for (let i = cfg.zooms.length - 1; i >= 0; i--) {
      const m = span(cfg.zooms[i]) / T;
      if ((cfg.bounds[2] - cfg.bounds[0]) / m <= w && (cfg.bounds[3] - cfg.bounds[1]) / m <= h) {
        return cfg.zooms[i];
      }
    }
    return cfg.zooms[0];
  }
  function draw() {
    const w = view.clientWidth, h = view.clientHeight, m = span(z) / T;
    const left = cx - w / 2 * m, top = cy + h / 2 * m;     // metres of the view's top-left
    const x0 = Math.floor((left + O) / span(z)), x1 = Math.floor((left + w * m + O) / span(z));
    const y0 = Math.floor((O - top) / span(z)), y1 = Math.floor((O - (top - h * m)) / span(z));
    layer.textContent = "";
    for (let x = x0; x <= x1; x++) {
      for (let y = y0; y <= y1; y++) {
        if (!cfg.present[z] || !cfg.present[z].includes(x + "/" + y)) continue;
        const img = document.createElement("img");
        img.src = z + "/" + x + "/" + y + ".png";
        img.style.left = Math.round((-O + x * span(z) - left) / m) + "px";
        img.style.top = Math.round((top - (O - y * span(z))) / m) + "px";
        layer.appendChild(img);
      }
    }
    document.getElementById("zoom").textContent = "zoom " + z;
  }
  function step(d) {
    const i = cfg.zooms.indexOf(z) + d;
    if (i >= 0 && i < cfg.zooms.length) { z = cfg.zooms[i]; draw(); }
  }
  let drag = null;
  view.addEventListener("mousedown", (e) => { drag = [e.clientX, e.clientY]; e.preventDefault(); });
  window.addEventListener("mouseup", () => { drag = null; });
  window.addEventListener("mousemove", (e) => {
    if (!drag) return;
    const m = span(z) / T;
    cx -= (e.clientX - drag[0]) * m; cy += (e.clientY - drag[1]) * m;
    drag = [e.clientX, e.clientY]; draw();
  });
  view.addEventListener("wheel", (e) => { e.preventDefault(); step(e.deltaY < 0 ? 1 : -1); },
                        { passive: false });
  document.getElementById("in").onclick = () => step(1);
  document.getElementById("out").onclick = () => step(-1);
  window.addEventListener("resize", draw);
  z = fit(); draw();
})();
"""

def _css() -> str:
    """The page's style sheet, in the interface colours (:mod:`compose.color.interface`)."""
    from compose.color import interface as ui

    return f"""
body {{ margin: 0; font: 14px/1.4 "DejaVu Sans", sans-serif; color: {ui.INK.hex};
        background: {ui.SURROUND.hex}; }}
header {{ padding: 8px 14px; }}
h1 {{ font-size: 17px; margin: 0; }}
#view {{ position: relative; overflow: hidden; height: calc(100vh - 96px); background: {ui.PANEL.hex};
        cursor: grab; border-top: 1px solid {ui.RULE.hex}; border-bottom: 1px solid {ui.RULE.hex}; }}
#tiles img {{ position: absolute; width: 256px; height: 256px; user-select: none; }}
#bar {{ position: absolute; top: 10px; right: 10px; display: flex; gap: 4px; align-items: center; }}
#bar button {{ width: 30px; height: 30px; font-size: 18px; background: {ui.PAPER.hex};
              color: {ui.INK.hex}; border: 1px solid {ui.MUTED.hex}; border-radius: 3px;
              cursor: pointer; }}
#zoom {{ background: {ui.PAPER.hex}; padding: 3px 6px; border: 1px solid {ui.MUTED.hex};
        border-radius: 3px; }}
footer {{ padding: 4px 14px; font-size: 12px; }}
"""


def viewer_html(style, bounds, zooms: list[int], counts: dict[int, int],
                present: dict[int, list[str]] | None = None) -> str:
    """The viewer page. ``bounds``: the data's (west, south, east, north) in EPSG:3857;
    ``present``: "x/y" of the tiles written per zoom (None: read from ``counts`` only)."""
    from compose.check.report import CAUTION

    title = (style.map.title if style.map is not None else "") or style.name
    cfg = {"origin": ORIGIN, "tile": TILE, "bounds": list(bounds),
           "zooms": [z for z in zooms if counts.get(z)] or list(zooms),
           "present": {str(z): v for z, v in (present or {}).items()}}
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{html.escape(title)} -- tiles</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<style>{_css()}</style></head>
<body>
<header><h1>{html.escape(title)}</h1>
<div>{sum(counts.values())} tiles, zooms {", ".join(f"{z} ({n})" for z, n in counts.items())};
drag to pan, wheel or buttons to zoom.</div></header>
<div id="view"><div id="tiles"></div>
<div id="bar"><span id="zoom"></span><button id="out" title="zoom out">&minus;</button>
<button id="in" title="zoom in">+</button></div></div>
<footer>{html.escape(CAUTION)}</footer>
<script type="application/json" id="cfg">{json.dumps(cfg)}</script>
<script>{_SCRIPT}</script>
</body></html>
"""
