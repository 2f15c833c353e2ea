"""Benchmark of the fixed costs and memory of the default ``compose render`` (issue 15's second
half) and of the draft check (issue 10), each printed beside its target:

    python bench/lean.py [--runs 3] [--sizes 8192,16384] [--styles coast,...] [--cpu] [--lines]
                         [--no-demo] [--no-memory] [--no-stages]

* demo style (styles/coast.toml, 1500 x 1500): ``compose render`` with all default outputs and
  ``compose check``, as commands (wall time of the process, start-up included), medians of
  ``--runs``;
* ``compose check`` against ``compose check --draft`` in one process (load, prepare, walk,
  judge; imports excluded), medians of ``--runs`` alternating runs, their same-run ratio and
  whether the verdicts agree rule by rule, for every example style;
* the default ``compose render`` with all its outputs of bench/render.py's synthetic style
  (relief + field + 10,000 lines) at 8192 and 16384: peak memory as each process's own
  high-water mark (VmHWM from /proc, sampled every 20 ms; the largest is the headline) and as
  the largest sum over the command and every process it starts (proportional set sizes, shared
  pages counted once); ru_maxrss (``/usr/bin/time -v``) beside it for comparison only, since it
  counts what a process inherits across fork and exec (see MEM_SAMPLER).

* ``--lines``: line drawing against vertices and window count: bench/render.py's lines-only
  style at 8192 with 10,000, 20,000 and 40,000 lines of 100 vertices, every window of the
  canvas's top-left 2048 x 2048 px rendered (the window task, lines drawn and composited) with
  512 px and with 256 px windows, alternately in one process, scaled to the whole canvas;
  medians and minimums of ``--runs`` (at least 5) rounds, the same-run ratio 256 / 512 px (4 x
  the windows; target: within a few %) and the seconds each million vertices beyond the first
  adds (the rest, compositing the canvas, does not grow with vertices; target: flat).

* ``--cpu``: the bare render (PNG + GeoTIFF + check; the command's automatic workers, or
  ``--cpu-workers N`` window threads) at 8192, CPU seconds per process (the command; the
  line-drawing helper, forked from the command or from a fork server; that server, if any,
  i.e. its imports; others), system time and minor page faults of the command, medians of
  ``--runs``: where the CPU outside the window threads goes (sampled from /proc every 50 ms,
  so a process's last 50 ms may be missed).

Run heavy benchmarks alone on the machine (e.g. under ``flock``); no assertion is made.
"""
from __future__ import annotations

import argparse
import json
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

import render as synthetic  # noqa: E402  (bench/render.py: data, styles, memory sampler)

COMPOSE = synthetic.COMPOSE
EXAMPLES = ("coast", "sea-warmth", "change", "cover", "poor")


def wall(argv: list[str], cwd: Path | None = None) -> float:
    t = time.perf_counter()
    subprocess.run(argv, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t


def demo(runs: int) -> None:
    style = ROOT / "styles" / "coast.toml"
    out = Path(tempfile.mkdtemp(prefix="compose-lean-"))
    try:
        render = [wall(COMPOSE + ["render", str(style), "--out", str(out), "--overwrite"])
                  for _ in range(runs)]
        check = [wall(COMPOSE + ["check", str(style)]) for _ in range(runs)]
        draft = [wall(COMPOSE + ["check", "--draft", str(style)]) for _ in range(runs)]
    finally:
        shutil.rmtree(out, ignore_errors=True)
    med = statistics.median
    print(f"== demo style coast 1500 x 1500, commands, medians of {runs} ==")
    print(f"compose render, all default outputs  {med(render):6.2f} s   (target <= 2 s)")
    print(f"compose check                        {med(check):6.2f} s   (target <= 1 s)")
    print(f"compose check --draft                {med(draft):6.2f} s   "
          f"({med(check) / med(draft):.1f} x as commands, start-up included)", flush=True)


CHECK = r"""
import json, statistics, sys, time
from compose.api import check
name, runs = sys.argv[1], int(sys.argv[2])
check(name, draft=True)                       # imports and first-open costs out of the timing
full, draft = [], []
for _ in range(runs):
    t = time.perf_counter(); f = check(name); full.append(time.perf_counter() - t)
    t = time.perf_counter(); d = check(name, draft=True); draft.append(time.perf_counter() - t)
verdicts = [{(r.rule, r.layer, r.ramp): (r.passed, r.met) for r in rep.rules} for rep in (f, d)]
print(json.dumps({"full": statistics.median(full), "draft": statistics.median(draft),
                  "agree": verdicts[0] == verdicts[1], "passed": f.passed, "size": d.draft}))
"""


def drafts(runs: int, styles) -> None:
    print(f"== full check against --draft, in one process per style, medians of {runs} ==")
    ratios = []
    for name in styles:
        path = ROOT / "styles" / f"{name}.toml"
        res = subprocess.run([sys.executable, "-c", CHECK, str(path), str(runs)],
                             capture_output=True, text=True)
        if res.returncode != 0:
            print(f"{name}: failed\n{res.stderr[-1500:]}")
            continue
        d = json.loads(res.stdout.strip().splitlines()[-1])
        ratio = d["full"] / d["draft"]
        ratios.append(ratio)
        print(f"{name:<11} full {d['full']:5.2f} s  draft ({d['size']}) {d['draft']:5.3f} s  "
              f"x{ratio:5.1f}  verdicts {'agree rule by rule' if d['agree'] else 'DIFFER'} "
              f"({'pass' if d['passed'] else 'fail'})", flush=True)
    if ratios:
        print(f"draft speed-up, median over styles x{statistics.median(ratios):.1f}  (target >= 10 x)")


def _bench_data(size: int, data: Path) -> tuple[Path, dict]:
    """The synthetic benchmark's folder at ``size`` (relief + field + 10,000 lines; made on first
    use) and its styles."""
    folder = data / f"{size}-10000"
    if not (folder / "lines.gpkg").exists():
        print(f"making synthetic data in {folder} ...", flush=True)
        synthetic.make_data(folder, size, 10000)
    return folder, synthetic.write_styles(folder, size)


# Peak memory of a command and every process it starts, each process's own. Sampled from /proc
# every 20 ms: VmHWM (the kernel's high-water mark of the process's resident pages, so a sample
# misses only growth in a process's last 20 ms), the RSS when the process was first seen (for a
# forked process: the pages it shares with the process it was forked from), and the largest
# PSS (shared pages divided among the processes sharing them) and private (USS) sizes; the
# largest sum of PSS over the tree at one sample. Not ru_maxrss (``/usr/bin/time -v``), which is
# printed beside for comparison: Linux carries the spawning process's high-water mark across
# exec into the new process's ru_maxrss (a helper spawned by a large process "peaks" at that
# size before it has done anything), and a forked process's counts the pages it shares with its
# parent, so ru_maxrss can name a process's inheritance as its peak.
MEM_SAMPLER = r"""
import json, os, resource, subprocess, sys, threading, time
def status(pid):
    d = {}
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                k, _, v = line.partition(":")
                if k in ("VmHWM", "VmRSS"):
                    d[k] = int(v.split()[0]) * 1024
        with open(f"/proc/{pid}/smaps_rollup") as f:
            for line in f:
                k = line.split(":")[0]
                if k in ("Pss", "Private_Clean", "Private_Dirty"):
                    d[k] = int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        return None
    return d if "VmHWM" in d else None
def cmdline(pid):
    try:
        with open(f"/proc/{pid}/cmdline", "rb") as f:
            return f.read().replace(b"\0", b" ").decode(errors="replace")
    except OSError:
        return ""
def comm(pid):
    try:
        with open(f"/proc/{pid}/comm") as f:
            return f.read().strip()
    except OSError:
        return ""
t0 = time.perf_counter()
p = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
procs, total = {}, [0]
def watch():
    while p.poll() is None:
        kids = {}
        for d in os.listdir("/proc"):
            if d.isdigit():
                try:
                    with open(f"/proc/{d}/stat") as f:
                        ppid = int(f.read().rsplit(")", 1)[1].split()[1])
                    kids.setdefault(ppid, []).append(int(d))
                except (OSError, IndexError, ValueError):
                    pass
        todo, pss = [(p.pid, 0)], 0
        while todo:
            q, ppid = todo.pop()
            s = status(q)
            if s is not None:
                o = procs.get(q)
                if o is None:
                    o = procs[q] = {"ppid": ppid, "cmd": cmdline(q), "first": s["VmRSS"],
                                    "hwm": 0, "pss": 0, "uss": 0}
                o["comm"] = comm(q) or o.get("comm", "")
                o["hwm"] = max(o["hwm"], s["VmHWM"])
                o["pss"] = max(o["pss"], s.get("Pss", 0))
                o["uss"] = max(o["uss"], s.get("Private_Clean", 0) + s.get("Private_Dirty", 0))
                pss += s.get("Pss", 0)
            todo += [(k, q) for k in kids.get(q, [])]
        total[0] = max(total[0], pss)
        time.sleep(0.02)
th = threading.Thread(target=watch, daemon=True)
th.start()
err = p.communicate()[1]
seconds = time.perf_counter() - t0
th.join(1)
root = p.pid
servers = {q for q, o in procs.items() if "forkserver" in o["cmd"] and o["ppid"] == root}
def role(q, o):
    if q == root:
        return "command"
    if q in servers:
        return "fork server"
    if o["ppid"] in servers or o.get("comm") == "compose-drawer":
        return "drawing helper"
    if "resource_tracker" in o["cmd"]:
        return "resource tracker"
    if o["cmd"] == procs[root]["cmd"]:
        return "forked from " + ("the command" if o["ppid"] == root else "a forked process")
    return "other"
print(json.dumps({"seconds": seconds, "code": p.returncode, "err": err.decode()[-1500:],
                  "pss_sum": total[0],
                  "ru_maxrss": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024,
                  "procs": [dict(o, role=role(q, o), cmd=o["cmd"][:60]) for q, o in procs.items()]}))
"""


LINES = r"""
import json, statistics, sys, time
from pathlib import Path
from compose.engine import prepare, render_window
from compose.style import load_style
style, rounds, area = Path(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3])
r = prepare(load_style(style))
wins = {w: [x for x in r.windows(w) if x.row < area and x.col < area] for w in (512, 256)}
for x in wins[512]:
    render_window(r, x, measure=False)           # warm: the features cut, their pixel arrays
got = {512: [], 256: []}
for i in range(rounds):
    for w in ((512, 256) if i % 2 == 0 else (256, 512)):
        t0 = time.perf_counter()
        for x in wins[w]:
            render_window(r, x, measure=False)
        got[w].append((time.perf_counter() - t0) * (r.canvas.width * r.canvas.height) / area ** 2)
r.close()
print(json.dumps(got))
"""


def lines(runs: int, data: Path) -> None:
    """Line drawing against the vertex count and the window count (see the module doc)."""
    rounds = max(5, runs)
    print("lines only, 8192 x 8192, window tasks of the top-left 2048 x 2048 px scaled to the "
          f"canvas (alternating, {rounds} rounds):", flush=True)
    base = None
    for n in (10000, 20000, 40000):
        folder = data / f"8192-{n}"
        if not (folder / "lines.gpkg").exists():
            print(f"making synthetic data in {folder} ...", flush=True)
            synthetic.make_data(folder, 8192, n)
        style = synthetic.write_styles(folder, 8192)["lines"]
        res = subprocess.run([sys.executable, "-c", LINES, str(style), str(rounds), "2048"],
                             capture_output=True, text=True)
        try:
            got = {int(k): v for k, v in json.loads(res.stdout.strip().splitlines()[-1]).items()}
        except (ValueError, IndexError):
            print(f"  {n} lines: failed\n{res.stderr[-1500:]}")
            continue
        med = {w: statistics.median(v) for w, v in got.items()}
        mvert = n * 100 / 1e6
        step = "" if base is None else \
            f"; {(med[512] - base[1]) / (mvert - base[0]):.2f} s per M vertices beyond the first"
        base = base if base is not None else (mvert, med[512])
        print(f"  {mvert:.0f} M vertices: 512 px windows {med[512]:6.2f} s (min {min(got[512]):.2f}), "
              f"256 px {med[256]:6.2f} s (min {min(got[256]):.2f}); 256 / 512 px "
              f"{med[256] / med[512]:.3f} x (min/min {min(got[256]) / min(got[512]):.3f}){step}",
              flush=True)


def memory(size: int, data: Path) -> None:
    folder, styles = _bench_data(size, data)
    out = folder / "out-lean"
    shutil.rmtree(out, ignore_errors=True)
    argv = COMPOSE + ["render", str(styles["aligned"]), "--out", str(out), "--overwrite"]
    res = subprocess.run([sys.executable, "-c", MEM_SAMPLER, *argv], cwd=folder,
                         capture_output=True, text=True)
    shutil.rmtree(out, ignore_errors=True)
    try:
        d = json.loads(res.stdout.strip().splitlines()[-1])
    except (ValueError, IndexError):
        print(f"memory at {size}: failed\n{res.stderr[-1500:]}")
        return
    if d["code"] not in (0, 1):
        print(f"memory at {size}: the render exited {d['code']}\n{d['err']}")
        return
    gb = 1e9
    procs = sorted(d["procs"], key=lambda o: -o["hwm"])
    top = procs[0] if procs else {"hwm": 0, "role": "?"}
    print(f"{size} x {size}, default render, all outputs: {d['seconds']:6.1f} s, largest process "
          f"{top['hwm'] / gb:.2f} GB ({top['role']}, its own VmHWM), all processes at once "
          f"{d['pss_sum'] / gb:.2f} GB (PSS sum)  (target <= 0.50 GB, flat in size)", flush=True)
    for o in procs:
        print(f"    {o['role']:<26} peak {o['hwm'] / gb:5.3f} GB (of it {o['first'] / gb:5.3f} resident "
              f"when first seen), PSS {o['pss'] / gb:5.3f}, private {o['uss'] / gb:5.3f} GB")
    print(f"    ru_maxrss, largest in the tree (what time -v reports; counts inherited pages): "
          f"{d['ru_maxrss'] / gb:.2f} GB", flush=True)


# Per-stage memory of the same command, in one process: resident set size (RSS, /proc/self/statm)
# sampled every 5 ms by a thread, at the start and end of each stage and its peak between; the
# stages are compose's own functions, wrapped. During the walk also: the planned reads' blocks
# held and glibc's heap (in use, mmapped included / free but kept) every 0.2 s.
STAGES = r"""
import ctypes, functools, importlib, json, os, sys, threading, time
PAGE = os.sysconf("SC_PAGE_SIZE")
def rss():
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * PAGE
def hwm():
    with open("/proc/self/status") as f:
        return next(int(l.split()[1]) * 1024 for l in f if l.startswith("VmHWM:"))
class _MI(ctypes.Structure):
    _fields_ = [(n, ctypes.c_size_t) for n in
                "arena ordblks smblks hblks hblkhd usmblks fsmblks uordblks fordblks keepcost".split()]
try:
    _libc = ctypes.CDLL("libc.so.6"); _libc.mallinfo2.restype = _MI
except (OSError, AttributeError):
    _libc = None
t0, r0 = time.perf_counter(), rss()
rows = [("python start", 0.0, 0.0, r0, r0, r0)]
from compose.cli.main import main
import compose.render, compose.sources.raster
rows.append(("imports (what a render loads first)", 0.0, time.perf_counter() - t0, r0, rss(), rss()))
samples, walk = [], {"plan": 0, "heap_used": 0, "heap_free": 0}
sources, stop = [], [False]
_orig_plan = compose.sources.raster.RasterSource.plan
def _plan(self, canvas, windows=()):
    if self not in sources:
        sources.append(self)
    return _orig_plan(self, canvas, windows)
compose.sources.raster.RasterSource.plan = _plan
def sampler():
    k = 0
    while not stop[0]:
        samples.append((time.perf_counter(), rss()))
        k += 1
        if k % 40 == 0:
            held = sum(s._plan.held_bytes for s in sources if s._plan is not None)
            walk["plan"] = max(walk["plan"], held)
            if _libc is not None:
                m = _libc.mallinfo2()
                walk["heap_used"] = max(walk["heap_used"], m.uordblks + m.hblkhd)
                walk["heap_free"] = max(walk["heap_free"], m.fordblks)
        time.sleep(0.005)
threading.Thread(target=sampler, daemon=True).start()
events = []
def wrap(dotted, label):
    mod, attr = dotted.split(":")
    owner = importlib.import_module(mod)
    *path, name = attr.split(".")
    for p in path:
        owner = getattr(owner, p)
    fn = getattr(owner, name)
    @functools.wraps(fn)
    def w(*a, **k):
        t, r = time.perf_counter(), rss()
        try:
            return fn(*a, **k)
        finally:
            events.append((label, t, time.perf_counter(), r, rss()))
    setattr(owner, name, w)
STAGE_FUNCS = [
    ("compose.render:prepare", "prepare (sources opened, lines read and cut)"),
    ("compose.layers.relief:ReliefLayer.__init__", "  relief layer (stretch samples)"),
    ("compose.layers.vector:_VectorLayer.__init__", "  lines layer (read, reprojected, cut)"),
    ("compose.render:run", "walk (windows, PNG + GeoTIFF encoders)"),
    ("compose.output.png:PngWriter.close", "PNG finished"),
    ("compose.output.geotiff:GeoTiffWriter.close", "GeoTIFF finished"),
    ("compose.check:check_style", "check"),
    ("compose.output.legend:legend_png", "legend"),
    ("compose.output.html:page_html", "HTML page"),
    ("compose.output.transaction:OutputSet.commit", "outputs renamed into place"),
]
for dotted, label in STAGE_FUNCS:
    try:
        wrap(dotted, label)
    except (ImportError, AttributeError):
        pass
try:
    main(sys.argv[1:])      # with argv: returns here (without, the command ends the process)
except SystemExit:
    pass
stop[0] = True
def peak(a, b):
    return max([r for t, r in samples if a <= t <= b] + [0])
for label, a, b, ra, rb in sorted(events, key=lambda e: e[1]):
    rows.append((label, a - t0, b - t0, ra, rb, max(peak(a, b), ra, rb)))
print(json.dumps({"rows": rows, "walk": walk, "hwm": hwm()}))
"""


def stages(size: int, data: Path) -> None:
    """The per-stage table of one instrumented run of the default render at ``size``."""
    folder = data / f"{size}-10000"
    styles = synthetic.write_styles(folder, size)
    out = folder / "out-lean-stages"
    shutil.rmtree(out, ignore_errors=True)
    res = subprocess.run([sys.executable, "-c", STAGES, "render", str(styles["aligned"]), "--out",
                          str(out), "--overwrite"], cwd=folder, capture_output=True, text=True)
    shutil.rmtree(out, ignore_errors=True)
    try:
        d = json.loads(res.stdout.strip().splitlines()[-1])
    except (ValueError, IndexError):
        print(f"stages at {size}: failed\n{res.stderr[-1500:]}")
        return
    mb = 1e6
    print(f"  where the memory goes at {size} (one instrumented run; RSS in MB at the stage's start, "
          f"end and its peak; seconds since start):")
    for label, a, b, ra, rb, pk in d["rows"]:
        print(f"    {label:<44} {a:6.1f}-{b:6.1f} s  {ra / mb:5.0f} -> {rb / mb:5.0f}  peak {pk / mb:5.0f}")
    w = d["walk"]
    print(f"    during the walk, largest: planned-read blocks held {w['plan'] / mb:.0f} MB, heap in use "
          f"{w['heap_used'] / mb:.0f} MB, heap free but kept {w['heap_free'] / mb:.0f} MB; process high-"
          f"water mark {d['hwm'] / mb:.0f} MB", flush=True)


BARE = r"""
import sys
from compose.parallel import ThreadMapper, mapper_for
from compose.render import render_style
from compose.style import load_style
style = load_style(sys.argv[1])
workers = sys.argv[3] if len(sys.argv) > 3 else "2"
mapper = (mapper_for(style.canvas().width * style.canvas().height) if workers == "auto"
          else ThreadMapper(int(workers)) if int(workers) > 1 else None)
render_style(style, sys.argv[2], overwrite=True, legend=False, check=True, html=False,
             mapper=mapper)
"""

# CPU per process of a command and its descendants, from /proc (user, system, minor faults)
CPU_SAMPLER = r"""
import json, os, subprocess, sys, threading, time
HZ = os.sysconf("SC_CLK_TCK")
def stat(pid):
    try:
        with open(f"/proc/{pid}/stat") as f:
            s = f.read()
        x = s.rsplit(")", 1)[1].split()
        name = s[s.index("(") + 1:s.rindex(")")]
        return int(x[1]), int(x[7]), int(x[11]) / HZ, int(x[12]) / HZ, name
    except (OSError, ValueError, IndexError):
        return None
def cmdline(pid):
    try:
        with open(f"/proc/{pid}/cmdline", "rb") as f:
            return f.read().replace(b"\0", b" ").decode(errors="replace")
    except OSError:
        return ""
t0 = time.perf_counter()
p = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
seen = {}
def watch():
    while p.poll() is None:
        info, kids = {}, {}
        for d in os.listdir("/proc"):
            if d.isdigit():
                st = stat(int(d))
                if st:
                    info[int(d)] = st
                    kids.setdefault(st[0], []).append(int(d))
        todo = [p.pid]
        while todo:
            q = todo.pop()
            if q in info:
                ppid, minflt, user, system, name = info[q]
                old = seen.get(q)
                seen[q] = dict(ppid=ppid, minflt=minflt, user=user, sys=system, comm=name,
                               cmd=old["cmd"] if old else cmdline(q))
            todo += kids.get(q, [])
        time.sleep(0.05)
th = threading.Thread(target=watch, daemon=True)
th.start()
err = p.communicate()[1]
wall = time.perf_counter() - t0
th.join(1)
root = p.pid
servers = {q for q, v in seen.items() if "forkserver" in v["cmd"] and v["ppid"] == root}
out = {"wall": wall, "code": p.returncode, "err": err.decode()[-1500:]}
for q, v in seen.items():
    role = ("command" if q == root else "fork server" if q in servers
            else "drawing helper" if v["ppid"] in servers or v["comm"] == "compose-drawer"
            else "others")
    r = out.setdefault(role, {"user": 0.0, "sys": 0.0, "minflt": 0})
    r["user"] += v["user"]; r["sys"] += v["sys"]; r["minflt"] += v["minflt"]
print(json.dumps(out))
"""


def cpu(size: int, data: Path, runs: int, workers: str = "auto") -> None:
    """CPU seconds per process of the bare render at ``size`` (``workers``: window threads, or
    "auto" for the command's default), medians of ``runs``."""
    folder, styles = _bench_data(size, data)
    out = folder / "out-lean-cpu"
    results = []
    for _ in range(runs):
        shutil.rmtree(out, ignore_errors=True)
        res = subprocess.run([sys.executable, "-c", CPU_SAMPLER, sys.executable, "-c", BARE,
                              str(styles["aligned"]), str(out), workers], cwd=folder, capture_output=True,
                             text=True)
        try:
            d = json.loads(res.stdout.strip().splitlines()[-1])
        except (ValueError, IndexError):
            print(f"cpu at {size}: failed\n{res.stderr[-1500:]}")
            return
        if d["code"] not in (0, 1):
            print(f"cpu at {size}: the render exited {d['code']}\n{d['err']}")
            return
        results.append(d)
    shutil.rmtree(out, ignore_errors=True)
    med = statistics.median

    def total(d, role):
        r = d.get(role)
        return r["user"] + r["sys"] if r else 0.0

    roles = ("command", "drawing helper", "fork server", "others")
    every = med(sum(total(d, r) for r in roles) for d in results)
    threads = "automatic workers" if workers == "auto" else f"{workers} window thread(s)"
    print(f"{size} x {size}, bare render (PNG + GeoTIFF + check), {threads}, medians of "
          f"{runs}: {med(d['wall'] for d in results):.2f} s wall, {every:.2f} s CPU in all "
          f"processes", flush=True)
    for role in roles:
        print(f"  {role:<15} {med(total(d, role) for d in results):6.2f} s CPU")
    cmd = [d["command"] for d in results if "command" in d]
    if cmd:
        print(f"  the command's system time {med(c['sys'] for c in cmd):.2f} s, minor page faults "
              f"{med(c['minflt'] for c in cmd):.0f}", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--sizes", default="8192,16384")
    ap.add_argument("--styles", default=",".join(EXAMPLES))
    ap.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "compose-bench")
    ap.add_argument("--no-demo", action="store_true")
    ap.add_argument("--no-stages", action="store_true",
                    help="skip the instrumented run that prints where the memory goes")
    ap.add_argument("--no-memory", action="store_true", help="skip the memory runs")
    ap.add_argument("--lines", action="store_true",
                    help="also line drawing against vertices (1, 2, 4 M) and window count")
    ap.add_argument("--cpu", action="store_true",
                    help="also CPU per process of the bare render at 8192 (medians of --runs)")
    ap.add_argument("--cpu-workers", default="auto",
                    help="window threads of the --cpu render: a number, or auto (the command's "
                         "default: 1 thread and the drawing helper on 2 cores)")
    a = ap.parse_args()
    from compose.kernels import state

    print(f"loops: {state(refuse_stale=True)}")
    if not a.no_demo:
        demo(a.runs)
        drafts(a.runs, [s for s in a.styles.split(",") if s])
    if a.lines:
        lines(a.runs, a.data)
    if a.cpu:
        cpu(8192, a.data, a.runs, a.cpu_workers)
    for size in (int(s) for s in a.sizes.split(",") if s) if not a.no_memory else ():
        memory(size, a.data)
        if not a.no_stages:
            stages(size, a.data)


if __name__ == "__main__":
    main()
