"""Make the small README pictures from a demo run: `python docs/make_images.py out/demo`."""
import sys
from pathlib import Path

from PIL import Image

src = Path(sys.argv[1] if len(sys.argv) > 1 else "out/demo")
dst = Path(__file__).resolve().parent / "img"
dst.mkdir(exist_ok=True)
for name in ("coast", "sea-warmth", "change", "cover", "poor"):
    im = Image.open(src / f"{name}.png").convert("RGB")
    im.thumbnail((520, 520), Image.LANCZOS)
    im.quantize(colors=256, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE).save(
        dst / f"{name}.png", optimize=True)
    leg = Image.open(src / f"{name}.legend.png").convert("RGB")
    leg.thumbnail((360, 420), Image.LANCZOS)
    leg.quantize(colors=128, dither=Image.Dither.NONE).save(dst / f"{name}.legend.png", optimize=True)
sheet = Image.open(src / "coast.proof-sheet.png").convert("RGB")
sheet.thumbnail((1100, 400), Image.LANCZOS)
sheet.quantize(colors=256, dither=Image.Dither.NONE).save(dst / "coast.proof-sheet.png", optimize=True)
page = Image.open(src / "coast.page.png").convert("RGB")     # the finished page, as printed
page.thumbnail((1200, 860), Image.LANCZOS)
page.quantize(colors=256, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE).save(
    dst / "coast.page.png", optimize=True)
print("written to", dst)
