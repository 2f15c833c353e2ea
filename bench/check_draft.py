"""Time the full check against the draft check (``compose check --draft``): in one process and
as commands (a fresh process each, what a user or CI runs), on the example styles and on a big
canvas (the synthetic benchmark style of bench/render.py, 8192 x 8192 by default).

    .venv/bin/python bench/check_draft.py [--runs 3] [--styles coast,poor] [--big 8192]
                                          [--no-commands] [--no-inprocess]

Heavy (the 8192 full check takes 10-30 s): run it as ``flock /work/wt/bench.lock python ...``
on a shared machine. Prints medians of ``--runs`` alternating runs and their same-run ratios
full / draft, whether the verdicts agree rule by rule, the command's start-up floor (a missing
style file: imports and Python start-up only) and the import time of the libraries a check of
the demo needs, which no draft can shrink.
"""
from __future__ import annotations

import argparse
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
EXAMPLES = ("coast", "sea-warmth", "change", "cover", "poor")
COMPOSE = [sys.executable, "-c", "import sys; from compose.cli.main import main; sys.exit(main())"]
# what a check of the demo imports besides compose itself (labels need matplotlib's text paths)
LIBRARIES = ("numpy", "rasterio", "pyogrio", "shapely", "pyproj", "colorspacious",
             "matplotlib.backends.backend_agg", "matplotlib.textpath")


def run_command(argv: list[str], cwd: Path = ROOT) -> tuple[float, float, int]:
    """(wall seconds, CPU seconds (user + system), exit code) of one fresh process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    done = subprocess.run(argv, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, done.returncode


def medians(pairs: list[tuple[float, float, int]]) -> tuple[float, float, int]:
    return (statistics.median(p[0] for p in pairs), statistics.median(p[1] for p in pairs),
            pairs[-1][2])


def commands(styles: list[Path], runs: int) -> None:
    print(f"\n== as commands (fresh process each; medians of {runs}, alternating) ==")
    floor = medians([run_command(COMPOSE + ["check", "no-such-style.toml"]) for _ in range(runs)])
    libs = medians([run_command([sys.executable, "-c", "import " + ", ".join(LIBRARIES)])
                    for _ in range(runs)])
    bare = medians([run_command([sys.executable, "-c", "pass"]) for _ in range(runs)])
    print(f"python start-up            {bare[0]:6.2f} s")
    print(f"compose check, no style    {floor[0]:6.2f} s  (exit {floor[2]}: start-up and imports "
          "before the style is read)")
    print(f"import the libraries only  {libs[0]:6.2f} s  ({', '.join(LIBRARIES)})")
    for style in styles:
        full, draft = [], []
        for _ in range(runs):
            full.append(run_command(COMPOSE + ["check", str(style)]))
            draft.append(run_command(COMPOSE + ["check", "--draft", str(style)]))
        f, d = medians(full), medians(draft)
        print(f"{style.stem:<11} full {f[0]:6.2f} s (cpu {f[1]:5.2f})   draft {d[0]:6.2f} s "
              f"(cpu {d[1]:5.2f})   x{f[0] / d[0]:5.1f}   exit {f[2]}/{d[2]}   (bound "
              f"x{f[0] / libs[0]:.1f})" + ("  target full <= 1 s" if style.stem == "coast" else ""))
    print("(bound: the full command over the library imports alone -- the ratio a draft whose "
          "own work took no time would reach)")


def timed_check(style, canvas, draft: bool):
    from compose.check import check_style
    from compose.engine import prepare, run
    from compose.page.write import blocked_for

    t = time.perf_counter()
    prepared = prepare(style, canvas=canvas, keep_clear=blocked_for, draft=draft)
    try:
        report = check_style(style, run(prepared, []), prepared.ramps)
    finally:
        prepared.close()
    return time.perf_counter() - t, report


def agree(full, draft) -> bool:
    """Rule by rule: the same rules on the same layers with the same verdicts."""
    def verdicts(report):
        return sorted((r.rule, r.layer or "", r.passed) for r in report.rules)
    return full.passed == draft.passed and verdicts(full) == verdicts(draft)


def in_process(styles: list[Path], runs: int) -> None:
    from compose.check.draft import draft_canvas
    from compose.style import load_style

    print(f"\n== in one process (imports excluded; medians of {runs}, alternating) ==")
    ratios = []
    for path in styles:
        style = load_style(path)
        full = style.canvas()
        draft = draft_canvas(full)
        timed_check(style, draft, True)                  # first opens and imports out of it
        tf, td = [], []
        for _ in range(runs):
            t, rf = timed_check(style, full, False)
            tf.append(t)
            t, rd = timed_check(style, draft, draft is not full)
            td.append(t)
        mf, md = statistics.median(tf), statistics.median(td)
        ratios.append(mf / md)
        print(f"{path.stem:<11} full {full.width}x{full.height} {mf:6.3f} s   draft {draft.width}x"
              f"{draft.height} {md:6.3f} s   x{mf / md:5.1f}   verdict "
              f"{'agrees rule by rule' if agree(rf, rd) else 'DIFFERS'} "
              f"({'pass' if rf.passed else 'fail'}, {len(rf.rules)} results)")
    if len(ratios) > 1:
        print(f"median ratio x{statistics.median(ratios):.1f}")


def big_style(size: int) -> Path:
    """The synthetic benchmark style of bench/render.py at ``size`` (made once, then reused)."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import render as synthetic  # noqa: E402  (bench/render.py)

    folder = Path(tempfile.gettempdir()) / "compose-bench" / f"{size}-10000"
    if not (folder / "lines.gpkg").exists():
        print(f"making synthetic data in {folder} ...", flush=True)
        synthetic.make_data(folder, size, 10000)
    return synthetic.write_styles(folder, size)["aligned"]


def big(size: int, runs: int, as_commands: bool, inprocess: bool) -> None:
    style = big_style(size)
    print(f"\n== big canvas: {style} ({size} x {size}, relief + field + 10,000 lines) ==")
    if as_commands:
        full, draft = [], []
        for _ in range(runs):
            full.append(run_command(COMPOSE + ["check", str(style)], cwd=style.parent))
            draft.append(run_command(COMPOSE + ["check", "--draft", str(style)], cwd=style.parent))
        f, d = medians(full), medians(draft)
        print(f"commands    full {f[0]:6.2f} s (cpu {f[1]:5.2f})   draft {d[0]:6.2f} s "
              f"(cpu {d[1]:5.2f})   x{f[0] / d[0]:5.1f}   exit {f[2]}/{d[2]}  (target x10)")
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
    styles = [STYLES / f"{name}.toml" for name in a.styles.split(",") if name]
    load = os.getloadavg()[0]
    print(f"compose check vs check --draft, {os.cpu_count()} cores, load average {load:.1f} at start")
    if not a.no_inprocess:
        in_process(styles, a.runs)
    if not a.no_commands:
        commands(styles, a.runs)
    if a.big:
        big(a.big, a.runs, not a.no_commands, not a.no_inprocess)
    print(f"load average {os.getloadavg()[0]:.1f} at the end")


if __name__ == "__main__":
    main()
