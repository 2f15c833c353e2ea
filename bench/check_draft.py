"""Time the full check against the draft check (``compose check --draft``): in one process and
as commands (a fresh process each, what a user or CI runs), on the example styles and on a big
canvas (the synthetic benchmark style of bench/render.py, 8192 x 8192 by default); each cold
(``--no-cache``: every source read, every layer drawn) and warm (the cache of prepared inputs
filled by an earlier run of the same style, as after a change of colours only; see
compose.check_cache); as commands also the cold full check in one process (``--workers 1``:
no helper processes walking windows beside it, see compose.api).

    .venv/bin/python bench/check_draft.py [--runs 3] [--styles coast,poor] [--big 8192]
                                          [--no-commands] [--no-inprocess]

Heavy (the 8192 full check takes 10-30 s): run it as ``flock /work/wt/bench.lock python ...``
on a shared machine. Prints medians of ``--runs`` alternating runs and their same-run ratios
full / draft, whether the verdicts agree rule by rule, the command's start-up floor (a missing
style file: imports and Python start-up only) and the import time of the libraries a check of
the demo needs, which no draft can shrink; with the big canvas also where the cold draft
command's time goes (:func:`phases`: start-up, the process drawing its lines, what is left).
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
STYLES = ROOT / "styles"
EXAMPLES = ("coast", "sea-warmth", "change", "cover", "base", "poor")
COMPOSE = [sys.executable, "-c", "import sys; from compose.cli.main import main; sys.exit(main())"]
# what a cold check of the demo imports besides compose itself: its GeoPackage is read with
# sqlite3 (no pyogrio), Agg draws through matplotlib's C++ renderer, whose extension module
# compose.layers.agg loads on its own (a style without labels or circle markers imports no more
# of matplotlib), labels need matplotlib's font machinery and text paths (compose.layers.draw),
# and its CRSs are plain enough for rasterio's CRS (no pyproj, compose.sources.crs)
LIBRARIES = ("numpy", "rasterio", "shapely", "colorspacious", "sqlite3",
             "matplotlib.path", "matplotlib.backends._backend_agg", "matplotlib.font_manager",
             "matplotlib.textpath")


def run_command(argv: list[str], cwd: Path = ROOT) -> tuple[float, float, int, int]:
    """(wall seconds, CPU seconds (user + system), exit code, page faults) of one fresh
    process, the processes it waited for included (a draft's marks process: its page faults,
    each a fresh page zeroed, were about a quarter of the draft's CPU here)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    done = subprocess.run(argv, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, done.returncode, after.ru_minflt - before.ru_minflt


def medians(pairs: list[tuple[float, float, int, int]]) -> tuple[float, float, int, float]:
    """Medians of wall and CPU seconds, the last exit code, the median page faults."""
    return (statistics.median(p[0] for p in pairs), statistics.median(p[1] for p in pairs),
            pairs[-1][2], statistics.median(p[3] for p in pairs))


def commands(styles: list[Path], runs: int) -> None:
    print(f"\n== as commands (fresh process each; medians of {runs}, alternating; cold: --no-cache,"
          " warm: a cache filled by a run before) ==")
    floor = medians([run_command(COMPOSE + ["check", "no-such-style.toml"]) for _ in range(runs)])
    libs = medians([run_command([sys.executable, "-c", "import " + ", ".join(LIBRARIES)])
                    for _ in range(runs)])
    bare = medians([run_command([sys.executable, "-c", "pass"]) for _ in range(runs)])
    numpy = medians([run_command([sys.executable, "-c", "import numpy"]) for _ in range(runs)])
    print(f"python start-up            {bare[0]:6.2f} s")
    print(f"python + import numpy      {numpy[0]:6.2f} s  (cpu {numpy[1]:.2f} s)")
    print(f"compose check, no style    {floor[0]:6.2f} s  (cpu {floor[1]:.2f} s; exit {floor[2]}: "
          "start-up and imports before the style is read)")
    print(f"import the libraries only  {libs[0]:6.2f} s  ({', '.join(LIBRARIES)})")
    cache = tempfile.mkdtemp(prefix="compose-bench-cache-")
    for style in styles:
        command_rows(style.stem, style, runs, cache, ROOT)
        if style.stem == "coast":
            print("            (targets: coast full check <= 1 s; draft 10 x faster than full)")
    print("(a cold check imports the libraries above; a warm one opens no source and draws "
          "nothing, so its floor is the start-up with numpy)")


def command_rows(name: str, style: Path, runs: int, cache: str, cwd: Path) -> None:
    """Full and draft as commands, cold (--no-cache) and warm (a cache filled before)."""
    got: dict[str, list] = {k: [] for k in ("full cold", "draft cold", "full warm", "draft warm",
                                            "full cold 1")}
    for flags in ([], ["--draft"]):      # fill the cache
        run_command(COMPOSE + ["check", "--cache-dir", cache, *flags, str(style)], cwd=cwd)
    for _ in range(runs):
        for key in got:
            flags = (["--draft"] if key.startswith("draft") else []) + (
                ["--cache-dir", cache] if key.endswith("warm") else ["--no-cache"]) + (
                ["--workers", "1"] if key.endswith(" 1") else [])
            got[key].append(run_command(COMPOSE + ["check", *flags, str(style)], cwd=cwd))
    m = {k: medians(v) for k, v in got.items()}
    fc, dc, fw, dw, f1 = (m[k][0] for k in got)
    cpu = "  ".join(f"{m[k][1]:.2f}" for k in got)
    faults = "  ".join(f"{m[k][3] / 1000:.1f}k" for k in got)
    print(f"{name:<11} cold: full {fc:6.2f} s  draft {dc:6.2f} s  x{fc / dc:5.1f}   "
          f"warm: full {fw:6.2f} s  draft {dw:6.2f} s  x{fw / dw:5.1f}   "
          f"full cold / draft warm x{fc / dw:5.1f}   exit {m['full cold'][2]}/{m['draft cold'][2]}"
          f"   full cold, one process (--workers 1) {f1:6.2f} s: x{f1 / fc:4.2f} the default, "
          f"x{f1 / dc:5.1f} the draft   (cpu s, same order: {cpu}; page faults: {faults})")


def timed_check(style, canvas, draft: bool, cache=False):
    """(seconds, report) of one check in this process (``cache``: False, or a folder)."""
    from compose.api import check

    t = time.perf_counter()
    report = check(style, draft=draft and canvas is not style.canvas(), cache=cache)
    return time.perf_counter() - t, report


def agree(full, draft) -> bool:
    """Rule by rule: the same rules on the same layers with the same verdicts."""
    def verdicts(report):
        return sorted((r.rule, r.layer or "", r.passed) for r in report.rules)
    return full.passed == draft.passed and verdicts(full) == verdicts(draft)


def in_process(styles: list[Path], runs: int) -> None:
    from compose.check.draft import draft_canvas
    from compose.style import load_style

    print(f"\n== in one process (imports excluded; medians of {runs}, alternating; cold: no cache, "
          "warm: its entries filled by a run before) ==")
    ratios: dict[str, list[float]] = {"cold": [], "warm": []}
    cache = tempfile.mkdtemp(prefix="compose-bench-cache-")
    for path in styles:
        style = load_style(path)
        full = style.canvas()
        draft = draft_canvas(full)
        timed_check(style, draft, True)                  # first opens and imports out of it
        timed_check(style, draft, True, cache)           # fill the cache
        timed_check(style, full, False, cache)
        t: dict[str, list[float]] = {k: [] for k in ("fc", "dc", "fw", "dw")}
        for _ in range(runs):
            dt, rf = timed_check(style, full, False)
            t["fc"].append(dt)
            dt, rd = timed_check(style, draft, True)
            t["dc"].append(dt)
            dt, rfw = timed_check(style, full, False, cache)
            t["fw"].append(dt)
            dt, rdw = timed_check(style, draft, True, cache)
            t["dw"].append(dt)
        fc, dc, fw, dw = (statistics.median(v) for v in t.values())
        ratios["cold"].append(fc / dc)
        ratios["warm"].append(fc / dw)
        same = (json.dumps(rf.to_json(False)) == json.dumps(rfw.to_json(False))
                and json.dumps(rd.to_json(False)) == json.dumps(rdw.to_json(False)))
        print(f"{path.stem:<11} {full.width}x{full.height} / {draft.width}x{draft.height}   "
              f"cold: full {fc:6.3f} s  draft {dc:6.3f} s  x{fc / dc:5.1f}   warm: full {fw:6.3f} s"
              f"  draft {dw:6.3f} s   full cold / draft warm x{fc / dw:5.1f}   verdict "
              f"{'agrees rule by rule' if agree(rf, rd) else 'DIFFERS'} "
              f"({'pass' if rf.passed else 'fail'}, {len(rf.rules)} results); warm reports "
              f"{'identical' if same else 'DIFFER'}")
    if len(styles) > 1:
        print(f"median ratio full cold / draft cold x{statistics.median(ratios['cold']):.1f}, "
              f"full cold / draft warm x{statistics.median(ratios['warm']):.1f}")


def big_style(size: int) -> Path:
    """The synthetic benchmark style of bench/render.py at ``size`` (made once, then reused)."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import render as synthetic  # noqa: E402  (bench/render.py)

    folder = Path(tempfile.gettempdir()) / "compose-bench" / f"{size}-10000"
    if not (folder / "lines.gpkg").exists():
        print(f"making synthetic data in {folder} ...", flush=True)
        synthetic.make_data(folder, size, 10000)
    return synthetic.write_styles(folder, size)["aligned"]


#: What the command imports before the draft's marks process is forked (the command, the style,
#: rasterio for the vector sources' CRS questions: compose.layers.early_marks.start_early).
BEFORE_FORK = ("compose.cli.main", "compose.cli.check", "compose.style", "rasterio.crs")


def phases(style: Path, runs: int) -> None:
    """Where the cold draft command's wall time goes (``COMPOSE_TIMELINE``, compose.timeline):
    medians of ``runs`` commands. The start-up until the marks process is forked, that process
    (its imports; read, parse, simplify, cut: its layers built; their parts in pixel space
    handed over; its tiles drawn, while the check's process draws the first), the check's own
    process preparing and reading its rasters beside it, and what is left after it: the walk
    (compositing and statistics), the rules, the end."""
    from compose.timeline import read

    got: dict[str, list[float]] = {}

    def add(key: str, value: float) -> None:
        got.setdefault(key, []).append(value)

    for _ in range(runs):
        fd, path = tempfile.mkstemp(prefix="compose-bench-timeline-")
        os.close(fd)
        t0 = time.time()
        subprocess.run(COMPOSE + ["check", "--draft", "--no-cache", str(style)], cwd=style.parent,
                       env=dict(os.environ, COMPOSE_TIMELINE=path), stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL)
        t1 = time.time()
        rows = read(path)
        os.unlink(path)
        parent = rows[0][0]
        mine = [r for r in rows if r[0] == parent]
        marks = [r for r in rows if r[0] != parent and r[4].startswith("marks ahead")]
        add("total", t1 - t0)
        forked = [r for r in mine if r[4] == "marks ahead forked"]
        if forked:
            add("start-up until the marks process is forked", forked[0][2] - t0)
        if marks:
            def took(label: str, marks=marks) -> float:
                return sum(r[3] - r[2] for r in marks if r[4] == label)

            add("  marks process: its imports", took("marks ahead imports"))
            built = [r for r in marks if r[4] not in ("marks ahead imports", "marks ahead paint",
                                                      "marks ahead hand over")]
            if built:
                add("  marks process: layers built (read, parse, simplify, cut)",
                    built[-1][3] - built[0][2])
            add("  marks process: parts in pixels made and handed over",
                took("marks ahead hand over"))
            add("  marks process: its tiles drawn", took("marks ahead paint"))
            add("  marks process ends", max(r[3] for r in marks) - t0)
        here = [r for r in mine if r[4] == "marks ahead: first tile drawn here"]
        if here:
            add("  check's process: first tile drawn", here[0][3] - here[0][2])
            add("  check's process: first tile drawn until", here[0][3] - t0)
        reads = [r for r in mine if r[4] == "draft early read"]
        if reads:
            add("  check's process: raster early reads over", max(r[3] for r in reads) - t0)
        prep = [r for r in mine if r[4].startswith("prepare ")]
        if prep:
            add("  check's process prepares its layers until", prep[-1][3] - t0)
        rest = [r for r in mine if r[4] == "marks ahead: the rest received"]
        if rest:
            add("the marks' paints all here", rest[0][3] - t0)
        for label in ("check walk", "check rules"):
            for r in mine:
                if r[4] == label:
                    if label == "check walk":
                        add("check walk starts (rasters first, then the marks)", r[2] - t0)
                        add("check walk ends", r[3] - t0)
                    add(label, r[3] - r[2])
        add("end of the rules -> process ended", t1 - max(r[3] for r in mine))
    imports = medians([run_command([sys.executable, "-c", "import " + ", ".join(BEFORE_FORK)])
                       for _ in range(runs)])
    print(f"draft command's phases (medians of {runs}; seconds from the start):")
    for key, values in got.items():
        print(f"  {key:<62} {statistics.median(values):6.3f} s")
    print(f"  (importing {', '.join(BEFORE_FORK)} alone: {imports[0]:.3f} s, python start-up "
          "included)")


def big(size: int, runs: int, as_commands: bool, inprocess: bool) -> None:
    style = big_style(size)
    print(f"\n== big canvas: {style} ({size} x {size}, relief + field + 10,000 lines) ==")
    if as_commands:
        command_rows("commands", style, runs, tempfile.mkdtemp(prefix="compose-bench-cache-"),
                     style.parent)
        phases(style, max(runs, 5))
        from compose.check_cache import MAX_PIXELS

        if size * size > MAX_PIXELS:
            print(f"            (the cache is off above {MAX_PIXELS} pixels: the full check's "
                  "'warm' runs read and draw everything, as cold ones; the draft's canvas is "
                  "cached)")
        print("            (target: draft 10 x faster than full; its rasters repeat one 256 x 256 "
              "tile, so the draft's block sample measures no sampling error here: see "
              "compose.check.draft for the error on maps that change by region)")
    if inprocess:
        os.chdir(style.parent)
        in_process([style], runs)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--styles", default=",".join(EXAMPLES), help="example styles (comma-separated)")
    ap.add_argument("--big", type=int, default=8192, help="side of the big canvas; 0: skip it")
    ap.add_argument("--no-commands", action="store_true")
    ap.add_argument("--no-inprocess", action="store_true")
    a = ap.parse_args()
    from compose.kernels import state

    loops = state(refuse_stale=True)
    styles = [STYLES / f"{name}.toml" for name in a.styles.split(",") if name]
    load = os.getloadavg()[0]
    print(f"compose check vs check --draft, {os.cpu_count()} cores, load average {load:.1f} at start, "
          f"loops: {loops}")
    if not a.no_inprocess:
        in_process(styles, a.runs)
    if not a.no_commands:
        commands(styles, a.runs)
    if a.big:
        big(a.big, a.runs, not a.no_commands, not a.no_inprocess)
    print(f"load average {os.getloadavg()[0]:.1f} at the end")


if __name__ == "__main__":
    main()
