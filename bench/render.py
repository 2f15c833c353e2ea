"""Benchmark: synthetic N x N renders (relief + field + lines) beside independent kernel floors.

    python bench/render.py [--sizes 2048,8192] [--big] [--lines 10000] [--quick] [--statistics] [--pairs 5]

For every size it prints, from the same run:
  * floors (bench/floors.py, written without compose's code): Agg lines on the whole canvas,
    Horn hillshade in strips, LUT gather, 3-layer planar composite (1 and 2 threads), GDAL
    reads of the two float32 rasters; the summed compute floor; GeoTIFF write (deflate, tiled,
    NUM_THREADS=ALL_CPUS, zlevel 6 and 1) and PNG (numpy Up filter + isal level 3, 2 threads)
    of the rendered pixels, with the PNG size against zlib level 6;
  * the default ``compose render`` command with all its outputs (wall time, peak memory of the
    child process);
  * every target beside its floor (medians of 3 runs): the bare render (PNG + GeoTIFF + check)
    with the automatic workers (what ``compose render`` does without ``--workers``), 1 and 2
    workers against the summed floors, compute alone with and without the
    statistics against the compute floor (at least 5 turns, each an alternating pair of
    computes and the compute floor's kernels measured again beside them; the ratio is the
    median of the turns' own ratios, their spread printed beside; the
    statistics' share from the median of the pairs' differences in wall and in CPU time, and
    the statistics' own calls timed inside 3 more walks), and the share of the
    encoders' own work that ran beside the compute (the render's own timers); the layer
    previews' sums (an output of the HTML page, summed in the same walk) on a line of their own,
    not counted as statistics;
  * the statistics' share window by window, the target's figure (3 walks in which every
    window's paints are made once, then the window is composited without and with its measure
    in alternating order on one thread: the machine's drift over seconds, which spreads whole
    walks' differences by about 1 s here, cancels within a window);
  * window count independence of line drawing, and reprojected against aligned reads;
  * workers: compute with 1 thread, 2 threads (--workers 2), 2 worker processes and a 2-worker
    dask LocalCluster.
Then the 1500 x 1500 demo style (render with all outputs, ``compose check`` cold and warm; medians
of 5) and the start-up time of ``compose --help``. ``--statistics``: only the statistics' four
figures, measured as above (the 1-worker bare render, the windows paired, the alternating pairs
without floors between them, the walks timed inside), for A/B turns against another tree (PYTHONPATH).

Every render runs in a child process with compose's own settings (no GDAL cache or thread
settings of ours; the compute-only and bare renders set the command's malloc settings,
:func:`compose.heap.limit_arenas`, as ``compose render`` does); peak memory is the child's
own high-water mark (VmHWM; its ru_maxrss would include this bench's peak, which Linux carries
across exec). Times on a shared machine are noisy: read ratios within one run. No assertion is
made: the figures are for the closing notes.
"""
from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

import floors  # noqa: E402

from compose.output.png import DEFLATE as PNG_DEFLATE  # noqa: E402
from compose.output.png import LEVEL as PNG_LEVEL  # noqa: E402

COMPOSE = [sys.executable, "-c", "import sys; from compose.cli.main import main; sys.exit(main())"]


def make_data(folder: Path, size: int, n_lines: int) -> None:
    """Synthetic DEM, field and lines on an EPSG:32630 grid of size x size 30 m pixels."""
    import fiona
    import rasterio
    from affine import Affine

    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    transform = Affine(30, 0, 400000, 0, -30, 4600000)
    profile = dict(driver="GTiff", width=size, height=size, count=1, dtype="float32",
                   crs="EPSG:32630", transform=transform, tiled=True, blockxsize=512,
                   blockysize=512, compress="deflate", predictor=3, num_threads="all_cpus")
    y, x = np.mgrid[0:256, 0:256] / 256.0
    base = (np.sin(x * 9) * np.cos(y * 7) * 400 + rng.normal(0, 30, (256, 256))).astype("float32")
    with rasterio.open(folder / "dem.tif", "w", **profile, nodata=-9999) as dem, \
            rasterio.open(folder / "field.tif", "w", **profile, nodata=np.nan) as field:
        reps = (size + 255) // 256
        for r0 in range(0, size, 512):
            h = min(512, size - r0)
            tile = np.tile(base, (3, reps))[r0 % 256:r0 % 256 + h, :size] + 800
            dem.write(tile, 1, window=rasterio.windows.Window(0, r0, size, h))
            field.write(((tile - 300) / 100).astype("float32"), 1,
                        window=rasterio.windows.Window(0, r0, size, h))
    schema = {"geometry": "LineString", "properties": {"kind": "str"}}
    span = size * 30
    with fiona.open(folder / "lines.gpkg", "w", driver="GPKG", layer="lines", crs="EPSG:32630",
                    schema=schema) as dst:
        starts = rng.uniform(0, span, (n_lines, 2))
        steps = rng.normal(0, 300, (n_lines, 100, 2)).cumsum(axis=1)
        records = []
        for i in range(n_lines):
            pts = starts[i] + steps[i]
            pts[:, 0] += 400000
            pts[:, 1] = 4600000 - pts[:, 1]
            records.append({"geometry": {"type": "LineString", "coordinates": pts.tolist()},
                            "properties": {"kind": "road"}})
        dst.writerecords(records)


STYLE = """
[map]
name = "bench"
title = "benchmark"
crs = "{crs}"
extent = [{west}, {south}, {east}, {north}]
pixel = 30
dpi = 150

[ramp.bench]
kind = "sequential"
domain = [0, 12]
through = [{{L = 92, C = 10, h = 95}}, {{L = 55, C = 40, h = 140}}, {{L = 25, C = 20, h = 160}}]

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "dem.tif"

[[layer]]
name = "field"
role = "theme"
kind = "field"
source = "field.tif"
ramp = "bench"
blend = "multiply"

[[layer]]
name = "lines"
role = "overlay"
kind = "lines"
source = "lines.gpkg"
stroke = "#3a3a3a"
width = 0.48
"""
# width 0.48 pt at 150 dpi = 1.0 px, the floor's line width


def write_styles(folder: Path, size: int) -> dict[str, Path]:
    """bench.toml (aligned with the rasters), bench-utm31.toml (the same area on a neighbouring
    UTM zone's grid: every read is reprojected), bench-lines.toml (lines only)."""
    span = size * 30
    aligned = STYLE.format(crs="EPSG:32630", west=400000, south=4600000 - span,
                           east=400000 + span, north=4600000)
    (folder / "bench.toml").write_text(aligned)
    # the canvas centre moved to zone 31 (central meridian 3 E vs -3 E), same size in pixels
    from pyproj import Transformer
    cx, cy = 400000 + span / 2, 4600000 - span / 2
    x, y = Transformer.from_crs("EPSG:32630", "EPSG:32631", always_xy=True).transform(cx, cy)
    other = STYLE.format(crs="EPSG:32631", west=round(x - span / 2), south=round(y - span / 2),
                         east=round(x - span / 2) + span, north=round(y - span / 2) + span)
    (folder / "bench-utm31.toml").write_text(other.replace('name = "bench"', 'name = "bench31"'))
    lines_only = aligned.split("[[layer]]")
    (folder / "bench-lines.toml").write_text(lines_only[0] + "[[layer]]" + lines_only[3])
    return {"aligned": folder / "bench.toml", "utm31": folder / "bench-utm31.toml",
            "lines": folder / "bench-lines.toml"}


# --- child processes ------------------------------------------------------------------------

def child(argv: list[str], cwd: Path | None = None, env: dict | None = None) -> dict:
    """Run a process; {seconds, peak (bytes, its ru_maxrss), stdout, code}."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, cwd=cwd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out, err = proc.communicate()
    seconds = time.perf_counter() - t0
    return {"seconds": seconds, "stdout": out.decode(), "stderr": err.decode(), "code": proc.returncode}


_SAMPLER = r"""
import json, os, subprocess, sys, threading, time, resource

def pss(pid):
    # proportional set size: shared pages (forked workers) counted once in the sum, bytes
    try:
        with open(f"/proc/{pid}/smaps_rollup") as f:
            for line in f:
                if line.startswith("Pss:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0

def tree_rss(root):
    # memory of a process and all its descendants (Linux /proc, PSS)
    kids = {}
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            with open(f"/proc/{d}/stat") as f:
                fields = f.read().rsplit(")", 1)[1].split()
            kids.setdefault(int(fields[1]), []).append(int(d))
        except (OSError, IndexError, ValueError):
            pass
    total, todo = 0, [root]
    while todo:
        p = todo.pop()
        total += pss(p)
        todo += kids.get(p, [])
    return total

t = time.perf_counter()
p = subprocess.Popen(sys.argv[1:], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
peak = [0]
def watch():
    while p.poll() is None:
        peak[0] = max(peak[0], tree_rss(p.pid))
        time.sleep(0.05)
threading.Thread(target=watch, daemon=True).start()
out, err = p.communicate()
dt = time.perf_counter() - t
ru = resource.getrusage(resource.RUSAGE_CHILDREN)
sys.stderr.write(err.decode())
print(json.dumps({"seconds": dt, "peak": peak[0], "peak_one": ru.ru_maxrss * 1024,
                  "code": p.returncode, "cpu": ru.ru_utime + ru.ru_stime, "out": out.decode()}))
"""


def timed(argv: list[str], cwd: Path | None = None) -> dict:
    """Run a command; wall seconds, CPU seconds and peak memory: the largest sum of proportional
    set sizes (shared pages counted once) over the process and its children (worker processes
    included), sampled every 50 ms; ``peak_one``: the largest single process's ru_maxrss."""
    res = child([sys.executable, "-c", _SAMPLER, *argv], cwd=cwd)
    if res["code"] != 0 or not res["stdout"].strip():
        raise RuntimeError(f"{' '.join(map(str, argv))} failed:\n{res['stderr'][-2000:]}")
    data = json.loads(res["stdout"].strip().splitlines()[-1])
    if data["code"] not in (0, 1):      # 1: a rule failed, the outputs are there
        raise RuntimeError(f"{' '.join(map(str, argv))} exited {data['code']}:\n{res['stderr'][-2000:]}")
    return data


TASK = r"""
import json, resource, sys, time
from pathlib import Path
mode, style_path, out = sys.argv[1], Path(sys.argv[2]), Path(sys.argv[3])
extra = json.loads(sys.argv[4]) if len(sys.argv) > 4 else {}
# the command's malloc settings (compose.cli.render calls this before its walk's threads start):
# shared arenas, a fixed mmap threshold and freed memory kept until the walk trims it each row
from compose.heap import limit_arenas
limit_arenas()
from compose.style import load_style
style = load_style(style_path)
mapper, cluster = None, None
result = {}
workers = extra.pop("workers", None)
processes = extra.pop("processes", None)
if extra.pop("cluster", False):          # a LocalCluster of 2 worker processes, 1 thread each
    from distributed import Client, LocalCluster
    from compose.parallel import ClusterMapper
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
    client = Client(cluster)
    mapper = ClusterMapper(client)
elif processes:
    from compose.parallel import ProcessMapper
    mapper = ProcessMapper(processes)
elif extra.pop("auto", False):            # what compose render does with no --workers
    from compose.parallel import mapper_for
    canvas = style.canvas()
    mapper = mapper_for(canvas.width * canvas.height)
    n = getattr(mapper, "workers", 0)
    result["mapper"] = (f"{n} window thread{'s' if n != 1 else ''} + the drawing helper process"
                        if n else "this thread, no helper")
elif workers:                            # what --workers does: threads sharing the render
    from compose.parallel import ThreadMapper
    mapper = ThreadMapper(workers) if workers > 1 else None
inside = {}
if extra.pop("inside", False):
    # the statistics' own calls timed inside the walk (this thread's CPU time): the window
    # measure's methods, the merge of windows, and of them the two compiled kernels
    import compose.measure as measure_mod
    from compose.check.stats import Statistics

    def timed_call(owner, name, key):
        fn = getattr(owner, name)

        def wrapper(*args, **kw):
            t = time.thread_time()
            try:
                return fn(*args, **kw)
            finally:
                inside[key] = inside.get(key, 0.0) + time.thread_time() - t
        setattr(owner, name, wrapper)
    for name in ("__init__", "begin_layer", "paint", "end_layer", "finish"):
        timed_call(measure_mod.WindowMeasure, name, "measure")
    timed_call(Statistics, "merge", "measure")
    timed_call(measure_mod, "_overlay_compiled", "overlay")
    timed_call(measure_mod, "_gray_compiled", "gray")
    if hasattr(measure_mod, "composite_flat_gathering"):
        # an overlay's flat colour composited while what lies beneath is gathered for its
        # measure (WindowMeasure.paint_over): the statistics' share of that pass is its time
        # less a plain composite of the same paint onto a copy of the same rows (what the walk
        # without statistics does), timed beside it; the copy itself is not timed
        from compose.composite import composite_over
        fused_fn = measure_mod.composite_flat_gathering

        def gathering(backdrop, source, alpha, mode, opaque, region, *bufs):
            copy = backdrop.copy()
            t = time.thread_time()
            composite_over(copy, source, alpha, mode, out=copy, opaque=opaque)
            plain = time.thread_time() - t
            t = time.thread_time()
            try:
                return fused_fn(backdrop, source, alpha, mode, opaque, region, *bufs)
            finally:
                extra = time.thread_time() - t - plain
                for key in ("measure", "overlay"):
                    inside[key] = inside.get(key, 0.0) + extra
                inside["gathered"] = inside.get("gathered", 0.0) + extra
        measure_mod.composite_flat_gathering = gathering
t0 = time.perf_counter()
if mode == "paired":
    # the statistics' cost window by window: each window's paints made once (untimed), then
    # the window composited without and with its measure, in alternating order, timed on this
    # thread, and its statistics merged (timed); the machine's drift over seconds, which
    # spreads whole walks' differences, cancels within a window's few milliseconds
    from compose.engine import prepare, render_window
    r = prepare(style)
    try:
        class Made:
            # a window's paints, made before its timed composites (DrawAhead's interface)
            window, by_layer = None, {}

            def paints(self, window, li):
                return self.by_layer[li] if window is self.window else None

        made = Made()
        plain_s = measured_s = merge_s = 0.0
        total = None
        for i, win in enumerate(r.windows()):
            _, _, h, w = win.padded
            transform = r.canvas.window_transform(win)
            made.window = win
            made.by_layer = {li: layer.paint(win, transform, h, w) for li, layer in enumerate(r.layers)}
            order = (False, True) if i % 2 == 0 else (True, False)
            for m in order:
                t = time.thread_time()
                res = render_window(r, win, measure=m, drawn=made)
                dt = time.thread_time() - t
                if m:
                    measured_s += dt
                    t = time.thread_time()
                    if total is None:
                        total = res.statistics
                    else:
                        total.merge(res.statistics)
                    merge_s += time.thread_time() - t
                else:
                    plain_s += dt
        result.update(plain=plain_s, measured=measured_s, merge=merge_s)
        if inside:
            result["inside"] = inside
    finally:
        r.close()
elif mode == "bare":
    from compose.render import render_style
    res = render_style(style, out, overwrite=True, legend=False, check=True, html=False,
                       mapper=mapper, **extra)
    result["seconds"] = dict(res.seconds)
else:                                   # compute only: every window, no outputs
    from compose.engine import prepare, run
    r = prepare(style)
    try:
        previews = None
        if mode == "previews":          # the HTML page's layer previews summed in the same walk
            from compose.previews import LayerPreviews
            previews = LayerPreviews(r.canvas.width, r.canvas.height, len(r.layers),
                                     tuple(style.map.background),
                                     blends=[la.spec.blend for la in r.layers])
        t1, c1 = time.perf_counter(), time.process_time()
        # the rows assembled into bands and handed to a sink, as a render's writers get them,
        # then dropped: with no sink at all the engine makes no bands (a check's walk), which a
        # render always pays for
        class Drop:
            def rows(self, row0, rgb8):
                pass

        run(r, [Drop()], measure=(mode in ("measure", "previews")), mapper=mapper,
            previews=previews, **extra)
        result["compute"] = time.perf_counter() - t1
        result["compute_cpu"] = time.process_time() - c1   # every thread of this process
        if inside:
            result["inside"] = inside
    finally:
        r.close()
result["wall"] = time.perf_counter() - t0
# VmHWM, not ru_maxrss: Linux carries the pre-exec high-water mark of the process that spawned
# this one (this bench, after its 8192 floors) into ru_maxrss, which read 1.29 GB here
with open("/proc/self/status") as f:
    result["peak"] = next(int(line.split()[1]) * 1024 for line in f if line.startswith("VmHWM:"))
if cluster is not None:
    client.close()
    cluster.close()
print(json.dumps(result))
"""


def task(mode: str, style: Path, out: Path, **extra) -> dict:
    res = child([sys.executable, "-c", TASK, mode, str(style), str(out), json.dumps(extra)])
    if res["code"] != 0:
        raise RuntimeError(f"task {mode} failed:\n{res['stderr'][-3000:]}")
    return json.loads(res["stdout"].strip().splitlines()[-1])


def median_task(runs: int, key, mode: str, style: Path, out: Path, **extra) -> tuple[float, dict]:
    """The median of ``runs`` runs of a task (``key(result)`` -> seconds) and the median run."""
    results = sorted((task(mode, style, out, **extra) for _ in range(runs)), key=key)
    mid = results[len(results) // 2]
    return key(mid), mid


def overlap(seconds: dict) -> float:
    """Share of the encoders' own work that ran beside the compute (render's own timers)."""
    work = seconds.get("encode-work", 0.0)
    return max(0.0, 1.0 - seconds.get("encode-waited", 0.0) / work) if work > 0 else 0.0


# --- report ---------------------------------------------------------------------------------

def gb(n: float) -> str:
    return f"{n / 1e9:.2f} GB"


def _vertices(folder: Path) -> int:
    """Vertices of the benchmark's lines (read in bulk)."""
    return len(floors._lines_pixels(folder, 0)[0])


def _read_floor(folder: Path) -> float:
    """GDAL read floor of the benchmark's two float32 rasters (seconds)."""
    return floors.geotiff_read(folder / "dem.tif") + floors.geotiff_read(folder / "field.tif")


def compute_floor_turn(folder: Path, size: int) -> float:
    """The compute floor measured once (seconds): the sum of the same kernels as the floors'
    section (Agg lines, Horn strips, LUT gather and planar composite on 1 thread, the GDAL read
    of both rasters), each run once, in this process."""
    return (floors.lines_agg(folder, size)[0] + floors.horn_strips(folder, size)
            + floors.lut_gather(size, 1) + floors.composite_planar(size, 1) + _read_floor(folder))


def paired_walks(style: Path, out: Path, runs: int = 3) -> list[dict]:
    """``runs`` walks of the "paired" task: every window composited without and with its
    measure, alternately, in one process (see TASK)."""
    return [task("paired", style, out) for _ in range(runs)]


def statistics_lines(total: float, pairs: list[tuple[float, float]],
                     cpu_pairs: list[tuple[float, float]], inside: dict, size: int,
                     paired: list[dict]) -> None:
    """The statistics' figures: window by window (``paired``, the target's), the alternating
    pairs' wall and CPU differences and the walks timed inside, each over ``total`` (the
    1-worker bare render's wall time) of a ``size`` x ``size`` canvas."""
    from compose.check.stats import gray_stride
    step = gray_stride(size, size)
    by_window = [p["measured"] - p["plain"] + p["merge"] for p in paired]
    window_cost = statistics.median(by_window)
    print(f"  statistics share, window by window              {100 * window_cost / total:6.1f} % "
          f"of the 1-worker render (target <= 10 %; median of {len(paired)} walks, "
          f"{window_cost:.2f} CPU-s: " + ", ".join(f"{c:.3f}" for c in by_window)
          + "; each window's paints made once, then the window composited without and with its "
          "measure in alternating order on one thread, plus the statistics' merges: the "
          "machine's drift over seconds cancels within a window's milliseconds)")
    cost = statistics.median(m - p for p, m in pairs)
    cpu = statistics.median(m - p for p, m in cpu_pairs)
    print(f"  statistics share, whole walks                   {100 * cost / total:6.1f} % "
          f"of the 1-worker render (median of {len(pairs)} alternating pairs of whole walks' "
          f"differences, {cost:.2f} s, single differences spread by this machine's drift; pairs: "
          + ", ".join(f"{m - p:+.2f}" for p, m in pairs)
          + "; hierarchy statistics only: the bare render and this figure sum no previews)")
    print(f"  statistics share, CPU time                      {100 * cpu / total:6.1f} % "
          f"of the 1-worker render's wall (median of the same pairs' CPU differences, "
          f"{cpu:.2f} CPU-s; pairs: " + ", ".join(f"{m - p:+.2f}" for p, m in cpu_pairs) + ")")
    print(f"  statistics inside the walk                      {100 * inside['measure'] / total:6.1f} % "
          f"of the 1-worker render ({inside['measure']:.2f} CPU-s of the window measure's own calls "
          f"and the merge, median of 3 walks; of it the overlay kernel {inside['overlay']:.2f} s "
          f"(of which {inside['gathered']:.2f} s gathering what lies beneath while the overlay "
          f"is composited: that pass's time less a plain composite of the same paint beside it), "
          f"the grey order {inside['gray']:.2f} s, sampled on one row and column in {step} at this "
          f"size (compose.check.stats.gray_stride); the palette's entry counts are not in it)")


def bench_statistics(folder: Path, size: int, quick: bool, n_pairs: int = 5) -> None:
    """Only the statistics' figures of :func:`bench_size` (--statistics): the 1-worker bare
    render, the alternating pairs of computes with and without statistics (no floors between
    them) and the walks timed inside, measured the same way."""
    styles = write_styles(folder, size)
    out = folder / "out"
    runs = 1 if quick else 3
    print(f"\n== {size} x {size}, statistics only ==", flush=True)
    total, _ = median_task(runs, lambda r: r["wall"], "bare", styles["aligned"], out, workers=1)
    pairs: list[tuple[float, float]] = []
    cpu_pairs: list[tuple[float, float]] = []
    for i in range(max(runs, n_pairs)):
        order = ("plain", "measure") if i % 2 == 0 else ("measure", "plain")
        got = {mode: task(mode, styles["aligned"], out) for mode in order}
        pairs.append((got["plain"]["compute"], got["measure"]["compute"]))
        cpu_pairs.append((got["plain"]["compute_cpu"], got["measure"]["compute_cpu"]))
    insides = [task("measure", styles["aligned"], out, inside=True)["inside"] for _ in range(3)]
    inside = {k: statistics.median(i.get(k, 0.0) for i in insides)
              for k in ("measure", "overlay", "gray", "gathered")}
    paired = paired_walks(styles["aligned"], out, runs=3)
    print(f"  bare render, 1 worker                           {total:6.2f} s wall")
    statistics_lines(total, pairs, cpu_pairs, inside, size, paired)


def bench_size(folder: Path, size: int, n_lines: int, quick: bool, n_pairs: int = 5) -> None:
    styles = write_styles(folder, size)
    out = folder / "out"
    mpx = size * size / 1e6
    print(f"\n== {size} x {size} ({mpx:.0f} Mpixel), {n_lines} lines x 100 vertices ==", flush=True)

    # floors, one kernel at a time in this process, each the median of as many runs as the
    # targets below
    runs = 1 if quick else 3

    def med(fn, *args):
        return statistics.median(fn(*args) for _ in range(runs))

    t_lines = statistics.median(floors.lines_agg(folder, size)[0] for _ in range(runs))
    verts = _vertices(folder)
    t_horn = med(floors.horn_strips, folder, size)
    t_lut1, t_lut2 = med(floors.lut_gather, size, 1), med(floors.lut_gather, size, 2)
    t_cmp1, t_cmp2 = med(floors.composite_planar, size, 1), med(floors.composite_planar, size, 2)
    t_read = med(lambda: _read_floor(folder))
    compute_floor = t_lines + t_horn + t_lut1 + t_cmp1 + t_read
    print(f"floors (bench/floors.py: numpy, Agg, GDAL; none of compose's code; median of {runs})")
    print(f"  lines: {verts / 1e6:.2f} M vertices, 1 px, Agg, whole canvas, a path a line  {t_lines:6.2f} s")
    print(f"  Horn hillshade, {floors.STRIP}-row strips, 1 thread            {t_horn:6.2f} s")
    print(f"  LUT gather uint16 -> RGBA32, 1 thread (2 threads)      {t_lut1:6.2f} s  ({t_lut2:.2f} s)")
    print(f"  3-layer planar f32 composite, 1 thread (2 threads)     {t_cmp1:6.2f} s  ({t_cmp2:.2f} s)")
    print(f"  GDAL read, 2 float32 rasters, deflate + predictor 3    {t_read:6.2f} s")
    print(f"  compute floor (sum, 1 thread per kernel)               {compute_floor:6.2f} s", flush=True)

    # the default command, all outputs (default workers: every core from 16 Mpixel up)
    cmd = timed(COMPOSE + ["render", str(styles["aligned"]), "--out", str(out), "--overwrite"],
                cwd=folder)
    print(f"compose render, all default outputs     {cmd['seconds']:6.2f} s wall, "
          f"{cmd['cpu'] / cmd['seconds']:.2f} cores, peak {gb(cmd['peak'])} (all processes; largest "
          f"one {gb(cmd['peak_one'])}; target <= 0.50 GB)", flush=True)

    # the bare render: PNG + GeoTIFF + check, 1 and 2 workers (threads, what --workers does)
    wall = lambda r: r["wall"]             # noqa: E731
    total, bare1 = median_task(runs, wall, "bare", styles["aligned"], out, workers=1)
    tif = out / "bench.tif"
    t_tif6 = floors.geotiff_write(tif, folder / "floor.tif")
    t_tif1 = floors.geotiff_write(tif, folder / "floor.tif", zlevel=1)
    t_png, png_ratio = floors.png_fast(tif)
    t_png_ng, png_ratio_ng = floors.png_fast(tif, impl="zlib-ng")
    # the same floor at compose's own deflate and level (ISA-L level 2 since f84577e): its
    # stream is larger than level 3's, so the sum takes the fastest of the three (stricter)
    own_impl = PNG_DEFLATE if PNG_DEFLATE in ("isal", "zlib-ng") else "isal"
    t_png_own, png_ratio_own = floors.png_fast(tif, level=PNG_LEVEL, impl=own_impl)
    encode_floor = t_tif6 + min(t_png, t_png_ng, t_png_own)
    total2, bare2 = median_task(runs, wall, "bare", styles["aligned"], out, workers=2)
    total_auto, bare_auto = median_task(runs, wall, "bare", styles["aligned"], out, auto=True)
    comp = lambda r: r["compute"]          # noqa: E731
    # compute with and without the statistics in alternating pairs (at least 5 even with
    # --quick): the statistics' cost is the median of the pairs' differences, which a shared
    # machine's drift between two single runs would swamp; 3 pairs did not resolve 0.1 s here.
    # The same pairs' CPU time (every thread of the 1-worker walk's process) is printed beside:
    # time spent waiting for the host does not count in it
    # Each pair is one turn with the compute floor's kernels measured again beside it (floor
    # first on even turns, last on odd ones): this machine's speed swings about 2 x over
    # minutes, so a floor measured once at the start and a compute measured later are not
    # comparable; the ratio to the floor is the median of the turns' own ratios.
    pairs: list[tuple[float, float]] = []
    cpu_pairs: list[tuple[float, float]] = []
    turn_floors: list[float] = []
    for i in range(max(runs, n_pairs)):
        order = ("plain", "measure") if i % 2 == 0 else ("measure", "plain")
        if i % 2 == 0:
            turn_floors.append(compute_floor_turn(folder, size))
        got = {mode: task(mode, styles["aligned"], out) for mode in order}
        if i % 2 == 1:
            turn_floors.append(compute_floor_turn(folder, size))
        pairs.append((got["plain"]["compute"], got["measure"]["compute"]))
        cpu_pairs.append((got["plain"]["compute_cpu"], got["measure"]["compute_cpu"]))
    plain = statistics.median(p for p, _ in pairs)
    measured = statistics.median(m for _, m in pairs)
    turn_floor = statistics.median(turn_floors)
    ratios_m = [m / f for (_, m), f in zip(pairs, turn_floors)]
    ratios_p = [p / f for (p, _), f in zip(pairs, turn_floors)]
    with_previews, _ = median_task(runs, comp, "previews", styles["aligned"], out)
    # the statistics' own calls timed inside the walk: steadier than the pairs' differences on a
    # shared machine (no second walk to drift against), without what they cost elsewhere (the
    # palette's entry counts inside the composite kernel, caches)
    insides = [task("measure", styles["aligned"], out, inside=True)["inside"] for _ in range(3)]
    inside = {k: statistics.median(i.get(k, 0.0) for i in insides)
              for k in ("measure", "overlay", "gray", "gathered")}
    paired = paired_walks(styles["aligned"], out, runs=3)
    floors_sum = compute_floor + encode_floor
    own1, own2 = bare1.get("seconds", {}), bare2.get("seconds", {})
    print("floors on the rendered pixels")
    print(f"  GeoTIFF RGB write, deflate, tiled 512, ALL_CPUS (zlevel 1)  {t_tif6:6.2f} s  ({t_tif1:.2f} s)")
    print(f"  PNG: Up filter + isal level 3, 2 threads                    {t_png:6.2f} s  "
          f"(size {100 * (png_ratio - 1):+.1f} % vs zlib 6)")
    print(f"  PNG: Up filter + zlib-ng level 3, 2 threads                 {t_png_ng:6.2f} s  "
          f"(size {100 * (png_ratio_ng - 1):+.1f} % vs zlib 6; compose uses {PNG_DEFLATE} level {PNG_LEVEL})")
    print(f"  PNG: Up filter + {own_impl} level {PNG_LEVEL} (compose's own), 2 threads         "
          f"{t_png_own:6.2f} s  (size {100 * (png_ratio_own - 1):+.1f} % vs zlib 6)")
    print(f"  floors summed, compute + encode                             {floors_sum:6.2f} s  "
          f"(on 2 cores at best {floors_sum / 2:.2f} s)")
    print(f"targets beside floors (median of {runs}; one run, same machine state; every task with "
          f"the command's malloc settings, compose.heap.limit_arenas)")
    print(f"  bare render (PNG + GeoTIFF + check), automatic workers (compose render's default: "
          f"{bare_auto.get('mapper')})  "
          f"{total_auto:6.2f} s wall, peak {gb(bare_auto['peak'])}  = {total_auto / floors_sum:.2f} x "
          f"floors summed, {total / total_auto:.2f} x faster than 1 worker (target: <= 6 s at 8192)")
    print(f"  bare render, 1 worker (--workers 1: this thread draws the lines too)  {total:6.2f} s "
          f"wall, peak {gb(bare1['peak'])}  = {total / floors_sum:.2f} x floors summed")
    print(f"  bare render, 2 workers (threads + the drawing helper)  {total2:6.2f} s wall  "
          f"= {total2 / floors_sum:.2f} x floors summed, {total / total2:.2f} x faster than 1 worker")
    cpu_m = statistics.median(m for _, m in cpu_pairs)
    cpu_p = statistics.median(p for p, _ in cpu_pairs)
    print(f"  compute alone, measuring, 1 thread              {measured:6.2f} s  "
          f"= {statistics.median(ratios_m):.2f} x compute floor (target <= 1.5 x; median of "
          f"{len(ratios_m)} turns' ratios, each compute over the floor measured in the same turn; "
          f"spread {min(ratios_m):.2f}-{max(ratios_m):.2f} x: "
          + ", ".join(f"{r:.2f}" for r in ratios_m) + ")")
    print(f"  compute alone, not measuring                    {plain:6.2f} s  "
          f"= {statistics.median(ratios_p):.2f} x compute floor (spread {min(ratios_p):.2f}-"
          f"{max(ratios_p):.2f} x: " + ", ".join(f"{r:.2f}" for r in ratios_p) + ")")
    print(f"  compute floor in the same turns                 {turn_floor:6.2f} s  (median of "
          f"{len(turn_floors)}; " + ", ".join(f"{f:.2f}" for f in turn_floors)
          + f"; {compute_floor:.2f} s at the start; compute medians over the turns' floor median: "
          f"measuring {measured / turn_floor:.2f} x, not measuring {plain / turn_floor:.2f} x)")
    print(f"  compute alone, CPU time of every thread          measuring {cpu_m:.2f} CPU-s, not "
          f"measuring {cpu_p:.2f} CPU-s (medians of the same turns: 1 window thread, and the "
          f"threads the walk starts beside it, e.g. its raster reads)")
    statistics_lines(total, pairs, cpu_pairs, inside, size, paired)
    print(f"  compute with statistics and the HTML page's layer previews {with_previews:6.2f} s: "
          f"previews' sums {with_previews - measured:.2f} s = "
          f"{100 * (with_previews - measured) / total:.1f} % of the 1-worker render (an output of "
          f"the default command, not statistics)")
    print(f"  encode beside compute (render's own timers)     {100 * overlap(own1):6.0f} % of "
          f"{own1.get('encode-work', 0):.2f} s encoder work overlapped, 1 worker; "
          f"{100 * overlap(own2):.0f} % with 2 (encode floor {encode_floor:.2f} s)")
    for name, own in (("automatic", bare_auto.get("seconds", {})), ("1 worker", own1),
                      ("2 workers", own2)):
        print(f"  render's own timers, {name}: " + ", ".join(
            f"{k} {v:.2f}" for k, v in sorted(own.items())), flush=True)

    # lines: independent of the number of windows
    lines_big = task("plain", styles["lines"], out, window=512)["compute"]
    lines_small = task("plain", styles["lines"], out, window=256)["compute"]
    print(f"lines only, compute: 512 px windows {lines_big:.2f} s, 256 px windows {lines_small:.2f} s "
          f"({lines_small / lines_big:.2f} x for 4 x the windows); Agg floor {t_lines:.2f} s")

    # reprojection: the same canvas size on a neighbouring UTM zone's grid
    utm = task("plain", styles["utm31"], out)["compute"]
    print(f"reprojected canvas (EPSG:32631 onto 32630 data), compute {utm:6.2f} s vs aligned "
          f"{plain:.2f} s ({utm / plain:.2f} x; target <= 2 x)")

    # workers: the same walk on 2 threads, 2 worker processes and a 2-worker LocalCluster
    w2 = task("measure", styles["aligned"], out, workers=2)
    p2 = task("measure", styles["aligned"], out, processes=2)
    cl = task("measure", styles["aligned"], out, cluster=True)
    print(f"workers, compute with measuring: 1 thread {measured:.2f} s, 2 threads "
          f"{w2['compute']:.2f} s ({measured / w2['compute']:.2f} x), 2 worker processes "
          f"{p2['compute']:.2f} s ({measured / p2['compute']:.2f} x), 2-worker LocalCluster "
          f"{cl['compute']:.2f} s ({measured / cl['compute']:.2f} x)", flush=True)
    shutil.rmtree(out, ignore_errors=True)


def bench_demo(runs: int = 5) -> None:
    """The demo style as commands, medians of ``runs``: the render with all outputs, and the
    check cold (``--no-cache``: every source read, every layer drawn) and warm (the check's cache
    of prepared inputs filled by one unmeasured check first, in a cache folder of its own)."""
    out = Path(tempfile.mkdtemp(prefix="compose-demo-"))
    style = ROOT / "styles" / "coast.toml"
    cache = Path(tempfile.mkdtemp(prefix="compose-demo-cache-"))
    env = {**os.environ, "COMPOSE_CACHE": str(cache)}
    try:
        renders = [timed(COMPOSE + ["render", str(style), "--out", str(out), "--overwrite"])
                   for _ in range(runs)]
        cold = [timed(COMPOSE + ["check", str(style), "--no-cache"]) for _ in range(runs)]
        child(COMPOSE + ["check", str(style)], env=env)          # fills the cache
        warm = [child(COMPOSE + ["check", str(style)], env=env)["seconds"] for _ in range(runs)]
    finally:
        shutil.rmtree(out, ignore_errors=True)
        shutil.rmtree(cache, ignore_errors=True)
    r = {"seconds": statistics.median(x["seconds"] for x in renders),
         "peak": max(x["peak"] for x in renders)}
    c = {"seconds": statistics.median(x["seconds"] for x in cold)}
    helps = [child(COMPOSE + ["--help"])["seconds"] for _ in range(5)]
    python = [child([sys.executable, "-c", "pass"])["seconds"] for _ in range(5)]
    print("\n== demo style (styles/coast.toml, 1500 x 1500) ==")
    print(f"compose render, all outputs   {r['seconds']:6.2f} s median of {runs}, peak {gb(r['peak'])}  "
          f"(target <= 2 s)")
    print(f"compose check, cold           {c['seconds']:6.2f} s median of {runs}, --no-cache  (target <= 1 s)")
    print(f"compose check, warm           {statistics.median(warm):6.2f} s median of {runs}, its cache filled "
          f"by a check before")
    print(f"compose --help                {statistics.median(helps):6.2f} s median of 5 "
          f"(bare python start {statistics.median(python):.2f} s; target < 0.3 s)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="2048,8192", help="comma-separated canvas sides")
    ap.add_argument("--big", action="store_true", help="also 16384 x 16384")
    ap.add_argument("--lines", type=int, default=10000)
    ap.add_argument("--quick", action="store_true", help="one run per figure instead of the median of 3")
    ap.add_argument("--no-demo", action="store_true")
    ap.add_argument("--statistics", action="store_true",
                    help="only the statistics' share (bare 1-worker render, pairs, walks timed inside)")
    ap.add_argument("--pairs", type=int, default=5,
                    help="alternating pairs of walks with and without the statistics (at least 5; "
                         "more narrow their median on a machine whose speed drifts)")
    ap.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "compose-bench")
    args = ap.parse_args()
    args.pairs = max(args.pairs, 5)
    from compose.kernels import state

    loops = state(refuse_stale=True)
    sizes = [int(s) for s in args.sizes.split(",") if s]
    if args.big and 16384 not in sizes:
        sizes.append(16384)
    print(f"compose bench, {os.cpu_count()} cores, python {sys.version.split()[0]}, loops: {loops}")
    for size in sizes:
        folder = args.data / f"{size}-{args.lines}"
        if not (folder / "lines.gpkg").exists():
            print(f"making synthetic data in {folder} ...", flush=True)
            make_data(folder, size, args.lines)
        if args.statistics:
            bench_statistics(folder, size, args.quick, args.pairs)
        else:
            bench_size(folder, size, args.lines, args.quick, args.pairs)
    if not args.no_demo and not args.statistics:
        bench_demo()


if __name__ == "__main__":
    main()
