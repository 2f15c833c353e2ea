"""A series: one style rendered once per member of its ``[series]`` table, on shared scales.

The members differ only in the values filled into the style's strings (``{date}``). Scales that
would otherwise follow each member's own data are decided once over the whole series and handed
to every member as plain data, so equal values get equal colours across the series:

* quantile steps (``steps = k`` with ``step_method = "quantile"``): the breaks are quantiles of
  the pooled values of every member (each member's layers read on a coarse copy of the canvas,
  at most :data:`SAMPLE_SIDE` pixels a side, as a single render does);
* domains are the ramps' own (stated in the style, the same for every member).

The scales are recorded in ``NAME.series.json`` beside the members' outputs (their paths and the
style's relative to the record's folder, so the folder can be moved or published as a whole, with
its style where the style sits beside or inside it: :func:`style_from`), and
``NAME.series.html`` shows the members side by side with their check verdicts and the scales.
Members are independent renders and run in parallel worker processes.
"""
from __future__ import annotations

import dataclasses
import html
import json
import os
from collections.abc import Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from multiprocessing import get_context
from pathlib import Path
from typing import Any

import numpy as np

from compose.errors import StyleError

__all__ = ["SeriesMember", "SeriesResult", "shared_scales", "apply_scales", "render_series",
           "SAMPLE_SIDE"]

SAMPLE_SIDE = 1024


@dataclass(frozen=True, slots=True)
class SeriesMember:
    """One rendered member: its variables, output name, files and check verdict."""

    variables: Mapping[str, str]
    name: str
    title: str
    outputs: Mapping[str, str]
    passed: bool | None
    seconds: float


@dataclass(frozen=True, slots=True)
class SeriesResult:
    """The series: its members, the shared scales, and the index files written."""

    name: str
    members: tuple[SeriesMember, ...]
    scales: Mapping[str, Mapping[str, Any]]
    index: Path
    record: Path

    @property
    def passed(self) -> bool:
        return all(m.passed is not False for m in self.members)


def _quantile_ramps(style, ramps) -> dict[str, list]:
    """Ramp name -> the field layers of ``style`` drawing it with pending quantile steps."""
    out: dict[str, list] = {}
    for spec in style.layers:
        name = getattr(spec.options, "ramp", None)
        if name is None or name not in ramps or spec.kind != "field":
            continue
        ramp = ramps[name]
        if ramp.steps is not None and ramp.step_method == "quantile" and ramp.breaks is None:
            out.setdefault(name, []).append(spec)
    return out


def shared_scales(styles: Sequence) -> dict[str, dict[str, Any]]:
    """The scales every member shares: ramp name -> {kind, domain, breaks (or None), source}.

    Quantile breaks are computed from the pooled values of all members' layers that draw the ramp.
    """
    from compose.engine import preview_canvas
    from compose.ramps import build_ramps
    from compose.ramps.lut import quantile_breaks
    from compose.sources.raster import RasterSource

    first = build_ramps(styles[0].ramps)
    used = {getattr(l.options, "ramp", None) for s in styles for l in s.layers} - {None}
    scales: dict[str, dict[str, Any]] = {}
    pooled: dict[str, list[np.ndarray]] = {}
    for style in styles:
        ramps = build_ramps(style.ramps)
        canvas = preview_canvas(style.canvas(), SAMPLE_SIDE)
        for name, layers in _quantile_ramps(style, ramps).items():
            for spec in layers:
                with RasterSource(spec.source, spec.options.band, layer=spec.name) as src:
                    values = src.read(canvas.crs, canvas.transform, canvas.width, canvas.height,
                                      spec.options.resampling)
                pooled.setdefault(name, []).append(values[np.isfinite(values)])
    for name in sorted(used):
        ramp = first.get(name)
        if ramp is None or ramp.kind == "qualitative":
            continue
        entry: dict[str, Any] = {"kind": ramp.kind, "domain": [float(v) for v in ramp.domain],
                                 "breaks": None, "from": "the style"}
        if name in pooled:
            edges = quantile_breaks(np.concatenate(pooled[name]), ramp.steps, ramp.domain, name)
            entry["breaks"] = [float(v) for v in edges[1:-1]]
            entry["from"] = f"quantiles of {len(pooled[name])} layer reads over the series"
        elif ramp.breaks is not None:
            entry["breaks"] = [float(v) for v in ramp.breaks]
        scales[name] = entry
    return scales


def apply_scales(ramps: Mapping, scales: Mapping[str, Mapping[str, Any]]) -> dict:
    """``ramps`` with the shared quantile breaks fixed (so no layer computes its own)."""
    out = dict(ramps)
    for name, entry in scales.items():
        ramp = out.get(name)
        if ramp is None or entry.get("breaks") is None or ramp.breaks is not None:
            continue
        if ramp.steps is not None and ramp.step_method == "quantile":
            out[name] = dataclasses.replace(ramp, breaks=tuple(entry["breaks"]), steps=None)
    return out


def _render_member(path: str, overrides: tuple, variables: dict, out_dir: str, overwrite: bool,
                   scales: dict, limits: Any) -> dict:
    """Worker: load one member, fix the shared scales, render it; plain data in and out."""
    from compose.limits import use_limits
    from compose.ramps import build_ramps
    from compose.render import render_style
    from compose.style import load_style

    with use_limits(limits):
        style = load_style(path, overrides=overrides, variables=variables)
        ramps = apply_scales(build_ramps(style.ramps), scales)
        result = render_style(style, Path(out_dir), overwrite=overwrite, ramps=ramps)
    passed = None if result.report is None else bool(result.report.passed)
    return {"variables": variables, "name": style.name, "title": style.map.title,
            "outputs": {k: str(v) for k, v in result.outputs.items()}, "passed": passed,
            "seconds": float(result.seconds.get("total", 0.0))}


def _index_html(name: str, members: Sequence[SeriesMember], scales: Mapping, out_dir: Path) -> str:
    from compose.caution import CAUTION

    esc = html.escape
    cells = []
    for m in members:
        png = Path(m.outputs.get("png", ""))
        rel = os.path.relpath(png, out_dir) if png.name else ""
        page = Path(m.outputs.get("html", ""))
        link = os.path.relpath(page, out_dir) if page.name else rel
        verdict = {True: "check passed", False: "check FAILED", None: "not checked"}[m.passed]
        values = ", ".join(f"{k} = {v}" for k, v in m.variables.items())
        cells.append(f'<figure><a href="{esc(link)}"><img src="{esc(rel)}" alt="{esc(m.title)}" '
                     f'width="360"></a><figcaption><b>{esc(values)}</b><br>{esc(m.title)}<br>'
                     f"{verdict}</figcaption></figure>")
    rows = "".join(
        f"<tr><td>{esc(n)}</td><td>{esc(e['kind'])}</td><td>{e['domain'][0]:g} to "
        f"{e['domain'][1]:g}</td><td>{esc(', '.join(f'{b:.6g}' for b in e['breaks']) if e['breaks'] else '-')}"
        f"</td><td>{esc(e['from'])}</td></tr>" for n, e in scales.items())
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>{esc(name)}: series</title>
<style>body{{font-family:sans-serif;max-width:80rem;margin:1rem auto;padding:0 1rem}}
.members{{display:flex;flex-wrap:wrap;gap:1rem}}figure{{margin:0;width:360px}}
td,th{{padding:.2rem .6rem;text-align:left}}</style></head>
<body><h1>{esc(name)}: {len(members)} members on shared scales</h1>
<p role="note">{esc(CAUTION)}</p>
<div class="members">{"".join(cells)}</div>
<h2>Shared scales</h2>
<p>Every member is drawn with these ramp domains and class breaks, so equal values have equal
colours across the series (also recorded in {esc(name)}.series.json).</p>
<table><tr><th>ramp</th><th>kind</th><th>domain</th><th>breaks</th><th>from</th></tr>{rows}</table>
</body></html>
"""


def style_from(style: Path, folder: Path) -> str:
    """The style file's path as NAME.series.json in ``folder`` records it: relative to
    ``folder`` ('/' between names, '..' to step out of it), both paths resolved first (symbolic
    links followed, so '..' means the real parent), so a folder moved or published together
    with its style still finds it; its absolute path where no relative one exists (on Windows,
    a style on another drive)."""
    real = Path(style).resolve()
    try:
        return Path(os.path.relpath(real, Path(folder).resolve())).as_posix()
    except ValueError:                      # no path from one drive to another
        return str(real)


def _record(member: SeriesMember, folder: Path) -> dict:
    """A member as NAME.series.json in ``folder`` keeps it: everything but its seconds, its
    outputs' paths relative to ``folder`` with '/' between names, so the same series gives the
    same bytes on every run and in every folder (compose.page.dates)."""
    out = dataclasses.asdict(member)
    out.pop("seconds")
    out["outputs"] = {kind: Path(os.path.relpath(p, folder)).as_posix()
                      for kind, p in member.outputs.items()}
    return out


def render_series(path: Path, out_dir: Path, *, overrides: Sequence = (), overwrite: bool = False,
                  workers: int | None = None) -> SeriesResult:
    """Render every member of the series declared by the style at ``path`` (see module doc)."""
    from compose.limits import current_limits
    from compose.output.atomic import atomic_path, check_writable
    from compose.style import load_style

    base = load_style(path, overrides=overrides)
    if not base.series:
        raise StyleError(f"{path}: no [series] table; declare variables, e.g. "
                         '[series] date = ["2024-04", "2024-05"]')
    styles = [load_style(path, overrides=overrides, variables=dict(m)) for m in base.series]
    names = [s.name for s in styles]
    if len(set(names)) != len(names):
        raise StyleError(f"{path}: series members share an output name; use the variables in map.name")
    out_dir = Path(out_dir)
    # the series' own name: map.name without its variables' placeholders, else the file stem
    series_name = base.name if "{" not in base.name else Path(path).stem
    index, record = out_dir / f"{series_name}.series.html", out_dir / f"{series_name}.series.json"
    check_writable([index, record], overwrite)
    scales = shared_scales(styles)
    jobs = [(str(Path(path).resolve()), tuple(overrides), dict(m), str(out_dir), overwrite, scales,
             current_limits()) for m in base.series]
    n = max(1, min(workers or (os.cpu_count() or 1), len(jobs)))
    if n == 1:
        done = [_render_member(*job) for job in jobs]
    else:
        with ProcessPoolExecutor(max_workers=n, mp_context=get_context("spawn")) as pool:
            done = list(pool.map(_render_member, *zip(*jobs)))
    members = tuple(SeriesMember(**d) for d in done)
    with atomic_path(record) as tmp:
        tmp.write_text(json.dumps({"series": series_name, "style": style_from(base.path, out_dir),
                                   "scales": scales,
                                   "members": [_record(m, out_dir) for m in members]},
                                  indent=2, default=dict))
    with atomic_path(index) as tmp:
        tmp.write_text(_index_html(series_name, members, scales, out_dir), encoding="utf-8")
    return SeriesResult(series_name, members, scales, index, record)
