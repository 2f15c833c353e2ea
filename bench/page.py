"""Time the demo as a command beside its parts: the whole ``compose render STYLE`` with all its
default outputs, as a fresh process, and the stages of the same render run in this process.

    python bench/page.py [STYLE] [--runs N] [--no-command] [--timeline] [--bytecode]

Prints the median over N runs of: the command's wall-clock time (a new process each run, as a user
starts it: interpreter start, imports, the render, every default output); the load average of the
machine before the runs; then, from N renders in this process with every default output, each
stage's seconds (prepare, compute, encoding, each page writer, check, legend, HTML page, total)
with each page writer's share of the walk's compute time. Never asserted in tests.

``--bytecode``: the command also as an installed package runs it, with its modules' compiled
bytecode (a machine with PYTHONDONTWRITEBYTECODE set compiles every module of compose on every
run; this runs with it unset and the bytecode in a temporary folder, PYTHONPYCACHEPREFIX,
written by one unmeasured run first; the source tree gets none, so later plain runs stay
plain).

``--timeline``: one more command run recording its stages (:mod:`compose.timeline`), printed
per process and thread on one clock from the command's launch: what ran where and what waited.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from compose.render import render_style
from compose.style import load_style


def command_seconds(style: str, runs: int, bytecode: bool = False) -> list[float]:
    """Wall-clock seconds of ``compose render STYLE`` in a fresh process, ``runs`` times
    (``bytecode``: with compiled bytecode, as an installed package; see the module's text)."""
    exe = Path(sys.executable).with_name("compose")
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "compose"]
    env = dict(os.environ)
    cache = tempfile.TemporaryDirectory() if bytecode else None
    if cache is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = cache.name
    out = []
    for i in range(runs + bytecode):
        with tempfile.TemporaryDirectory() as tmp:
            t = time.perf_counter()
            done = subprocess.run(cmd + ["render", style, "--out", tmp], capture_output=True,
                                  text=True, env=env)
            if bytecode and i == 0:
                continue                # the run that wrote the bytecode
            out.append(time.perf_counter() - t)
            if done.returncode not in (0, 1):
                raise SystemExit(f"compose render failed ({done.returncode}): {done.stderr}")
    if cache is not None:
        cache.cleanup()
    return out


def timeline(style: str) -> None:
    """Run the command once recording its stages and print them, by start, from its launch."""
    from compose.timeline import read

    exe = Path(sys.executable).with_name("compose")
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "compose"]
    with tempfile.TemporaryDirectory() as tmp:
        log = Path(tmp) / "timeline.txt"
        env = dict(os.environ, COMPOSE_TIMELINE=str(log))
        t0 = time.time()
        subprocess.run(cmd + ["render", style, "--out", str(Path(tmp) / "out")],
                       capture_output=True, text=True, env=env)
        end = time.time() - t0
        rows = read(str(log))
    first = {}
    for pid, *_ in rows:
        first.setdefault(pid, len(first))
    print(f"  timeline (s from launch; process 0 is the command, the others forked from it), "
          f"exit at {end:.2f} s:")
    for pid, thread, start, stop, label in rows:
        who = f"p{first[pid]}" + ("" if thread == "MainThread" else f" {thread}")
        print(f"  {start - t0:6.2f} {stop - t0:6.2f} {stop - start:6.2f}  {who:<10} {label}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("style", nargs="?", default=str(Path(__file__).parents[1] / "styles/coast.toml"))
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--no-command", action="store_true", help="only the in-process stages")
    ap.add_argument("--bytecode", action="store_true",
                    help="also time the command with compiled bytecode, as an installed package")
    ap.add_argument("--timeline", action="store_true",
                    help="only one command run, its stages on one clock")
    args = ap.parse_args()
    if args.timeline:
        timeline(args.style)
        return
    load = os.getloadavg()[0]
    whole = None if args.no_command else command_seconds(args.style, args.runs)
    compiled = (command_seconds(args.style, args.runs, bytecode=True)
                if args.bytecode and not args.no_command else None)
    style = load_style(args.style)
    runs: dict[str, list[float]] = {}
    for _ in range(args.runs):
        with tempfile.TemporaryDirectory() as tmp:
            result = render_style(style, Path(tmp))
        for k, v in result.seconds.items():
            runs.setdefault(k, []).append(v)
    med = {k: statistics.median(v) for k, v in runs.items()}
    print(f"{style.name}: {result.width} x {result.height} px, median of {args.runs} run(s), "
          f"load average {load:.2f} before the runs")
    if whole is not None:
        print(f"  {'command':<16} {statistics.median(whole):7.2f} s  (compose render, fresh "
              f"process, every default output; runs: {', '.join(f'{w:.2f}' for w in whole)})")
    if compiled is not None:
        print(f"  {'with bytecode':<16} {statistics.median(compiled):7.2f} s  (the same command "
              f"as an installed package runs it; runs: {', '.join(f'{w:.2f}' for w in compiled)})")
    print("  in this process:")
    for k in sorted(med):
        share = f"  ({med[k] / med['compute']:.2f} x compute)" if k.startswith("page") else ""
        print(f"  {k:<16} {med[k]:7.2f} s{share}")


if __name__ == "__main__":
    main()
