"""Time the demo as a command beside its parts: the whole ``compose render STYLE`` with all its
default outputs, as a fresh process, and the stages of the same render run in this process.

    python bench/page.py [STYLE] [--runs N] [--no-command] [--timeline] [--bytecode]
                         [--against TREE] [--check]

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

``--timeline``: N command runs recording their stages (:mod:`compose.timeline`): the last
printed per process and thread on one clock from the command's launch (what ran where and what
waited), then each stage's median wall-clock and CPU seconds.

``--against TREE``: the command of another ``compose`` package (a folder holding it, e.g. an
earlier commit's ``git archive``, bytecode compiled there) run in turns with this one, N runs
each, and the median ratio of the turns: a same-run comparison on a shared machine. With
``--timeline``: that package's timeline instead of this one's (its compose.timeline must write
the CPU column).

``--check``: the command is ``compose check STYLE --no-cache`` instead (cold: every source read,
every layer drawn; the user's cache folder as it is, e.g. the fonts and CRS strings remembered
there), with the options above (no stages in this process).

Every command time comes with its CPU seconds: the command's and every process it forked and
reaped (user + system), less sensitive than wall-clock time to other work on the machine.
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

from compose.render import render_style
from compose.style import load_style


def _command(bytecode: str | None = None, tree: str | None = None) -> tuple[list[str], dict]:
    """The ``compose`` command line and its environment: ``bytecode``, a PYTHONPYCACHEPREFIX
    folder (bytecode written and read there); ``tree``, a folder holding another ``compose``
    package to run instead of this one (put first on PYTHONPATH)."""
    exe = Path(sys.executable).with_name("compose")
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "compose"]
    env = dict(os.environ)
    if bytecode is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = bytecode
    if tree is not None:
        env["PYTHONPATH"] = os.pathsep.join([tree] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH")
                                                      else []))
    return cmd, env


#: The subcommand timed: ``compose render STYLE`` (every default output) or, with ``--check``,
#: ``compose check STYLE --no-cache``.
CHECK = False


def _args(style: str, tmp: str) -> list[str]:
    return ["check", style, "--no-cache"] if CHECK else ["render", style, "--out", tmp]


def run_command(style: str, cmd: list[str], env: dict) -> tuple[float, float]:
    """One ``compose render STYLE`` into a temporary folder (``compose check STYLE --no-cache``
    with :data:`CHECK`): (wall-clock seconds, CPU seconds of the command and every process it
    forked and reaped, user + system)."""
    with tempfile.TemporaryDirectory() as tmp:
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        done = subprocess.run(cmd + _args(style, tmp), capture_output=True,
                              text=True, env=env)
        wall = time.perf_counter() - t
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode not in (0, 1):
        raise SystemExit(f"compose {_args(style, '')[0]} failed ({done.returncode}): "
                         f"{done.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def command_seconds(style: str, runs: int, bytecode: bool = False,
                    trees: tuple[str | None, ...] = (None,)) -> dict[str | None, list[tuple[float, float]]]:
    """(wall, CPU) seconds of ``compose render STYLE`` in a fresh process, ``runs`` times for
    each of ``trees`` (None: this one), taking turns (``bytecode``: with compiled bytecode, as an
    installed package; see the module's text; one unmeasured run of each tree first)."""
    cache = tempfile.TemporaryDirectory() if bytecode else None
    launch = {tree: _command(cache.name if cache is not None else None, tree) for tree in trees}
    out: dict[str | None, list[tuple[float, float]]] = {tree: [] for tree in trees}
    for i in range(runs + bytecode):
        for tree in trees:
            measured = run_command(style, *launch[tree])
            if not (bytecode and i == 0):       # the run that wrote the bytecode
                out[tree].append(measured)
    if cache is not None:
        cache.cleanup()
    return out


def timeline(style: str, runs: int = 1, bytecode: bool = False, tree: str | None = None) -> None:
    """Run the command ``runs`` times recording its stages; print the last run's stages by
    start, from its launch, then each stage's median wall-clock and CPU seconds over the runs
    (a stage recorded several times in a run summed first; ``process cpu``: a process's own
    CPU, recorded as it ends; ``tree``: the command of that compose package, see
    :func:`_command`)."""
    from compose.timeline import read

    cache = tempfile.TemporaryDirectory() if bytecode else None
    cmd, env = _command(cache.name if cache is not None else None, tree)
    if bytecode:
        run_command(style, cmd, env)           # writes the bytecode
    walls, cpus, tails, per_stage = [], [], [], {}
    for _ in range(runs):
        with tempfile.TemporaryDirectory() as tmp:
            log = Path(tmp) / "timeline.txt"
            env_ = dict(env, COMPOSE_TIMELINE=str(log))
            before = resource.getrusage(resource.RUSAGE_CHILDREN)
            t0 = time.time()
            subprocess.run(cmd + _args(style, str(Path(tmp) / "out")),
                           capture_output=True, text=True, env=env_)
            end = time.time() - t0
            after = resource.getrusage(resource.RUSAGE_CHILDREN)
            rows = read(str(log))
        walls.append(end)
        cpus.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
        walked = [stop for pid, _, _, stop, label, _ in rows if label == "walk"]
        if walked:
            tails.append(end - (walked[0] - t0))
        first: dict[int, int] = {}
        for pid, *_ in rows:
            first.setdefault(pid, len(first))
        this: dict[tuple[str, str], list[float]] = {}
        for pid, thread, start, stop, label, cpu in rows:
            who = f"p{first[pid]}" + ("" if thread == "MainThread" else f" {thread}")
            acc = this.setdefault((who, label), [0.0, 0.0])
            acc[0] += stop - start
            acc[1] += cpu
        for key, (w, c) in this.items():
            per_stage.setdefault(key, []).append((w, c))
    if cache is not None:
        cache.cleanup()
    print(f"  timeline of the last run (s from launch; process 0 is the command, the others "
          f"forked from it), exit at {end:.2f} s, {cpus[-1]:.2f} s CPU:")
    print(f"  {'start':>6} {'end':>6} {'wall':>6} {'cpu':>6}  process")
    for pid, thread, start, stop, label, cpu in rows:
        who = f"p{first[pid]}" + ("" if thread == "MainThread" else f" {thread}")
        if label == "process cpu":
            print(f"  {'':>6} {stop - t0:6.2f} {'':>6} {cpu:6.2f}  {who:<10} {label}")
            continue
        c = f"{cpu:6.2f}" if cpu >= 0 else f"{'':>6}"
        print(f"  {start - t0:6.2f} {stop - t0:6.2f} {stop - start:6.2f} {c}  {who:<10} {label}")
    if runs > 1:
        print(f"  median of {runs} runs: command {statistics.median(walls):.2f} s wall "
              f"({', '.join(f'{w:.2f}' for w in walls)}), {statistics.median(cpus):.2f} s CPU"
              + (f", {statistics.median(tails):.2f} s from the walk's end to the exit" if tails
                 else "") + "; per stage, wall / CPU:")
        for (who, label), vals in sorted(per_stage.items(), key=lambda kv: (kv[0][0], kv[0][1])):
            w = statistics.median(v[0] for v in vals)
            c = statistics.median(v[1] for v in vals)
            print(f"  {w:6.2f} {c:6.2f}  {who:<10} {label}" + (f"  (in {len(vals)} of {runs} runs)"
                                                              if len(vals) < runs else ""))


def _line(label: str, values: list[tuple[float, float]], note: str) -> str:
    wall = statistics.median(v[0] for v in values)
    cpu = statistics.median(v[1] for v in values)
    return (f"  {label:<16} {wall:7.2f} s, {cpu:5.2f} s CPU  ({note}; runs: "
            f"{', '.join(f'{v[0]:.2f}' for v in values)})")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("style", nargs="?", default=str(Path(__file__).parents[1] / "styles/coast.toml"))
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--no-command", action="store_true", help="only the in-process stages")
    ap.add_argument("--bytecode", action="store_true",
                    help="also time the command with compiled bytecode, as an installed package")
    ap.add_argument("--timeline", action="store_true",
                    help="only command runs recording their stages on one clock")
    ap.add_argument("--check", action="store_true",
                    help="time compose check STYLE --no-cache instead of the render")
    ap.add_argument("--against", metavar="TREE",
                    help="a folder holding another compose package (e.g. an earlier commit's, "
                         "from git archive): its command timed in turns with this one's")
    args = ap.parse_args()
    from compose.kernels import state

    print(f"loops: {state(refuse_stale=True)}")
    global CHECK
    CHECK = args.check
    if args.timeline:
        timeline(args.style, args.runs, args.bytecode, args.against)
        return
    load = os.getloadavg()[0]
    trees = (None, args.against) if args.against else (None,)
    whole = None if args.no_command else command_seconds(args.style, args.runs, trees=trees)
    compiled = (command_seconds(args.style, args.runs, bytecode=True, trees=trees)
                if args.bytecode and not args.no_command else None)
    print(f"{Path(args.style).stem}: median of {args.runs} run(s), load average {load:.2f} "
          f"before the runs")
    for label, got in (("command", whole), ("with bytecode", compiled)):
        if got is None:
            continue
        what = ("compose check --no-cache, fresh process" if CHECK
                else "compose render, fresh process, every default output")
        note = what if label == "command" else "the same command as an installed package runs it"
        print(_line(label, got[None], note))
        if args.against:
            print(_line("  against", got[args.against], f"{args.against}, in turns"))
            ratio = statistics.median(a[0] / b[0] for a, b in zip(got[None], got[args.against]))
            print(f"  {'':<16} this / against: {ratio:.3f} (median of the turns' ratios)")
    if args.against or CHECK:
        return
    style = load_style(args.style)
    runs: dict[str, list[float]] = {}
    for _ in range(args.runs):
        with tempfile.TemporaryDirectory() as tmp:
            result = render_style(style, Path(tmp))
        for k, v in result.seconds.items():
            runs.setdefault(k, []).append(v)
    med = {k: statistics.median(v) for k, v in runs.items()}
    print(f"  in this process ({result.width} x {result.height} px):")
    for k in sorted(med):
        share = f"  ({med[k] / med['compute']:.2f} x compute)" if k.startswith("page") else ""
        print(f"  {k:<16} {med[k]:7.2f} s{share}")


if __name__ == "__main__":
    main()
