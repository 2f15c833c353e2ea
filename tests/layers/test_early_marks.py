"""A draft's lines, areas and points prepared and drawn in a forked process
(compose.layers.early_marks) give the report the check makes drawing them itself, byte for
byte (our own invariant: the same code on the same inputs), and the check's process then loads
no vector or drawing module for them. Each case runs in a fresh interpreter, as a command does:
a process with other threads running (pytest's may) does not fork."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
STYLES = ROOT / "styles"

# runs in a fresh interpreter: argv[1] the style, argv[2] "ahead" / "here" / "fail"
_CODE = """
import json, sys
import compose.api, compose.layers.early_marks as em
import compose.sources.vector as sv
em.MIN_BYTES = 0                       # the demo's small files are drawn ahead too
forked = []
real = em._Job.__init__
em._Job.__init__ = lambda self, fn: forked.append(1) or real(self, fn)
reads = []                             # features read by this process (the check's)
real_read = sv.VectorSource._read
sv.VectorSource._read = lambda self: reads.append(self.layer) or real_read(self)
real_lines = sv.VectorSource._read_lines   # (or read as flat lines)
sv.VectorSource._read_lines = lambda self, *a: reads.append(self.layer) or real_lines(self, *a)
if sys.argv[2] == "here":
    em.MarksAhead.start = classmethod(lambda cls, *a, **k: None)
if sys.argv[2] == "fail":              # the process fails: the layers are built here instead
    def broken(*a):
        raise RuntimeError("no paints")
    em._draw_all = broken
if sys.argv[2] == "stuck":             # the process never answers: ended, built here instead
    import time
    em.PATIENCE = 1.0
    em._draw_all = lambda *a: time.sleep(600)
if sys.argv[2] == "threads":           # a thread started (in C) since the API was imported
    compose.api._THREADS_AT_IMPORT = 0
report = compose.api.check(sys.argv[1], draft=True, cache=False)
print(json.dumps({"report": report.to_json(False), "forked": len(forked), "reads": reads}))
"""


def _draft(style: Path, how: str) -> dict:
    out = subprocess.run([sys.executable, "-c", _CODE, str(style), how], capture_output=True,
                         text=True, cwd=ROOT, check=True, timeout=120)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_marks_drawn_ahead_give_the_same_draft_report_on_every_example_style():
    for name in ("coast", "sea-warmth", "change", "cover", "base", "poor"):
        style = STYLES / f"{name}.toml"
        ahead, here = _draft(style, "ahead"), _draft(style, "here")
        assert (ahead["forked"], here["forked"]) == (1, 0), name     # each has lines
        assert json.dumps(ahead["report"]) == json.dumps(here["report"]), name


def test_a_failed_or_silent_process_leaves_the_layers_to_the_check_with_the_same_report():
    style = STYLES / "coast.toml"
    here = _draft(style, "here")
    for how in ("fail", "stuck"):
        got = _draft(style, how)
        assert got["forked"] == 1, how
        assert json.dumps(got["report"]) == json.dumps(here["report"]), how


def test_no_process_is_forked_while_a_thread_started_since_the_api_was_imported_runs():
    """A fork copies locks other threads may hold (GDAL's workers, say): as the check's window
    helpers (compose.api._Helpers), the marks are then drawn in the check's own process."""
    style = STYLES / "coast.toml"
    got, here = _draft(style, "threads"), _draft(style, "here")
    assert got["forked"] == 0
    assert json.dumps(got["report"]) == json.dumps(here["report"])


def test_a_check_whose_marks_are_drawn_ahead_reads_no_feature_of_them(tmp_path):
    """Lines drawn in the forked process: the check's own process reads no feature of them (it
    draws the first tile from the process's parts in pixel space)."""
    from tests.layers.test_early import _big_style

    style = _big_style(tmp_path, n=512)
    ahead, here = _draft(style, "ahead"), _draft(style, "here")
    assert ahead["forked"] == 1
    assert json.dumps(ahead["report"]) == json.dumps(here["report"])
    assert here["reads"] and ahead["reads"] == []


# the command's way: the style loaded and the marks process forked before the checker's modules
# are imported (compose.layers.early_marks.start_early), then taken by the check
_COMMAND = """
import json, sys
import compose.layers.early_marks as em
em.MIN_BYTES = 0
forked = []
real = em._Job.__init__
em._Job.__init__ = lambda self, fn: forked.append(sorted(sys.modules)) or real(self, fn)
draw = em._draw_all

def drawn(*args, **kw):                 # in the marks process: what it imported
    out = draw(*args, **kw)
    with open(sys.argv[2], "w") as f:
        json.dump(sorted(m for m in sys.modules if m.startswith("rasterio")), f)
    return out
em._draw_all = drawn
from compose.cli.main import main
try:
    main(["check", "--draft", "--json", "--no-cache", sys.argv[1]])
except SystemExit:
    pass
print(json.dumps({"forked": len(forked), "check imported": "compose.check" in forked[0],
                  "left": len(em._EARLY)}))
"""


def test_the_command_forks_the_marks_process_before_the_checker_loads_with_the_same_report(
        tmp_path):
    from tests.layers.test_early import _big_style

    style = _big_style(tmp_path, n=512)         # no [page] (whose modules load the checker)
    child = tmp_path / "child.json"
    out = subprocess.run([sys.executable, "-c", _COMMAND, str(style), str(child)],
                         capture_output=True, text=True, cwd=ROOT, check=True, timeout=120)
    *report, last = out.stdout.strip().splitlines()
    got = json.loads(last)
    assert got == {"forked": 1, "check imported": False, "left": 0}
    assert json.loads("\n".join(report)) == _draft(style, "here")["report"]
    # its lines are a plain GeoPackage table in the canvas's CRS: the marks process asked GDAL
    # nothing (compose.sources.crs), so neither it nor the command before the fork loaded
    # rasterio for it
    assert json.loads(child.read_text()) == []


_BEFORE_CLICK = """
import atexit, json, sys
import compose.layers.early_marks as em
em.MIN_BYTES = 0
forked = []
real = em._Job.__init__
em._Job.__init__ = lambda self, fn: forked.append("click" in sys.modules) or real(self, fn)
atexit.register(lambda: sys.stderr.write("FORKED " + json.dumps(forked) + "\\n"))
from compose.cli.main import main
sys.argv[1:] = ["check", "--draft", "--json", "--no-cache", *sys.argv[2:], sys.argv[1]]
main()
"""


def test_the_draft_command_forks_the_marks_process_before_click_loads_with_the_same_report(
        tmp_path):
    # compose.cli.main.main (the console script: argv from sys.argv) forks it before the click
    # group and the command's module are imported, for a style and the plain flags only; with
    # another option it is forked by the command as before. The same report either way.
    from tests.layers.test_early import _big_style

    style = _big_style(tmp_path, n=512)
    want = _draft(style, "here")["report"]
    for extra, click_first in (([], False), (["--workers", "1"], True)):
        out = subprocess.run([sys.executable, "-c", _BEFORE_CLICK, str(style), *extra],
                             capture_output=True, text=True, cwd=ROOT, timeout=120)
        assert out.returncode in (0, 1), out.stderr
        forked = [line for line in out.stderr.splitlines() if line.startswith("FORKED ")]
        assert json.loads(forked[-1][len("FORKED "):]) == [click_first]
        assert json.loads(out.stdout) == want


_CLAIM = """
import json
from compose.layers import early_marks as em
got = []
for _ in range(5):
    job = em._Job(lambda send, hand_over, claim: claim())
    mine = job.claim()
    message = job.receive(60.0)
    theirs = job.result(message) if message and message[0] == "done" else None
    job.abort()
    got.append([mine, theirs])
print(json.dumps(got))
"""


def test_the_first_tile_goes_to_one_process_only():
    """_Job.claim: the check's process and the marks process both ask for the first tile;
    exactly one of them gets it (a byte of their shared memory file, set under a POSIX record
    lock). In a fresh interpreter: a process with other threads running does not fork."""
    out = subprocess.run([sys.executable, "-c", _CLAIM], capture_output=True, text=True,
                         cwd=ROOT, check=True, timeout=120)
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert len(got) == 5 and all(sorted(pair) == [False, True] for pair in got)


def test_the_tiles_drawn_apart_put_together_are_the_whole_canvas_drawn_at_once():
    """The first tile (this process) and the rest (the process forked to draw them) of each
    demo mark layer, put together, are its paints of the whole draft canvas, byte for byte and
    in the same order (a vector layer draws every window of whole tiles tile by tile)."""
    from compose.check.draft import draft_canvas
    from compose.layers import early_marks as em
    from compose.layers.base import Context
    from compose.style import load_style
    from compose.style.kinds import layer_class

    style = load_style(STYLES / "coast.toml")
    canvas = draft_canvas(style.canvas())
    mine, rest = em._bands(canvas)
    assert len(rest) == 2 and canvas.width > 256 and canvas.height > 256
    ctx = Context(canvas=canvas, ramps={}, style=style, draft=True)
    layers = [layer_class(s.kind)(s, ctx) for s in style.layers if s.kind in em.MARK_KINDS]
    pieces = em._paint(layers, canvas, mine + rest)
    for i, layer in enumerate(layers):
        whole = canvas.whole(layer.margin)
        _, _, h, w = whole.padded
        at_once = layer.paint(whole, canvas.window_transform(whole), h, w)
        together = em._put_together(canvas, layer.margin, [(wi, p[i]) for wi, p in pieces])
        assert [p.part for p in together] == [p.part for p in at_once] and at_once
        for a, b in zip(together, at_once):
            assert a.color == b.color and a.alpha.dtype == b.alpha.dtype
            assert np.array_equal(a.alpha, b.alpha)


_EITHER = """
import json, sys
import numpy as np
from compose.check.draft import draft_canvas
from compose.layers import early_marks as em
from compose.layers.base import Context
from compose.style import load_style
from compose.style.kinds import layer_class

style = load_style(sys.argv[1])
canvas = draft_canvas(style.canvas())
specs = [s for s in style.layers if s.enabled and s.kind in em.MARK_KINDS]
handed = []
real_taken = em._Job.taken
em._Job.taken = lambda self, where: handed.append(where) or real_taken(self, where)
ahead = em.MarksAhead._fork(style, canvas, specs)
if sys.argv[2] == "theirs":             # the process claims the first tile before this one asks
    import os, time
    while os.pread(ahead._job._memory, 1, 0) in (b"", b"\\0"):
        time.sleep(0.005)
ctx = Context(canvas=canvas, ramps={}, style=style, draft=True)
same = []
for spec in specs:
    margin, paints = ahead.result(spec.name)
    layer = layer_class(spec.kind)(spec, ctx)
    whole = canvas.whole(layer.margin)
    _, _, h, w = whole.padded
    at_once = layer.paint(whole, canvas.window_transform(whole), h, w)
    same.append(margin == layer.margin and [p.part for p in paints] == [p.part for p in at_once]
                and all(np.array_equal(a.alpha, b.alpha) for a, b in zip(paints, at_once)))
ahead.close()
print(json.dumps({"same": same, "drawn here": len(ahead._here), "handed": len(handed),
                  "paints first": handed[-1][0] == em._DATA}))
"""


def test_the_first_tile_drawn_by_either_process_gives_the_same_paints():
    """The check's process asks for the first tile at once (the process is still reading):
    the process hands its layers over when it sees the claim and this one draws the tile; or
    the process has the tile (claimed first) and hands no layers over (one message: its paints).
    Either way each mark layer's paints of the whole draft canvas are the layer's own, byte for
    byte."""
    for who in ("ours", "theirs"):
        out = subprocess.run([sys.executable, "-c", _EITHER, str(STYLES / "coast.toml"), who],
                             capture_output=True, text=True, cwd=ROOT, check=True, timeout=120)
        got = json.loads(out.stdout.strip().splitlines()[-1])
        assert got["same"] and all(got["same"]), who
        if who == "ours":
            assert got["drawn here"] == 1 and got["handed"] == 2     # layers, then paints
        else:
            assert got["drawn here"] == 0 and got["handed"] == 1     # paints only,
            assert got["paints first"]          # the first bytes of the memory file
