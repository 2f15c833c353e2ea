"""Time the page outputs (PDF, SVG, page PNG) against the map render of the same style.

    python bench/page.py [STYLE] [--runs N]

Prints the median over N runs of: compute (the window walk), PNG/GeoTIFF encoding, and each page
writer, with each page writer's share of the walk's compute time. Never asserted in tests.
"""
from __future__ import annotations

import argparse
import statistics
import tempfile
from pathlib import Path

from compose.render import render_style
from compose.style import load_style


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("style", nargs="?", default=str(Path(__file__).parents[1] / "styles/coast.toml"))
    ap.add_argument("--runs", type=int, default=3)
    args = ap.parse_args()
    style = load_style(args.style)
    runs: dict[str, list[float]] = {}
    for _ in range(args.runs):
        with tempfile.TemporaryDirectory() as tmp:
            result = render_style(style, Path(tmp), html=False, legend=False, check=False)
        for k, v in result.seconds.items():
            runs.setdefault(k, []).append(v)
    med = {k: statistics.median(v) for k, v in runs.items()}
    print(f"{style.name}: {result.width} x {result.height} px, median of {args.runs} run(s)")
    for k in sorted(med):
        share = f"  ({med[k] / med['compute']:.2f} x compute)" if k.startswith("page") else ""
        print(f"  {k:<16} {med[k]:7.2f} s{share}")


if __name__ == "__main__":
    main()
