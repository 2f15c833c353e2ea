"""Benchmark: 8-bit sRGB -> CIE LCh(ab) throughput of the lookup-table path, on one core.

    python bench/color.py [--size 4096] [--repeat 5]

Prints, from the same run:
  * compose.color.srgb8_to_lch on a size x size random uint8 image: median of ``repeat`` runs,
    in Mpixel/s, against the target of 20 Mpixel/s;
  * for comparison, the colour-library path -- colour-science's sRGB -> XYZ -> Lab -> LCh applied
    to every pixel (vectorised over the array, float64) -- and our own float64 path, on 1e6 pixels.
No assertion is made: the figures are for the closing notes and for regressions by eye.
"""
from __future__ import annotations

import os

# One core: set before numpy (and its BLAS / OpenMP pools) is imported.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS",
             "VECLIB_MAXIMUM_THREADS", "BLIS_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import statistics  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402

import numpy as np  # noqa: E402

TARGET_MPX = 20.0  # Mpixel/s, one core (project target)


def pin_one_core() -> str:
    """Restrict this process to one CPU where the OS allows it; returns a note for the print-out."""
    if hasattr(os, "sched_setaffinity"):
        cpu = min(os.sched_getaffinity(0))
        os.sched_setaffinity(0, {cpu})
        return f"pinned to CPU {cpu}"
    return "threads limited to 1 (no CPU pinning on this OS)"


def timed(fn, repeat: int) -> list[float]:
    """Wall-clock seconds of ``repeat`` calls of ``fn``."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=4096, help="image side in pixels (default 4096)")
    parser.add_argument("--repeat", type=int, default=5, help="runs to take the median of (default 5)")
    parser.add_argument("--compare", type=int, default=1_000_000, help="pixels for the comparison paths")
    args = parser.parse_args()

    from compose.color.bulk import srgb8_to_lch
    from compose.color.lab import srgb_to_lch

    note = pin_one_core()
    rng = np.random.default_rng(0)
    img = rng.integers(0, 256, (args.size, args.size, 3), dtype=np.uint8)
    n = args.size * args.size
    srgb8_to_lch(img[:64])  # warm-up (tables, allocator)
    times = timed(lambda: srgb8_to_lch(img), args.repeat)
    med = statistics.median(times)
    rate = n / med / 1e6
    print(f"compose.color.srgb8_to_lch, {args.size} x {args.size} uint8, {note}")
    print(f"  runs (s): {', '.join(f'{t:.3f}' for t in times)}")
    print(f"  median {med:.3f} s -> {rate:.1f} Mpixel/s   (target >= {TARGET_MPX:.0f} Mpixel/s: "
          f"{'met' if rate >= TARGET_MPX else 'NOT met'})")

    px = rng.integers(0, 256, (args.compare, 3), dtype=np.uint8)
    rgb = px / 255.0
    try:
        import colour
    except ImportError:
        print("colour-science not installed: comparison skipped")
    else:
        def color_path():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)))

        t_cs = statistics.median(timed(color_path, 3))
        print(f"colour-science sRGB -> XYZ -> Lab -> LCh, {args.compare:.0e} pixels (float64): "
              f"{t_cs:.3f} s -> {args.compare / t_cs / 1e6:.1f} Mpixel/s")
    t_ours = statistics.median(timed(lambda: srgb_to_lch(rgb), 3))
    print(f"compose.color.srgb_to_lch (float64, no tables), {args.compare:.0e} pixels: "
          f"{t_ours:.3f} s -> {args.compare / t_ours / 1e6:.1f} Mpixel/s")
    t_fast = statistics.median(timed(lambda: srgb8_to_lch(px), 3))
    print(f"compose.color.srgb8_to_lch, same {args.compare:.0e} pixels: "
          f"{t_fast:.3f} s -> {args.compare / t_fast / 1e6:.1f} Mpixel/s")


if __name__ == "__main__":
    main()
