"""NAME.html: one self-contained proof page per map, for review before a map is published.

Everything is inline: images as ``data:`` URIs, the style sheet in a ``<style>`` element, no
scripts, no fonts or files from anywhere else (a Content-Security-Policy meta element forbids
the browser to fetch any). Sections: the map with its legend and the check's headline verdict;
the check results (``<table id="check-results">``, one ``<tr>`` per rule result, failures, then
warnings, then passes); the map beside its grey and colour-vision proofs; every layer alone and
the stack built up layer by layer, each with its L* / C* numbers drawn against its budget; each
ramp used (:func:`compose.ramps.figure.ramp_figure`); the style file itself; the caution.

The page is a pure function of a render's results (:func:`page_html`): the pictures gathered
during the render's one walk (:class:`compose.output.html_images.PagePictures`: the map copy,
each layer alone and stacked, the proofs, the legend), its statistics, report and ramps.
Nothing is rendered again and no file is read. Budget plots come from the render's statistics.
"""
from __future__ import annotations

import html
import math
from contextvars import ContextVar
from pathlib import Path
from typing import Any

from compose.caution import CAUTION
from compose.color.interface import MARKS
from compose.output.html_css import CSS
from compose.output.html_images import (
    JPEG_QUALITY,
    PREVIEW_QUALITY,
    PROOF_WIDTH,
    box_reduce,
    jpeg_uri,
    png_uri,
)

__all__ = ["write_html", "page_html", "html_path", "sorted_results", "ramps_section",
           "shown_path", "legend_width"]

CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
PROOF_TITLES = {"map": "Map as drawn", "gray": "Grey (same CIELAB L*)",
                "deutan": "Deutan (Machado 2009, 100 %)", "protan": "Protan (Machado 2009, 100 %)",
                "tritan": "Tritan (Machado 2009, 100 %)"}
#: Rules whose numbers a layer's budget plot draws (its verdict colours the plot).
BUDGET_RULES = ("ground-lightness", "ground-chroma", "reserved-saturation", "theme-chroma",
                "theme-chroma-min", "overlay-contrast", "label-contrast", "overlay-size")
esc = html.escape
#: JPEG encodes started before the page's text is built: (id of the image, quality) -> future
_JPEGS: ContextVar[dict | None] = ContextVar("compose_html_jpegs", default=None)


def _jpeg(img, quality: int = JPEG_QUALITY) -> str:
    """:func:`jpeg_uri` of ``img``, from the encodes :func:`page_html` started when it is one."""
    started = _JPEGS.get()
    future = started.get((id(img), quality)) if started is not None else None
    return future.result() if future is not None else jpeg_uri(img, quality)


class _Made:
    """A JPEG URI made before the page, looked up as the encodes started here are."""

    __slots__ = ("uri",)

    def __init__(self, uri: str):
        self.uri = uri

    def result(self) -> str:
        return self.uri


def shown_path(path, folder: Path | None) -> str:
    """How the review page names the file ``path`` (the style): relative to ``folder`` (the
    page's own folder, '/' between names) when the file lies inside it, else its name alone, so
    the page, which is made to be passed on, tells nothing of the folders around the output
    folder (no home folder, no user name)."""
    real = Path(path).resolve()
    if folder is not None:
        try:
            return real.relative_to(Path(folder).resolve()).as_posix()
        except ValueError:                  # not inside the page's folder
            pass
    return real.name


def legend_width(png: bytes) -> int:
    """The CSS width (px) of the legend image ``png`` (a PNG of
    :data:`compose.output.legend_layout.DPI` pixels per inch) at which its label type
    (:data:`~compose.output.legend_layout.FONT` points) shows at the page's body text size
    (:data:`compose.output.html_css.BODY_PX`): 486 px for the 720 px legend at 200 dpi. It
    showed at half its pixels (360 px), its 8 pt labels 11 px tall beside 15 px text."""
    from compose.output.html_css import BODY_PX
    from compose.output.legend_layout import DPI, FONT

    width = int.from_bytes(png[16:20], "big")          # the IHDR chunk's width (PNG, 11.2.2)
    return round(width / DPI * 72.0 / FONT * BODY_PX)


def html_path(style, out_dir: Path) -> Path:
    """Where the page of ``style`` goes: ``out_dir/NAME.html``."""
    return Path(out_dir) / f"{style.name}.html"


# --- formatting ------------------------------------------------------------------------------

def _num(v) -> str:
    if v is None:
        return "–"
    if isinstance(v, (list, tuple)):
        return " – ".join(_num(x) for x in v)
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, bool) or isinstance(v, str):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            return "n/a"
        if v.is_integer() and abs(v) < 1e6:
            return f"{v:.0f}"
        return f"{v:.3g}" if abs(v) < 10 else f"{v:.1f}"
    return str(v)


#: How a rule's unit (compose.check.catalog) follows its numbers in the check table: a share
#: (0-1) is shown in per cent; a symbol after a space, the degree sign without one (SI Brochure,
#: 9th ed., BIPM 2019, 5.4.3 and 5.4.7); counts and Spearman's rho have no unit.
_UNIT_TEXT = {"share": " %", "%": " %", "degrees": "\u00b0", "L*": " L*", "C*ab": " C*ab",
              "dE00": " dE00"}
_COMPARISON = {">=": "\u2265 ", "<=": "\u2264 "}


def _with_unit(v, unit: str, share_digits: int | None = None) -> str:
    """``v`` (a number, a [low, high] pair or None) with its unit: shares as per cent,
    ``share_digits`` decimals when given (measured values), else as :func:`_num` writes them."""
    if v is None:
        return "\u2013"
    if isinstance(v, (list, tuple)):
        return " \u2013 ".join(_with_unit(x, "", share_digits) if unit != "share" else
                                _with_unit(x, unit, share_digits).removesuffix(" %")
                                for x in v) + _UNIT_TEXT.get(unit, "")
    if hasattr(v, "item"):
        v = v.item()
    if unit == "share" and isinstance(v, (int, float)) and not isinstance(v, bool):
        if not math.isfinite(v):
            return "n/a"
        text = f"{v * 100:.{share_digits}f}" if share_digits is not None else _num(v * 100.0)
        return text + " %"
    text = _num(v)
    return text if text in ("n/a", "\u2013") else text + _UNIT_TEXT.get(unit, "")


def measured_text(r) -> str:
    """The check table's "measured" cell of rule result ``r``: its value with its unit."""
    return _with_unit(r.value, r.unit, share_digits=1)


def limit_text(r) -> str:
    """The check table's "limit" cell of ``r``: how the value must compare, the limit, its
    unit ("\u2265 95 %", "\u2264 12 C*ab", "55 \u2013 98 L*")."""
    if r.limit is None:
        return "\u2013"
    text = _with_unit(r.limit, r.unit)
    return _COMPARISON.get(r.comparison, "") + text if not isinstance(r.limit, (list, tuple)) \
        else text


def _rank(r) -> int:
    if not r.passed:
        return 0
    return 1 if (r.severity == "warning" and not r.met) else 2


def sorted_results(report) -> list:
    """Rule results: failures first, then warnings, then passes (each in rule order)."""
    return sorted(report.rules, key=_rank)


def _row_class(r) -> str:
    return ("fail", "warn", "pass")[_rank(r)]


def _trip(t) -> str:
    return " / ".join("n/a" if v != v else f"{v:.1f}" for v in t)


# --- sections --------------------------------------------------------------------------------

def _headline(report) -> str:
    if report is None:
        return '<div class="verdict none"><strong>Not checked</strong></div>'
    fails, warns = report.failures, report.warnings
    n = len(report.rules)
    word = "PASSED" if report.passed else "FAILED"
    cls = "pass" if report.passed else "fail"
    text = (f"{len(fails)} of {n} rule results fail, {len(warns)} warning(s)" if fails
            else f"all {n} rule results pass, {len(warns)} warning(s)")
    items = "".join(f"<li><code>{esc(r.rule)}</code> {esc(r.layer or r.ramp or '')}: "
                    f"{esc(r.fix or r.message)}</li>" for r in list(fails)[:6])
    more = f'<li class="muted">… and {len(fails) - 6} more</li>' if len(fails) > 6 else ""
    listing = f"<ul>{items}{more}</ul>" if items else ""
    return (f'<div class="verdict {cls}" id="verdict"><strong>{MARKS[cls]} Check {word}</strong>'
            f"<span>{esc(text)}</span>{listing}</div>")


def _check_table(report) -> str:
    if report is None:
        return '<p class="note">No statistics were gathered, so the map was not checked.</p>'
    from compose.check import describe

    about = describe()
    rows = []
    for r in sorted_results(report):
        if r.layer and r.ramp:
            subject = f'{esc(r.layer)} <span class="muted">(ramp {esc(r.ramp)})</span>'
        else:
            subject = esc(r.layer or (f"ramp {r.ramp}" if r.ramp else "–"))
        sev = "" if r.severity == "failure" else ' <span class="muted">(warning only)</span>'
        rows.append(
            f'<tr class="{_row_class(r)}"><td class="rule"><code title="{esc(about.get(r.rule, ""))}">'
            f'{esc(r.rule)}</code>{sev}<div class="msg">{esc(r.message)}</div></td>'
            f'<td>{subject}</td><td class="num" data-label="measured">{esc(measured_text(r))}</td>'
            f'<td class="num" data-label="limit">{esc(limit_text(r))}</td>'
            f'<td class="verdict-cell"><span class="v">{esc(r.verdict)}</span></td>'
            f'<td class="fix">{esc(r.fix) if r.fix else "<span class=muted>–</span>"}</td></tr>')
    head = ("<thead><tr><th>rule</th><th>layer</th><th>measured</th><th>limit</th><th>verdict</th>"
            "<th>fix</th></tr></thead>")
    return (f'<table id="check-results">{head}<tbody>{"".join(rows)}</tbody></table>'
            '<p class="note">Shares in per cent of the pixels judged. The source of each limit is '
            "in the message under the rule; hover a rule name for what it measures.</p>")


def _figure(uri: str, caption: str, alt: str, cls: str = "", figure_cls: str = "") -> str:
    c = f' class="{cls}"' if cls else ""
    f = f' class="{figure_cls}"' if figure_cls else ""
    return (f'<figure{f}><img{c} src="{uri}" alt="{esc(alt)}">'
            f"<figcaption>{caption}</figcaption></figure>")


def _proofs_section(map_small, proofs: dict, report) -> str:
    """``map_small``: the map copy reduced to at most :data:`PROOF_WIDTH` wide; ``proofs``: the
    proofs of it."""
    from compose.check.catalog import PROOF_RULES

    cells = [_figure(_jpeg(map_small), esc(PROOF_TITLES["map"]), "the map")]
    for k, img in proofs.items():
        cells.append(_figure(_jpeg(box_reduce(img, PROOF_WIDTH)), esc(PROOF_TITLES[k]),
                             f"{k} proof of the map"))
    notes = ""
    if report is not None:
        lines = [f'<li class="{_row_class(r)}"><span class="v">{esc(r.verdict)}</span> '
                 f"<code>{esc(r.rule)}</code> {esc(r.layer or '')}: {esc(r.message)}</li>"
                 for r in report.rules if r.rule in PROOF_RULES]
        if lines:
            notes = f'<ul class="proof-rules">{"".join(lines)}</ul>'
    return (f'<div class="proofs">{"".join(cells)}</div><p class="note">Proofs computed from '
            "the page's copy of the map (same transforms as the proof files). "
            "Grey keeps each pixel's CIELAB L*; the colour-vision proofs simulate dichromacy "
            "(Machado, Oliveira &amp; Fernandes 2009, severity 100; the tritan matrix is an "
            f"approximation).</p>{notes}")


def _layer_numbers(summary, spec, unplaced) -> str:
    if summary is None:
        return ""
    parts = [f"<span>coverage {summary.coverage:.1%}</span>",
             f"<span>L* p5/p50/p95 {_trip(summary.lightness)}</span>",
             f"<span>C* p5/p50/p95 {_trip(summary.chroma)}</span>"]
    if summary.beneath:
        parts.append(f"<span>beneath L* {_trip(summary.beneath)}</span>")
    if summary.contrast_share is not None and summary.contrast_share == summary.contrast_share:
        parts.append(f"<span>contrast share {summary.contrast_share:.1%}</span>")
    if unplaced:
        parts.append(f"<span>{len(unplaced)} label(s) not placed: {esc(', '.join(unplaced[:12]))}"
                     f"{' …' if len(unplaced) > 12 else ''}</span>")
    return f'<p class="numbers">{"".join(parts)}</p>'


def _layers_section(previews, style, result, report, ramps) -> str:
    stats = result.statistics
    ctx = None
    if stats is not None:
        from compose.check import CheckContext
        ctx = CheckContext.build(style, stats, ramps)
    summaries = {s.name: s for s in (report.layers if report is not None else ())}
    cards = []
    names = [spec.name for spec, _, _ in previews]
    for i, (spec, alone, stack) in enumerate(previews):
        results = [r for r in (report.rules if report is not None else ()) if r.layer == spec.name]
        passed = all(r.passed for r in results) if results else None
        verdict = ("" if passed is None else
                   f'<span class="tag {"pass" if passed else "fail"}">'
                   + (f'{MARKS["pass"]} all rules pass' if passed else f'{MARKS["fail"]} fails '
                      + ", ".join(sorted({r.rule for r in results if not r.passed}))) + "</span>")
        ramp = getattr(spec.options, "ramp", None)
        tags = [spec.role, spec.kind, f"blend {spec.blend}"]
        if spec.opacity < 1:
            tags.append(f"opacity {spec.opacity:g}")
        if ramp:
            tags.append(f"ramp {ramp}")
        tag_html = "".join(f'<span class="tag">{esc(t)}</span>' for t in tags)
        first = " (the first layer: the stack so far)" if i == 0 else ""
        cells = [_figure(_jpeg(alone, PREVIEW_QUALITY),
                         f"{esc(spec.name)} alone over the background{first}",
                         f"{spec.name} alone", "frame")]
        if i > 0:
            cells.append(_figure(_jpeg(stack, PREVIEW_QUALITY),
                                 f"layers 1–{i + 1}: " + esc(" + ".join(names[:i + 1])),
                                 f"stack up to {spec.name}", "frame"))
        s = None
        if stats is not None:
            try:
                s = stats.layer(spec.name)
            except KeyError:
                s = None
        if s is not None and ctx is not None:
            from compose.output.html_plots import budget_svg
            from compose.output.svg import svg_uri
            what = ("contrast against what lies beneath" if spec.role == "overlay"
                    else "L* and C* against the budget")
            mine = [r for r in results if r.rule in BUDGET_RULES]
            ok = all(r.passed for r in mine) if mine else None
            cells.append(_figure(svg_uri(budget_svg(spec, s, ctx, ok)), esc(what),
                                 f"budget plot of {spec.name}", figure_cls="plot"))
        unplaced = (result.unplaced_labels or {}).get(spec.name, [])
        cards.append(f'<article class="layer" id="layer-{i + 1}"><header><h3>{i + 1}. '
                     f"{esc(spec.name)}</h3>{tag_html}{verdict}"
                     f'<span class="muted">{esc(Path(spec.source).name)}</span></header>'
                     f'<div class="cells">{"".join(cells)}</div>'
                     f"{_layer_numbers(summaries.get(spec.name), spec, unplaced)}</article>")
    return "".join(cards)


def _ramp_users(style, ramps) -> list[tuple[Any, list[str]]]:
    """(ramp, names of the drawn layers using it or its twins) per ramp drawn, in layer order."""
    drawn = [(spec, ramps.get(getattr(spec.options, "ramp", None) or "")) for spec in style.layers
             if spec.enabled]
    drawn = [(spec, r) for spec, r in drawn if r is not None]
    shown: set[str] = set()
    out = []
    for _, ramp in drawn:
        if ramp.name in shown:
            continue
        family = {ramp.name} | set(ramp.matched)
        out.append((ramp, [spec.name for spec, r in drawn if r.name in family]))
        shown |= family
    return out


def ramps_section(style, ramps) -> str:
    """The page's ramps section: a pure function of the style and its built ramps (the page
    process makes it while the map is walked, :class:`compose.page.process.PageJob`)."""
    from compose.output.html_plots import ramp_svg
    from compose.output.svg import svg_uri

    figs = []
    for ramp, users in _ramp_users(style, ramps):
        figs.append(_figure(svg_uri(ramp_svg(ramp, ramp.lut())),
                            f"ramp <code>{esc(ramp.name)}</code>, drawn by {esc(', '.join(users))}",
                            f"ramp {ramp.name}"))
    if not figs:
        return '<p class="note">No layer draws through a ramp.</p>'
    return (f'<div class="ramps">{"".join(figs)}</div><p class="note">Each ramp\'s colours as '
            "drawn, with L* and C*ab along the data value. The full diagnostic figure (proofs, "
            "evenness, differences, rule results): <code>compose ramp NAME --plot FILE</code>.</p>")


def ground_unit(crs) -> str:
    """The unit of ``crs``'s coordinates for a pixel size: "m" for a projected CRS in metres,
    the unit's name for another projected one (as GDAL names it), the degree sign for a
    geographic one, "CRS units" when GDAL cannot say."""
    from compose.sources.crs import rio_crs

    parsed = rio_crs(crs)
    if parsed is None:
        return " CRS units"
    if parsed.is_geographic:
        return "\u00b0"
    try:
        name, factor = parsed.linear_units_factor
    except Exception:           # CRSError: GDAL names no linear unit
        return " CRS units"
    return " m" if float(factor) == 1.0 else f" {name}"


def _style_shown(style, result) -> str:
    """The style's path as the page shows it: :func:`shown_path` from the page's folder."""
    page = (result.outputs or {}).get("html")
    return shown_path(style.path, Path(page).parent if page is not None else None)


def _facts(style, result) -> str:
    plan = style.canvas_plan()      # the grid as drawn (like, width, extent_crs resolved)
    grid = plan.canvas
    rows = [("style", _style_shown(style, result)), ("canvas", f"{result.width} × {result.height} px"),
            ("CRS", grid.crs), ("extent", ", ".join(f"{v:.10g}" for v in grid.bounds)
                                + f"  (W, S, E, N; {ground_unit(grid.crs).strip()})"),
            ("pixel", f"{grid.pixel:g}{ground_unit(grid.crs)}"),
            # a page's print scale makes the dpi a fraction (1500 px over 155.6 mm): whole dots
            ("dpi", f"{grid.dpi:.0f}" if grid.dpi >= 10 else f"{grid.dpi:.2g}")]
    rows += [("note", note) for note in plan.notes]
    if len(style.chain) > 1:
        rows.append(("extends", " → ".join(Path(p).name for p in style.chain)))
    if result.outputs:
        rows.append(("files", ", ".join(Path(p).name for p in result.outputs.values())))
    # no render time (nor date): the page is the same bytes whenever the same style and data
    # are rendered (compose.page.dates); the command prints the time
    return '<dl class="facts">' + "".join(f"<dt>{esc(k)}</dt><dd>{esc(str(v))}</dd>"
                                           for k, v in rows) + "</dl>"


# --- the page --------------------------------------------------------------------------------

def page_html(style, result) -> str:
    """The review page of a render as HTML text: a pure function of ``style`` and ``result``
    (the :class:`compose.render.RenderResult`, with its ``pictures``, ``report``,
    ``statistics`` and ``ramps``)."""
    pictures = result.pictures
    if pictures is None:
        raise ValueError("the render kept no pictures for a page (render with html=True)")
    # the JPEG encodes (Pillow lets other threads run while it encodes) go first, on two
    # threads, while this one builds the rest of the page
    from concurrent.futures import ThreadPoolExecutor

    small = pictures.small if pictures.small is not None else box_reduce(pictures.map, PROOF_WIDTH)
    jpegs = [(pictures.map, JPEG_QUALITY), (small, JPEG_QUALITY)]
    jpegs += [(box_reduce(img, PROOF_WIDTH), JPEG_QUALITY) for img in pictures.proofs.values()]
    for i, (_, alone, stack) in enumerate(pictures.layers):   # the first layer: alone only
        jpegs += [(alone, PREVIEW_QUALITY)] + ([(stack, PREVIEW_QUALITY)] if i else [])
    made = pictures.jpegs or {}         # encoded already (by compose.output.html_images.PicturesJob)
    with ThreadPoolExecutor(2, thread_name_prefix="page-jpeg") as pool:
        started: dict = {key: _Made(uri) for key, uri in made.items()}
        started.update({(id(img), q): pool.submit(jpeg_uri, img, q) for img, q in jpegs
                        if (id(img), q) not in made})
        token = _JPEGS.set(started)
        try:
            return _page_html(style, result, small)
        finally:
            _JPEGS.reset(token)


def _page_html(style, result, small) -> str:
    pictures = result.pictures
    ramps = result.ramps
    report = result.report
    specs = {spec.name: spec for spec in style.layers}
    previews = [(specs[name], alone, stack) for name, alone, stack in pictures.layers]
    legend_img = (f'<img src="{png_uri(pictures.legend)}" alt="legend">' if pictures.legend
                  else '<p class="note">No legend was drawn.</p>')
    # the legend's column as wide as shows its type at the body's size (a custom property the
    # style sheet reads: the column, and the figure's width in one column)
    legend_css = (f' style="--legend: {legend_width(pictures.legend)}px"' if pictures.legend
                  else "")
    ramps_html = pictures.ramps if pictures.ramps is not None else ramps_section(style, ramps)
    preview = pictures.map
    proofs = pictures.proofs
    title = style.map.title or style.name
    grid = style.canvas()
    # a small map is enlarged on screen: show its pixels rather than a blur
    pixelated = ' style="image-rendering: pixelated"' if preview.shape[1] < 500 else ""
    nav = "".join(f'<a href="#{a}">{t}</a>' for a, t in (
        ("map", "Map"), ("check", "Check"), ("proofs", "Proofs"), ("layers", "Layers"),
        ("ramps", "Ramps"), ("style-file", "Style file")))
    body = f"""<header>
<h1>{esc(title)}</h1>
<p class="sub">Proof page of <code>{esc(style.name)}</code> · {result.width} × {result.height} px ·
{esc(grid.crs)} · {esc(f"{grid.pixel:g}{ground_unit(grid.crs)}")} per pixel</p>
<p class="caution" role="note">{esc(CAUTION)}</p>
{_headline(report)}
</header>
<nav>{nav}</nav>
<section id="map"><h2>Map and legend</h2>
<div class="map-grid"{legend_css}><figure><img class="map" src="{_jpeg(preview)}" alt="the map"{pixelated}>
<figcaption>The map as written{'' if preview.shape[1] >= result.width else
f', box-averaged to {preview.shape[1]} × {preview.shape[0]} px'}.</figcaption></figure>
<figure class="legend">{legend_img}<figcaption>Legend ({esc(style.name)}.legend.png)
</figcaption>{_facts(style, result)}</figure></div></section>
<section id="check"><h2>Check results</h2>{_check_table(report)}</section>
<section id="proofs"><h2>Grey and colour-vision proofs</h2>
{_proofs_section(small, proofs, report)}</section>
<section id="layers"><h2>Layers, alone and stacked</h2>
<p class="note">Each layer alone over the background, the stack built up to it (drawing order,
lowest first), and where its pixels fall against its budget. Previews at
{previews[0][1].shape[1] if previews else 0} px wide.</p>
{_layers_section(previews, style, result, report, ramps)}</section>
<section id="ramps"><h2>Ramps</h2>{ramps_html}</section>
<section id="style-file"><h2>Style file</h2><p class="note">{esc(_style_shown(style, result))}</p>
<pre>{esc(style.text)}</pre></section>
<footer><p class="caution" role="note">{esc(CAUTION)}</p>
<p>Written by compose. All images and styles are inside this file.</p></footer>"""
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta http-equiv="Content-Security-Policy" content="{CSP}">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{esc(title)} – proof</title><style>{CSS}</style></head>\n"
            f"<body>\n{body}\n</body></html>\n")


def write_html(style, result, out_dir: Path) -> Path:
    """Write ``out_dir/NAME.html`` (through a temporary file renamed into place); returns its path.

    ``result`` is the :class:`compose.render.RenderResult` of ``style`` rendered into ``out_dir``.
    """
    from compose.output.atomic import atomic_path

    path = html_path(style, out_dir)
    text = page_html(style, result)
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return path
