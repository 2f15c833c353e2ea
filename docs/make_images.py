"""Make the small README pictures from a demo run: `python docs/make_images.py out/demo`.

Saved as 8-bit RGB, not quantized: a palette of 256 colours (median cut, octree) merges the
overlays' thin line colours -- the brick-brown roads, the slate coast, the purple boundary -- into
the map's greens, in the map and in its legend, so the pictures would show the overlays the demo
was styled to tell apart as one colour."""
import sys
from pathlib import Path

from PIL import Image

src = Path(sys.argv[1] if len(sys.argv) > 1 else "out/demo")
dst = Path(__file__).resolve().parent / "img"
dst.mkdir(exist_ok=True)


def small(name: str, box: tuple[int, int], out: str | None = None) -> None:
    im = Image.open(src / name).convert("RGB")
    im.thumbnail(box, Image.LANCZOS)
    im.save(dst / (out or name), optimize=True)


for name in ("coast", "sea-warmth", "change", "cover", "poor"):
    small(f"{name}.png", (520, 520))
    small(f"{name}.legend.png", (360, 420))
small("coast.proof-sheet.png", (1100, 400))
small("coast.page.png", (1200, 860))       # the finished page, as printed
print("written to", dst)
