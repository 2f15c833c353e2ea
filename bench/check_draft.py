"""Time the full check against the draft check (``compose check --draft``) of the example styles,
in one process, medians of ``--runs`` runs; ``--scale K`` also checks each style on a canvas K
times finer (the same extent at pixel / K and dpi x K), the size where a draft pays off.

    .venv/bin/python bench/check_draft.py [--runs 3] [--scale 4] [styles...]

Prints seconds and the same-run ratio full / draft, and whether the verdicts agree.
"""
from __future__ import annotations

import argparse
import statistics
import time
from pathlib import Path

from compose.canvas import Canvas
from compose.check import check_style
from compose.check.draft import draft_canvas
from compose.engine import prepare, run
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[1] / "styles"


def timed_check(style, canvas, draft=False):
    t = time.perf_counter()
    prepared = prepare(style, canvas=canvas, draft=draft)
    try:
        report = check_style(style, run(prepared, []), prepared.ramps)
    finally:
        prepared.close()
    return time.perf_counter() - t, report


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("styles", nargs="*", default=["coast", "sea-warmth", "change", "cover", "poor"])
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--scale", type=float, default=1.0)
    a = ap.parse_args()
    for name in a.styles:
        style = load_style(STYLES / f"{name}.toml")
        full = style.canvas()
        if a.scale != 1:
            full = Canvas.from_extent(full.crs, full.bounds, full.pixel / a.scale, dpi=full.dpi * a.scale)
        draft = draft_canvas(full)
        tf, td = [], []
        for _ in range(a.runs):
            t, rf = timed_check(style, full)
            tf.append(t)
            t, rd = timed_check(style, draft, draft=True)
            td.append(t)
        mf, md = statistics.median(tf), statistics.median(td)
        agree = rf.passed == rd.passed and {r.rule for r in rf.failures} == {r.rule for r in rd.failures}
        print(f"{name:<11} full {full.width}x{full.height} {mf:6.2f} s   draft {draft.width}x"
              f"{draft.height} {md:5.2f} s   x{mf / md:5.1f}   verdict {'agrees' if agree else 'DIFFERS'}"
              f" ({'pass' if rf.passed else 'fail'})")


if __name__ == "__main__":
    main()
