"""Property-based fuzzing of the example styles: whatever a mutated style holds, compose ends with
exit 0, 1 or 2, one stderr line on an error and never a traceback, within a time and memory bound,
and a render leaves either its complete output set or nothing.

Mutations (hypothesis, seeded and derandomised so CI runs the same cases every time): deleted
keys, values of the wrong type, extreme numbers, unicode and control characters, deep nesting,
bad colours, hostile paths and ``extends`` chains, applied 1-3 at a time to a copy of one of the
demo styles (styles/*.toml) whose canvas is made small so a case takes about a second.

CI runs :data:`CASES` cases; more with ``COMPOSE_FUZZ_CASES=2000`` (see DEVELOPERS.md).
``COMPOSE_FUZZ_REPORT=path`` appends one JSON line per case (exit code, seconds, first line).
"""
from __future__ import annotations

import copy
import json
import math
import os
import resource
import shutil
import time
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.cli._hostile import leftovers, run_in_process

ROOT = Path(__file__).resolve().parents[2]
CASES = int(os.environ.get("COMPOSE_FUZZ_CASES", "200"))
#: A case running longer than this (seconds) counts as a hang (our own bound, generous for a
#: loaded machine; a normal case takes about a second).
HANG_SECONDS = float(os.environ.get("COMPOSE_FUZZ_HANG_SECONDS", "120"))
#: Peak resident memory of the test process allowed (bytes).
MEMORY_BOUND = 6 << 30
#: The canvas limit the fuzzed runs get (pixels): an absurd canvas is refused, not rendered.
MAX_PIXELS = 250_000
STYLES = ("coast.toml", "sea-warmth.toml", "change.toml", "cover.toml", "poor.toml", "base.toml")
REPORT = os.environ.get("COMPOSE_FUZZ_REPORT")


# --- a TOML writer for arbitrary (hostile) data: everything inline --------------------------


def _key(k: str) -> str:
    if k and all(c.isascii() and (c.isalnum() or c in "-_") for c in k):
        return k
    return _string(k)


def _string(s: str) -> str:
    text = json.dumps(s, ensure_ascii=False).replace("\x7f", "\\u007f")
    return text


def dump_value(v) -> str:
    """One TOML value (tables and arrays inline); nested iteratively deep values are fine."""
    if isinstance(v, Deep):
        return v.toml()
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _string(v)
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {dump_value(x)}" for k, x in v.items()) + " }"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(dump_value(x) for x in v) + "]"
    raise TypeError(type(v))


def dump(data: dict) -> str:
    """A style's tables as TOML, every top-level key on its own line."""
    return "".join(f"{_key(k)} = {dump_value(v)}\n" for k, v in data.items())


# --- the mutations ---------------------------------------------------------------------------

_text = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=40)
_extreme = st.sampled_from([0, -1, 1, 1e308, -1e308, float("inf"), float("-inf"), float("nan"),
                            1e-300, 2**63, -(2**63) - 1, 10**30, 0.001, 1e9, 1_000_000_000, 3.5])
_color = st.sampled_from(["#zzz", "#12345", "#1234567", "#fff\n", "red", "", " ", "#FFF",
                           "\u202e#ffffff", "#ffffff\x00", "rgb(1,2,3)"]) | st.fixed_dictionaries(
    {"L": _extreme | st.floats(-10, 110), "C": _extreme | st.floats(-10, 300),
     "h": _extreme | st.floats(-720, 720)})
_path = st.sampled_from(["/dev/zero", "/dev/null", "/dev/stdin", "/proc/self/status", "/", ".",
                         "..", "../../../../../../etc/passwd", "/vsicurl/http://127.0.0.1:9/x.tif",
                         "http://127.0.0.1:9/x.tif", "/vsizip//tmp/x.zip/x.tif", "WMS:http://x",
                         "x" * 300, ("d" * 200 + "/") * 30 + "x.tif", "nothing.tif", "a\x00b",
                         "base.toml", "coast.toml", "ramps.toml", "../demo_region/vectors.gpkg",
                         "../demo_region/elevation.tif", "\u202etif.exe", "-rf", "...."])


class Deep:
    """A value nested ``depth`` levels deep (arrays or tables), written without recursion."""

    def __init__(self, depth: int, kind: str):
        self.depth, self.kind = depth, kind

    def toml(self) -> str:
        if self.kind == "array":
            return "[" * self.depth + "1" + "]" * self.depth
        return "{ a = " * self.depth + "1" + " }" * self.depth

    def __repr__(self) -> str:
        return f"Deep({self.depth}, {self.kind!r})"


def _deep(depth: int, kind: str) -> Deep:
    return Deep(depth, kind)


_scalar = st.none() | st.booleans() | st.integers() | st.floats() | _text | _extreme
_wrong = (_scalar.filter(lambda v: v is not None) | _color | _path
          | st.lists(_scalar.filter(lambda v: v is not None), max_size=4)
          | st.dictionaries(_text, st.integers() | _text, max_size=3)
          | st.builds(_deep, st.integers(1, 3000), st.sampled_from(["array", "table"]))
          | st.just("x" * 100_000))


def _paths(data, prefix=()):
    """Every (path, value) in ``data``: keys of tables and indices of arrays."""
    out = [(prefix, data)]
    todo = [(prefix, data)]
    if isinstance(data, Deep):
        return out
    while todo:
        where, value = todo.pop()
        items = value.items() if isinstance(value, dict) else (
            enumerate(value) if isinstance(value, list) else ())
        for k, v in items:
            out.append((where + (k,), v))
            todo.append((where + (k,), v))
    return out


def _parent(data, path):
    for k in path[:-1]:
        data = data[k]
    return data


@st.composite
def mutation(draw, data):
    """Change ``data`` in place once; returns a short description."""
    paths = [p for p, _ in _paths(data) if p]
    op = draw(st.sampled_from(["delete", "wrong", "extreme", "colour", "path", "extends", "add",
                               "duplicate", "unicode", "nudge", "nudge", "nudge"]))
    numeric = [p for p, v in _paths(data) if p and isinstance(v, (int, float))
               and not isinstance(v, bool)]
    if op == "nudge" and numeric:
        # a plausible number made larger, smaller, zero or negative: gets past the schema more
        # often than a wrong type, so the engine and the checker see odd values too
        p = draw(st.sampled_from(numeric))
        parent = _parent(data, p)
        factor = draw(st.sampled_from([0, -1, 0.5, 2, 10, 1000, 1e-3, 1.01]))
        value = parent[p[-1]] * factor
        parent[p[-1]] = int(value) if isinstance(parent[p[-1]], int) else float(value)
        return f"nudge {p} x{factor}"[:80]
    if op == "extends":
        data["extends"] = draw(_path | st.sampled_from(["coast.toml", "base.toml", "ramps.toml",
                                                        "self.toml", "missing.toml"]))
        return f"extends={data['extends']!r}"[:80]
    if op == "add" or not paths:
        target = data
        if paths and draw(st.booleans()):
            p = draw(st.sampled_from(paths))
            v = _parent(data, p)[p[-1]]
            if isinstance(v, dict):
                target = v
        key = draw(st.sampled_from(["name", "kind", "role", "source", "pixel", "dpi", "extent",
                                    "ramp", "layer", "map", "width", "directions", "priority",
                                    "text", "background", "enabled"]) | _text)
        target[key] = draw(_wrong)
        return f"add {key!r}"[:80]
    p = draw(st.sampled_from(paths))
    parent = _parent(data, p)
    if op == "delete":
        if isinstance(parent, dict):
            del parent[p[-1]]
        else:
            parent.pop(p[-1])
        return f"delete {p}"[:80]
    if op == "duplicate" and isinstance(parent, list):
        parent.append(copy.deepcopy(parent[p[-1]]))
        return f"duplicate {p}"[:80]
    strategy = {"wrong": _wrong, "extreme": _extreme, "colour": _color, "path": _path,
                "unicode": _text, "duplicate": _wrong, "nudge": _extreme}[op]
    parent[p[-1]] = draw(strategy)
    return f"{op} {p}"[:80]


@st.composite
def mutated_style(draw):
    name = draw(st.sampled_from(STYLES))
    data = tomllib.loads((ROOT / "styles" / name).read_text(encoding="utf-8"))
    # a small canvas first, so a case stays cheap unless a mutation changes it
    data.setdefault("map", {})["pixel"] = 900
    done = [draw(mutation(data)) for _ in range(draw(st.integers(1, 3)))]
    render = draw(st.integers(0, 3)) == 0
    return name, data, done, render


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """A copy of styles/ beside the demo data (shared read-only by all cases)."""
    top = tmp_path_factory.mktemp("fuzz")
    shutil.copytree(ROOT / "styles", top / "styles")
    (top / "demo_region").symlink_to(ROOT / "demo_region")
    return top


@settings(max_examples=CASES, derandomize=True, deadline=None, database=None, print_blob=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                 HealthCheck.function_scoped_fixture])
@given(case=mutated_style())
def test_mutated_styles_end_cleanly(folder, case):
    name, data, done, render = case
    style = folder / "styles" / "case.toml"
    style.write_text(dump(data), encoding="utf-8")
    out = folder / "out"
    shutil.rmtree(out, ignore_errors=True)
    args = (["render", style, "--out", out] if render else ["check", style])
    t0 = time.perf_counter()
    ended = run_in_process(*args, "--max-pixels", str(MAX_PIXELS))
    seconds = time.perf_counter() - t0
    if REPORT:
        with open(REPORT, "a", encoding="utf-8") as f:
            f.write(json.dumps({"style": name, "mutations": done, "command": args[0],
                                "code": ended.code, "seconds": round(seconds, 2),
                                "stderr": ended.stderr.strip()[:300]}) + "\n")
    context = f"{name} {done} -> {ended.code}: {ended.stderr[-1500:]}"
    assert ended.code in (0, 1, 2), context
    assert "Traceback" not in ended.stderr + ended.stdout, context
    if ended.code == 2:
        assert len(ended.lines) == 1, context
        assert ended.lines[0].startswith("compose: error: "), context
    else:   # compose's own notes (e.g. an extent rounded to whole pixels), no library output
        assert all(line.startswith(("note: ", "compose: ")) for line in ended.lines), context
    assert seconds < HANG_SECONDS, context
    assert resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 < MEMORY_BOUND, context
    if render:
        files = leftovers(out)
        if ended.code == 2:
            assert files == [], context
        else:
            assert not [f for f in files if f.startswith(".")], context
            assert {Path(f).suffix for f in files} >= {".png", ".tif", ".json", ".html"}, context
