"""Vector layers drawn by a helper process (compose.drawer): the same paints, hence the same bytes,
as drawing them in the window's own thread."""
from __future__ import annotations

import os

import numpy as np

from compose.drawer import SHARED_DIR, DrawAhead
from compose.engine import prepare, render_window
from compose.parallel import pack, unpack
from compose.sources.vector import Features
from compose.style import load_style

WINDOW = 96


def test_features_pickle_exactly(tiny_region):
    prepared = prepare(load_style(tiny_region))
    try:
        feats = [la.features for la in prepared.layers if hasattr(la, "features")]
        assert feats
        for f in feats:
            g = unpack(pack(f))
            assert isinstance(g, Features) and g.properties == f.properties
            assert all(a.equals_exact(b, 0) and a.geom_type == b.geom_type
                       for a, b in zip(f.geometries, g.geometries, strict=True))
    finally:
        prepared.close()


def test_helper_process_draws_the_same_paints(tiny_region):
    prepared = prepare(load_style(tiny_region))
    windows = prepared.windows(WINDOW)
    drawer = DrawAhead.start(prepared, windows, ahead=2, wait=True)
    try:
        assert drawer is not None and drawer.layers
        for w in windows[::-1] + windows:       # out of order too (then drawn here: None)
            here = render_window(prepared, w)
            there = render_window(prepared, w, drawn=drawer)
            np.testing.assert_array_equal(here.rgb8, there.rgb8)
        for li in drawer.layers:                # paint by paint, exactly
            layer = prepared.layers[li]
            w = windows[len(windows) // 2]
            _, _, h, width = w.padded
            mine = layer.paint(w, prepared.canvas.window_transform(w), h, width)
            fresh = DrawAhead.start(prepared, [w], only=frozenset({li}), wait=True)
            try:
                theirs = fresh.paints(w, li)
            finally:
                fresh.close()
            assert theirs is not None and len(theirs) == len(mine)
            for a, b in zip(mine, theirs, strict=True):
                assert a.part == b.part and a.color == b.color and a.alpha.dtype == b.alpha.dtype
                np.testing.assert_array_equal(a.alpha, b.alpha)
        assert drawer.served > 0
        assert drawer.shared > 0 or not os.path.isdir(SHARED_DIR)      # through shared memory
    finally:
        drawer.close()
        prepared.close()
    assert drawer.paints(windows[0], min(drawer.layers)) is None    # closed: drawn here


def test_coverage_through_the_pipe_when_slots_run_out_or_are_missing(tiny_region, monkeypatch):
    # One shared slot for 3 windows drawn ahead: windows that find it taken send their coverage
    # through the pipe; without a place for the shared file every window does. The same rows
    # either way as drawn in the thread itself, and no shared file is left behind.
    import compose.drawer as drawer_module

    prepared = prepare(load_style(tiny_region))
    windows = prepared.windows(WINDOW)
    try:
        here = [render_window(prepared, w).rgb8 for w in windows]
        for slots, folder in ((1, SHARED_DIR), (4, "/nonexistent-compose-folder")):
            monkeypatch.setattr(drawer_module, "SLOTS", slots)
            monkeypatch.setattr(drawer_module, "SHARED_DIR", folder)
            before = set(os.listdir(SHARED_DIR)) if os.path.isdir(SHARED_DIR) else set()
            drawer = DrawAhead.start(prepared, windows, ahead=3, wait=True)
            assert drawer is not None
            try:
                for w, rgb in zip(windows, here, strict=True):
                    np.testing.assert_array_equal(render_window(prepared, w, drawn=drawer).rgb8, rgb)
                assert drawer.served == len(windows)
                if folder == SHARED_DIR and os.path.isdir(SHARED_DIR):
                    assert 0 < drawer.shared < drawer.served
                else:
                    assert drawer.shared == 0
            finally:
                drawer.close()
            after = set(os.listdir(SHARED_DIR)) if os.path.isdir(SHARED_DIR) else set()
            assert not {f for f in after - before if f.startswith("compose-draw-")}
    finally:
        prepared.close()


def test_nothing_to_draw_starts_nothing(tiny_region):
    prepared = prepare(load_style(tiny_region))
    try:
        rasters = frozenset(i for i, la in enumerate(prepared.layers)
                            if la.spec.kind not in ("lines", "areas", "points"))
        assert DrawAhead.start(prepared, prepared.windows(WINDOW), only=rasters) is None
    finally:
        prepared.close()


def _same(f, g):
    return g.properties == f.properties and len(f) == len(g) and all(
        a.equals_exact(b, 0) and a.geom_type == b.geom_type
        for a, b in zip(f.geometries, g.geometries, strict=True))


def test_released_features_read_again_and_pickled_whole(tiny_region):
    prepared = prepare(load_style(tiny_region))
    try:
        layers = [la for la in prepared.layers if hasattr(la, "release")]
        assert layers
        for la in layers:
            before = la.features
            la.release()
            assert la._held is None
            assert _same(before, unpack(pack(la)).features)      # pickled with its features
            assert la._held is not None                          # (read again for that)
            la.release()
            assert _same(before, la.features)
    finally:
        prepared.close()


def test_walk_drops_this_process_features_once_the_helper_draws(tiny_region):
    from compose.engine import WindowTask
    from compose.parallel import ThreadMapper

    prepared = prepare(load_style(tiny_region))
    windows = prepared.windows(WINDOW)
    try:
        here = [render_window(prepared, w).rgb8 for w in windows]
        layers = [prepared.layers[li] for li in range(len(prepared.layers))
                  if hasattr(prepared.layers[li], "release")]
        seen = []
        real = DrawAhead.start

        def start(*a, **k):
            k["wait"] = True            # the helper up before the first window
            d = real(*a, **k)
            seen.append(d)
            return d

        DrawAhead.start = start
        try:
            mapper = ThreadMapper(2)
            there = [r.rgb8 for r in mapper(WindowTask(prepared, measure=False), windows)]
        finally:
            DrawAhead.start = real
        assert seen and seen[0] is not None and seen[0].served > 0
        assert seen[0].released
        assert all(la._held is None for la in layers)      # dropped during the walk
        for a, b in zip(here, there, strict=True):
            np.testing.assert_array_equal(a, b)
        assert all(la.features is not None for la in layers)     # and read again on demand
    finally:
        prepared.close()


FORKED = r"""
import sys
import numpy as np
from compose import drawer
from compose.engine import prepare, render_window
from compose.style import load_style

drawer.warm()                   # one thread here: the helper is forked from this process now
assert len(drawer._WARM) == 1
helper = drawer._WARM[0].process
prepared = prepare(load_style(sys.argv[1]))
windows = prepared.windows(int(sys.argv[2]))
here = [render_window(prepared, w).rgb8 for w in windows]
d = drawer.DrawAhead.start(prepared, windows, ahead=2, wait=True)
assert d is not None and d.forked and not drawer._WARM
with open(f"/proc/{helper.pid}/comm") as f:     # named as the system shows it
    assert f.read().strip() == drawer.HELPER_NAME.decode()
for w, rgb in zip(windows, here, strict=True):
    np.testing.assert_array_equal(render_window(prepared, w, drawn=d).rgb8, rgb)
assert d.served == len(windows) * len(d.layers)
d.close()
assert not helper.is_alive() and helper.exitcode == 0      # asked to end, and reaped
drawer.warm()
again = drawer._WARM[0].process
rasters = frozenset(i for i, la in enumerate(prepared.layers)
                    if la.spec.kind not in drawer.DRAWN_KINDS)
assert drawer.DrawAhead.start(prepared, windows, only=rasters) is None
assert not drawer._WARM and not again.is_alive()           # nothing to draw: ended
prepared.close()
print("ok")
"""


def test_helper_forked_from_a_single_threaded_process_draws_the_same_rows(tiny_region):
    # The command's case: warm() runs before any other thread, so the helper is forked from the
    # command itself (no server process); a fresh interpreter, so that no test's thread runs.
    import subprocess
    import sys

    res = subprocess.run([sys.executable, "-c", FORKED, str(tiny_region), str(WINDOW)],
                         capture_output=True, text=True, timeout=300)
    assert res.returncode == 0, res.stderr[-3000:]
    assert res.stdout.strip() == "ok" and "Traceback" not in res.stderr


def test_lines_go_to_the_helper_as_pixel_parts(tiny_region):
    # The helper gets a lines layer as its parts in pixel space (LinesLayer.for_drawing): no
    # features in the payload, the same paints for every window, and a grid not the canvas's
    # drawn from the features read again from the source.
    from affine import Affine

    prepared = prepare(load_style(tiny_region))
    try:
        lines = [la for la in prepared.layers if la.spec.kind == "lines"]
        assert lines
        for la in lines:
            sent = la.for_drawing()
            payload = pack(sent)
            assert sent._held is None and la._held is not None     # the original keeps them
            there = unpack(payload)
            assert there._held is None and there._pixels is not None
            windows = prepared.windows(WINDOW)
            for w in windows:
                transform = prepared.canvas.window_transform(w)
                _, _, h, width = w.padded
                mine = la.paint(w, transform, h, width)
                theirs = there.paint(w, transform, h, width)
                assert [p.part for p in mine] == [p.part for p in theirs]
                for a, b in zip(mine, theirs, strict=True):
                    np.testing.assert_array_equal(a.alpha, b.alpha)
            w = windows[0]
            shifted = prepared.canvas.window_transform(w) @ Affine.translation(0.5, 0.25)
            _, _, h, width = w.padded
            mine = la.paint(w, shifted, h, width)
            theirs = there.paint(w, shifted, h, width)
            assert there._held is not None and mine
            for a, b in zip(mine, theirs, strict=True):
                np.testing.assert_array_equal(a.alpha, b.alpha)
    finally:
        prepared.close()
