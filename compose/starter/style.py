"""A commented starter style from inspected data files, and the reasons for each choice.

Rules (our own starting points, common practice, no source):

* a DEM becomes a ``relief`` (ground) layer: a raster whose name says elevation (elev, dem, dtm,
  dsm, height, terrain, topo) or, failing that, the non-class raster whose values look like
  heights in metres (range >= 100, within -500 .. 9000) on a projected grid;
* an integer raster with 2 to :data:`QUALITATIVE_MAX` distinct values becomes ``classes`` on a
  qualitative ramp (colours from the library's ``cover`` ramp, in order);
* signed data (p2 < 0 < p98) becomes a ``field`` on a diverging ramp centred on 0, its domain
  symmetric around 0 and reaching the larger of |p2| and |p98|, rounded outward;
* any other raster a ``field`` on a sequential ramp from p2 to p98, rounded outward;
* vector tables become overlays with halos: lines, areas (outlines), points, and labels for
  points with a name-like text attribute;
* the canvas is the grid of the DEM (else the first theme) through ``like``, at most
  :data:`MAX_WIDTH` pixels across; with vectors only, their joint extent, :data:`MAX_WIDTH` wide.

Only the first theme is enabled (two opaque themes would hide each other); the others are written
with ``enabled = false``. Ramp stops are copied from the library so the style states every colour
it uses and the user can edit them in place.
"""
from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

from compose.errors import ComposeError
from compose.starter.inspect import RasterFacts, VectorFacts

__all__ = ["Choice", "Starter", "starter_style", "nice_outward", "QUALITATIVE_MAX", "MAX_WIDTH"]

QUALITATIVE_MAX = 8
MAX_WIDTH = 2000
_DEM_WORDS = re.compile(r"(elev|dem|dtm|dsm|height|terrain|topo|altitude|srtm)", re.I)
_WATER_WORDS = re.compile(r"(river|stream|water|coast|shore|lake|sea|canal|creek|hydro)", re.I)
# map colours of the starter, CIE LCh(ab) (our own choices, as in the demo styles)
_PAPER = "{ L = 98, C = 1.5, h = 90 }"        # halos: a warm near-white
_BACKGROUND = "{ L = 97, C = 1.5, h = 90 }"   # under the first layer
_BACKGROUND_NEUTRAL = "{ L = 97, C = 0, h = 90 }"
_TINT = "tint     = { L = 95, C = 3, h = 85 }"  # the relief's warm light tint
_TINT_NEUTRAL = "tint     = { L = 95, C = 0, h = 85 }"
_INK = "{ L = 18, C = 0, h = 0 }"             # point markers
_TEXT = "{ L = 14, C = 0, h = 0 }"            # label text
_WHITE = "{ L = 100, C = 0, h = 0 }"          # marker edges and label halos
_NAME_FIELDS = ("name", "label", "title", "nom", "nombre", "name_en")
_RANK_FIELDS = ("population", "pop", "rank", "priority", "size", "importance")


@dataclass(frozen=True, slots=True)
class Choice:
    """One decision: the file (and table), what it became, and why."""

    source: str
    became: str
    why: str


@dataclass(frozen=True, slots=True)
class Starter:
    """The style text and the decisions behind it."""

    text: str
    choices: tuple[Choice, ...]


def nice_outward(lo: float, hi: float) -> tuple[float, float]:
    """[lo, hi] widened to round numbers: multiples of a 1-2-5 step of about a tenth of the span."""
    span = hi - lo
    if not span > 0:
        span = abs(hi) or 1.0
        lo, hi = lo - span / 2, hi + span / 2
    raw = span / 10.0
    mag = 10 ** math.floor(math.log10(raw))
    step = next(s * mag for s in (1, 2, 5, 10) if s * mag >= raw)
    return math.floor(lo / step) * step, math.ceil(hi / step) * step


def _num(v: float) -> str:
    return f"{v:.6g}"


def _lch_text(stop) -> str:
    if isinstance(stop, str):
        return f'"{stop}"'
    return "{ " + ", ".join(f"{k} = {_num(float(stop[k]))}" for k in ("L", "C", "h")) + " }"


def _rel(path: Path, folder: Path) -> str:
    try:
        return Path(os.path.relpath(path.resolve(), folder.resolve())).as_posix()
    except ValueError:        # another drive
        return path.resolve().as_posix()


def _layer_name(path: Path, used: set[str], table: str | None = None) -> str:
    base = (table or path.stem).replace("_", " ").replace("-", " ").strip() or "layer"
    name, i = base, 2
    while name in used:
        name, i = f"{base} {i}", i + 1
    used.add(name)
    return name


def _is_dem(f: RasterFacts) -> bool:
    return (not f.classes and f.linear_units is not None and f.maximum - f.minimum >= 100
            and f.minimum >= -500 and f.maximum <= 9000)


def _pick_dem(rasters: list[RasterFacts]) -> RasterFacts | None:
    named = [f for f in rasters if _DEM_WORDS.search(f.path.stem) and not f.classes]
    if named:
        return named[0]
    plausible = [f for f in rasters if _is_dem(f)]
    return max(plausible, key=lambda f: f.maximum - f.minimum) if plausible else None


def _library(name: str):
    from compose.style.load import library_tables
    return library_tables()[name].table


def _diverging(f: RasterFacts) -> bool:
    """True when :func:`_ramp_text` gives ``f`` a diverging ramp (signed values, not classes)."""
    return bool(f.signed) and not (f.classes and 2 <= len(f.classes) <= QUALITATIVE_MAX)


def _ramp_text(name: str, f: RasterFacts) -> tuple[str, str, str]:
    """(ramp table text, layer kind, reason) for a theme raster."""
    if f.classes and 2 <= len(f.classes) <= QUALITATIVE_MAX:
        colors = [c["color"] for c in _library("cover")["classes"]]
        rows = "\n".join(f'  {{ value = {_num(v)}, label = "class {_num(v)}", '
                         f"color = {_lch_text(colors[i])} }}," for i, v in enumerate(f.classes))
        text = (f"# {len(f.classes)} classes; name them in 'label' (the legend shows them)\n"
                f'[ramp.{name}]\nkind    = "qualitative"\nclasses = [\n{rows}\n]\n')
        why = (f"{f.dtype} with {len(f.classes)} distinct values "
               f"({', '.join(_num(v) for v in f.classes)}): classes, qualitative ramp")
        return text, "classes", why
    p2, _, p98 = f.percentiles
    if _diverging(f):
        m = max(nice_outward(0, max(abs(p2), abs(p98))))
        stops = ",\n".join(f"  {_lch_text(s)}" for s in _library("change")["through"])
        text = (f"# diverging around 0: p2 {_num(p2)}, p98 {_num(p98)} -> domain +-{_num(m)}\n"
                f'[ramp.{name}]\nkind    = "diverging"\ndomain  = [{_num(-m)}, {_num(m)}]\n'
                f"center  = 0\nthrough = [\n{stops},\n]\n")
        why = (f"signed values (p2 {_num(p2)}, p98 {_num(p98)}): diverging ramp centred on 0, "
               f"domain [{_num(-m)}, {_num(m)}]")
        return text, "field", why
    lo, hi = nice_outward(p2, p98)
    if f.minimum >= 0 and lo < 0:
        lo = 0.0
    stops = ",\n".join(f"  {_lch_text(s)}" for s in _library("land-growth")["through"])
    text = (f"# sequential, light = low, dark = high: p2 {_num(p2)}, p98 {_num(p98)}\n"
            f'[ramp.{name}]\nkind    = "sequential"\ndomain  = [{_num(lo)}, {_num(hi)}]\n'
            f"through = [\n{stops},\n]\n")
    why = (f"{f.dtype}, values {_num(f.minimum)} to {_num(f.maximum)} (p2 {_num(p2)}, p98 "
           f"{_num(p98)}): sequential ramp, domain [{_num(lo)}, {_num(hi)}]")
    if f.classes:
        why += f" ({len(f.classes)} distinct values: more than {QUALITATIVE_MAX} classes)"
    return text, "field", why


def _overlay(v: VectorFacts, name: str, src: str) -> tuple[list[str], str]:
    """Layer tables for one vector table, and the reason."""
    table = f'table  = "{v.table}"\n' if v.tables_in_file > 1 else ""
    head = f'[[layer]]\nname   = "{name}"\nrole   = "overlay"\n'
    water = bool(_WATER_WORDS.search(f"{v.table} {v.path.stem}"))
    stroke = "{ L = 40, C = 26, h = 240 }" if water else "{ L = 30, C = 4, h = 60 }"
    tone = "blue (the name suggests water)" if water else "dark neutral"
    if v.shape == "lines":
        return [f'{head}kind   = "lines"\nsource = "{src}"\n{table}stroke = {stroke}\n'
                f'width  = 0.7\nhalo   = {{ color = {_PAPER}, width = 1.8 }}\n'], \
            f"{v.count} {v.geometry} features: lines, {tone}, light halo"
    if v.shape == "areas":
        return [f'{head}kind   = "areas"\nsource = "{src}"\n{table}stroke = {stroke}\n'
                f'width  = 0.8\nhalo   = {{ color = {_PAPER}, width = 2.0 }}\n'
                f"# fill = {{ L = .., C = .., h = .. }}  (outlines only: a fill would hide the data beneath)\n"], \
            f"{v.count} {v.geometry} features: area outlines, {tone}, light halo"
    if v.shape == "points":
        out = [f'{head}kind   = "points"\nsource = "{src}"\n{table}fill   = {_INK}\n'
               f'stroke = {_WHITE}\nwidth  = 0.6\nsize   = 3.5\n']
        why = f"{v.count} {v.geometry} features: point markers"
        text_field = next((k for k in _NAME_FIELDS if v.fields.get(k) == "str"),
                          next((k for k, t in v.fields.items() if t == "str"), None))
        if text_field is not None:
            rank = next((k for k in _RANK_FIELDS if v.fields.get(k) in ("int", "float")), None)
            prio = f'priority = "{rank}"\n' if rank else ""
            out.append(f'[[layer]]\nname   = "{name} labels"\nrole   = "overlay"\nkind   = "labels"\n'
                       f'source = "{src}"\n{table}text   = "{text_field}"\n{prio}size   = 7\n'
                       f'color  = {_TEXT}\nhalo   = {{ color = {_WHITE}, width = 1.6 }}\n')
            why += f', labels from "{text_field}"' + (f' (larger "{rank}" first)' if rank else "")
        return out, why
    return [], f"{v.geometry} geometry: not drawn (compose draws lines, areas and points)"


def _map_table(name: str, title: str, grid: RasterFacts | None, vectors: list[VectorFacts],
               grid_layer: str | None) -> tuple[str, str]:
    if grid is not None:
        width = f"width  = {MAX_WIDTH}              # pixels across (the source is {grid.width})\n" \
            if grid.width > MAX_WIDTH else ""
        why = f'canvas: the grid of "{grid_layer}" ({grid.crs}, {grid.width} x {grid.height} px' + \
            (f", drawn {MAX_WIDTH} px across)" if width else ")")
        text = (f'[map]\nname   = "{name}"\ntitle  = "{title}"\nlike   = "{grid_layer}"'
                f"         # CRS, extent and pixel size of that layer's raster\n{width}dpi    = 200\n"
                f"background = {_BACKGROUND}\n")
        return text, why
    crs = vectors[0].crs
    boxes = [v.bounds for v in vectors if v.crs == crs and v.count]
    if not boxes:
        raise ComposeError("compose init: the vector files have no features to take an extent from")
    w, s = min(b[0] for b in boxes), min(b[1] for b in boxes)
    e, n = max(b[2] for b in boxes), max(b[3] for b in boxes)
    pad = 0.02 * max(e - w, n - s)
    ext = ", ".join(_num(v) for v in (w - pad, s - pad, e + pad, n + pad))
    text = (f'[map]\nname   = "{name}"\ntitle  = "{title}"\ncrs    = "{crs}"\n'
            f"extent = [{ext}]\nwidth  = 1500\ndpi    = 200\nbackground = {_BACKGROUND}\n")
    return text, f"canvas: the extent of the vectors in {crs}, 1500 px across"


def starter_style(facts: list[RasterFacts | list[VectorFacts]], style_path: Path) -> Starter:
    """The starter style for inspected files, with paths relative to ``style_path``'s folder."""
    folder = Path(style_path).resolve().parent
    rasters = [f for f in facts if isinstance(f, RasterFacts)]
    vectors = [v for f in facts if isinstance(f, list) for v in f]
    if not rasters and not vectors:
        raise ComposeError("compose init: give at least one raster or vector file")
    used: set[str] = set()
    choices: list[Choice] = []
    parts: list[str] = []
    ramps: list[str] = []
    dem = _pick_dem(rasters)
    relief_name = None
    if dem is not None:
        relief_name = _layer_name(dem.path, used)
        why = ("the name says elevation" if _DEM_WORDS.search(dem.path.stem) else
               f"values {_num(dem.minimum)} to {_num(dem.maximum)} look like heights")
        choices.append(Choice(dem.path.name, f'relief "{relief_name}" (ground)',
                              f"{why}; {dem.dtype}, {_num(dem.res[0])} {dem.linear_units or 'deg'} cells"))
        parts.append(f'# Shaded relief from the DEM: light, low in chroma, multiplied under the data.\n'
                     f'[[layer]]\nname     = "{relief_name}"\nrole     = "ground"\nkind     = "relief"\n'
                     f'source   = "{_rel(dem.path, folder)}"\n'
                     f"shade    = {{ azimuth = 315, altitude = 45, exaggeration = 2 }}\n"
                     f"{_TINT}\nstrength = 0.55\nblend    = \"multiply\"\n")
    themes = [f for f in rasters if f is not dem]
    first_theme = None
    for i, f in enumerate(themes):
        name = _layer_name(f.path, used)
        ramp = re.sub(r"[^a-z0-9-]+", "-", name.lower()).strip("-") or f"ramp-{i + 1}"
        ramp_text, kind, why = _ramp_text(ramp, f)
        ramps.append(ramp_text)
        enabled = "" if i == 0 else "enabled = false          # one theme at a time: enable this one " \
                                    "and disable the other\n"
        if i == 0:
            first_theme = name
        choices.append(Choice(f.path.name, f'{kind} "{name}" (theme)' + ("" if i == 0 else ", disabled"),
                              why))
        parts.append(f'[[layer]]\nname   = "{name}"\nrole   = "theme"\nkind   = "{kind}"\n'
                     f'source = "{_rel(f.path, folder)}"\nramp   = "{ramp}"\n'
                     f'blend  = "multiply"          # the relief beneath shows through\n'
                     f'nodata = "transparent"       # no-data shows what lies beneath\n{enabled}')
    for v in vectors:
        name = _layer_name(v.path, used, v.table if v.tables_in_file > 1 else None)
        tables, why = _overlay(v, name, _rel(v.path, folder))
        label = v.path.name + (f' table "{v.table}"' if v.tables_in_file > 1 else "")
        choices.append(Choice(label, f'overlay "{name}"' if tables else "skipped", why))
        parts += tables
    grid = dem if dem is not None else (themes[0] if themes else None)
    grid_layer = relief_name if dem is not None else first_theme
    title = (first_theme or relief_name or "Map").capitalize()
    map_text, map_why = _map_table(Path(style_path).stem, title, grid, vectors, grid_layer)
    if themes and _diverging(themes[0]):
        # under a diverging theme a warm paper and tint add chroma to the warm arm and take it
        # from the cool one (rule diverging-chroma-map): both neutral
        map_text = map_text.replace(f"background = {_BACKGROUND}",
                                    f"background = {_BACKGROUND_NEUTRAL}   # neutral under "
                                    "a diverging theme")
        parts = [t.replace(_TINT, _TINT_NEUTRAL + "   # neutral under a diverging theme")
                 for t in parts]
    choices.insert(0, Choice("[map]", "canvas", map_why.removeprefix("canvas: ")))
    header = ("# Starter style written by `compose init`: every choice below is a starting point.\n"
              "# Render with `compose render THIS.toml`; the check says what to change, in numbers.\n"
              "# Keys are explained in the style reference (docs/style.md of compose).\n"
              "# Not for navigation or safety decisions: the map is an illustration.\n\n")
    body = "\n".join([map_text] + ramps + parts)
    return Starter(header + body, tuple(choices))
