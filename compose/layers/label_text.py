"""Label text measured and outlined by FreeType without importing matplotlib's package.

A label's box and glyph outlines are what matplotlib's Agg backend and its ``TextPath`` give
(:func:`measure_text`: the same numbers, bit for bit; ``tests/layers/test_label_text.py``
compares them string by string): the font found by matplotlib's font manager, laid out by its
``ft2font`` extension module (FreeType and libraqm). Importing matplotlib's package for that
loads its configuration, font list, mathtext parser and colour tables -- about 0.1-0.15 s of a
check's start-up, longer than measuring every label of the demo. The extension module needs none
of it, so it is loaded from its file on its own (as :mod:`compose.layers.agg` loads Agg's; a
later import of matplotlib finds that same module), and what the package would have decided --
the font file for a family and weight, and the text settings it reads from its configuration
(``text.hinting``, ``text.kerning_factor``, ``font.enable_last_resort``, ``text.parse_math``) --
is asked of matplotlib once and remembered in the user's cache folder (``fonts.json``, beside the
CRS memo of :mod:`compose.user_cache`), with the size and modification time of every file the
answer came from: the font files, matplotlib's font list and every configuration file it reads
or would read first (a file that appears, changes or goes makes the memo miss), per installed
matplotlib and environment (``MPLCONFIGDIR``, ``MATPLOTLIBRC``, XDG folders, home). When
matplotlib is imported already (the page, a notebook that changed its settings) its live answers
are used instead, and a string that is mathtext (an even number of unescaped ``$``) goes through
matplotlib's ``TextPath`` as before. Deleting the memo is always safe. The font is found through
matplotlib's public API; the FreeType objects are made and laid out through the private names
its own text path uses, each behind one function that takes the public path (its package
imported) where a matplotlib lacks the name (see :func:`font_object`).
"""
from __future__ import annotations

import contextlib
import functools
import json
import os
import sys
import tempfile
import threading
from dataclasses import dataclass, field
from pathlib import Path as FilePath
from typing import Any

import numpy as np

from compose.errors import StyleError
from compose.layers.agg import Path, extension, package_folder

__all__ = ["TextShape", "Face", "measure_text", "text_width", "text_outline", "face", "remembered",
           "font_object", "ft2font", "MEMO_FILE"]

_FT = "matplotlib.ft2font"
_DPI = 72.0                 # 1 pt == 1 px in the renderer
FONT_SCALE = 100.0          # matplotlib's TextToPath: outlines taken at 100 pt, 72 dpi, then scaled
#: The memo's file in the user's cache folder.
MEMO_FILE = "fonts.json"
_ENTRIES = 64               # newest kept
_ENV = ("MPLCONFIGDIR", "MATPLOTLIBRC", "XDG_CONFIG_HOME", "XDG_CACHE_HOME", "HOME")


@dataclass(frozen=True, slots=True)
class TextShape:
    """A text's outline at a size, with its box (pixels): origin at the baseline's left end.

    width: box width; ascent/descent: box extent above/below the baseline (>= 0). The box is the
    Agg renderer's text extent (``get_text_width_height_descent``) widened to the outline's own
    extent where hinting made the former smaller, so the drawn ink never leaves it.
    vertices (N, 2) / codes (N,): the glyph outlines, y up, in pixels.
    """

    text: str
    width: float
    ascent: float
    descent: float
    vertices: np.ndarray = field(compare=False, repr=False)
    codes: np.ndarray = field(compare=False, repr=False)

    @property
    def height(self) -> float:
        return self.ascent + self.descent


@dataclass(frozen=True, slots=True)
class Face:
    """What matplotlib decides for a family and weight: ``paths`` the font files with their face
    index, in fallback order; ``last_resort`` its Last Resort font's file, appended as the final
    fallback when ``enable_last_resort`` (``font.enable_last_resort``) and not among ``paths``;
    ``kerning_factor`` (``text.kerning_factor``), ``hinting`` (``text.hinting``) and
    ``parse_math`` (``text.parse_math``) its settings."""

    paths: tuple[tuple[str, int], ...]
    last_resort: str
    enable_last_resort: bool
    kerning_factor: int | None
    hinting: str | bool
    parse_math: bool


# --- the extension module ---------------------------------------------------------------------

_LOAD = threading.Lock()


def ft2font():
    """matplotlib's ``ft2font`` extension module: the one imported already, else loaded from its
    file without the package (registered under its own name), else imported with the package."""
    module = sys.modules.get(_FT)
    if module is not None:
        return module
    with _LOAD:
        return extension(_FT)


def _package_folder() -> FilePath | None:
    """matplotlib's package folder, found without importing it."""
    return package_folder()


# --- which font: matplotlib's answer, remembered ----------------------------------------------

def _stamp(path: str) -> str | None:
    """``size:mtime_ns`` of a file, None when there is none."""
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return None
    return f"{st.st_size}:{st.st_mtime_ns}" if os.path.isfile(path) else None


def _install() -> str | None:
    """The installed matplotlib (its package file's stamp) and the environment that decides
    where it reads its configuration and font list; None without one."""
    folder = _package_folder()
    stamp = None if folder is None else _stamp(str(folder / "__init__.py"))
    if stamp is None:
        return None
    return json.dumps([str(folder), stamp] + [os.environ.get(k) for k in _ENV])


def _live(font: str, weight: str) -> Face:
    """matplotlib's answer for ``font`` and ``weight`` (matplotlib imported), through its public
    ``findfont`` and ``get_data_path``. Raises StyleError when it finds no such font."""
    import matplotlib
    from matplotlib.font_manager import FontProperties, fontManager

    prop = FontProperties(family=font, weight=weight)
    try:
        fontManager.findfont(prop, fallback_to_default=False)
    except ValueError:
        raise StyleError(f"font {font!r} (weight {weight!r}) not found") from None
    paths = tuple((os.path.realpath(getattr(p, "path", p)), int(getattr(p, "face_index", 0)))
                  for p in _family_fonts(prop, fontManager))
    rc = matplotlib.rcParams
    # its Last Resort font, where its font manager takes it from (its data folder)
    last = os.path.join(matplotlib.get_data_path(), "fonts", "ttf", "LastResortHE-Regular.ttf")
    return Face(paths, os.path.realpath(last),
                bool(rc["font.enable_last_resort"]), rc["text.kerning_factor"], rc["text.hinting"],
                bool(rc["text.parse_math"]))


def _family_fonts(prop, manager) -> list:
    """The font file of each family of ``prop`` that ``manager`` finds (its public
    ``findfont``, asked one family at a time without falling back), in the families' order --
    the fallback list matplotlib's text and Agg backends draw with; its default family's font
    when none is found. As its font manager's ``_find_fonts_by_props`` makes the list (the same
    calls, minus the warnings for a family it lacks), without that private method."""
    found = []
    for family in prop.get_family():
        one = prop.copy()
        one.set_family(family)
        with contextlib.suppress(ValueError):
            found.append(manager.findfont(one, fallback_to_default=False))
    if not found:
        one = prop.copy()
        one.set_family(manager.defaultFamily["ttf"])
        found.append(manager.findfont(one))
    return found


def _sources(f: Face) -> tuple[dict[str, str | None], str]:
    """The files matplotlib's answer ``f`` came from (path -> stamp, None: absent): the font
    files, its font list, the configuration file it read and those it would read first; and its
    configuration folder (matplotlib imported)."""
    import matplotlib
    from matplotlib.font_manager import FontManager

    configdir = matplotlib.get_configdir()
    files = _rc_candidates(configdir)
    files.append(os.path.abspath(matplotlib.matplotlib_fname()))
    files.append(os.path.join(matplotlib.get_cachedir(),
                              f"fontlist-v{FontManager.__version__}.json"))
    files += [p for p, _ in f.paths] + [f.last_resort]
    return {p: _stamp(p) for p in files}, configdir


def _as_loaded(f: Face) -> bool:
    """Whether matplotlib's answer ``f`` is what it answers in a fresh process: its font and
    text settings as its configuration files gave them (``rcParamsOrig``), and every font file
    in its font list file (not one a program added while running; its own fonts are listed
    relative to its data folder)."""
    import matplotlib
    from matplotlib.font_manager import FontManager

    rc, orig = matplotlib.rcParams, matplotlib.rcParamsOrig
    try:
        if any(rc[k] != orig[k] for k in orig if k.startswith(("font.", "text."))):
            return False
        listed = FilePath(matplotlib.get_cachedir(),
                          f"fontlist-v{FontManager.__version__}.json").read_text(encoding="utf-8")
    except (OSError, KeyError, ValueError):
        return False
    data = os.path.realpath(matplotlib.get_data_path())
    return all(json.dumps(p) in listed
               or json.dumps(os.path.relpath(p, data)) in listed    # its own fonts: relative
               for p, _ in f.paths)


def _rc_candidates(configdir: str) -> list[str]:
    """The configuration files matplotlib looks for before its own (``matplotlib_fname``)."""
    out = []
    with contextlib.suppress(OSError):          # no current folder
        out.append(os.path.abspath("matplotlibrc"))
    rc = os.environ.get("MATPLOTLIBRC")
    if rc:
        with contextlib.suppress(OSError):
            out += [os.path.abspath(rc), os.path.abspath(os.path.join(rc, "matplotlibrc"))]
    return out + [os.path.join(configdir, "matplotlibrc")]


def _memo_path() -> FilePath | None:
    from compose.user_cache import cache_dir

    root = cache_dir()
    return None if root is None else root / MEMO_FILE


def _read_memo(path: FilePath) -> dict:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    entries = data.get("entries") if isinstance(data, dict) else None
    return entries if isinstance(entries, dict) else {}


def _recalled(entry) -> Face | None:
    """The remembered face of a memo entry when every file it depends on is as it was and no
    configuration file matplotlib would read first has appeared (the current folder's)."""
    try:
        files, f = entry["files"], entry["face"]
        if any(_stamp(p) != s for p, s in files.items()):
            return None
        if any(p not in files and _stamp(p) is not None
               for p in _rc_candidates(entry["configdir"])):
            return None
        return Face(tuple((str(p), int(i)) for p, i in f["paths"]), str(f["last_resort"]),
                    bool(f["enable_last_resort"]), f["kerning_factor"], f["hinting"],
                    bool(f["parse_math"]))
    except (KeyError, TypeError, ValueError, AttributeError):
        return None


def _remember(path: FilePath, key: str, face: Face) -> None:
    """Write the memo with ``key`` newest (atomically; a folder that cannot be written is
    skipped); nothing when ``face`` may not be what a fresh matplotlib would answer
    (:func:`_as_loaded`)."""
    if not _as_loaded(face):
        return
    files, configdir = _sources(face)
    entries = _read_memo(path)
    entries.pop(key, None)
    entries[key] = {"face": {"paths": [list(p) for p in face.paths],
                             "last_resort": face.last_resort,
                             "enable_last_resort": face.enable_last_resort,
                             "kerning_factor": face.kerning_factor, "hinting": face.hinting,
                             "parse_math": face.parse_math},
                    "files": files, "configdir": configdir}
    entries = dict(list(entries.items())[-_ENTRIES:])
    with contextlib.suppress(OSError):
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".fonts-", suffix=".part", dir=path.parent)
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump({"entries": entries}, f)
            os.replace(tmp, path)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise


_FACES: dict[tuple[str, str], Face] = {}
_ASKED: set[tuple[str, str]] = set()        # answers matplotlib gave this process
_FACES_LOCK = threading.Lock()


def face(font: str = "DejaVu Sans", weight: str = "normal") -> Face:
    """The font files and text settings matplotlib uses for ``font`` at ``weight``: its live
    answer when matplotlib is imported (remembered once per process when the memo lacks it),
    else the memo's when every file it came from is unchanged, else matplotlib's (imported
    now), remembered. Raises StyleError for a font it cannot find."""
    with _FACES_LOCK:
        if "matplotlib" not in sys.modules:
            got = _recall(font, weight)
            if got is not None:
                return got
        got = _live(font, weight)
        if (font, weight) not in _ASKED:
            _ASKED.add((font, weight))
            memo, key = _memo_key(font, weight)
            if memo is not None and key is not None and not _held(memo, key):
                _remember(memo, key, got)
        return got


def remembered(font: str = "DejaVu Sans", weight: str = "normal") -> bool:
    """Whether :func:`face` will answer for ``font`` at ``weight`` without importing matplotlib
    (the memo holds it, its files unchanged; or matplotlib is imported already)."""
    if "matplotlib" in sys.modules:
        return True
    with _FACES_LOCK:
        return _recall(font, weight) is not None


def _memo_key(font: str, weight: str) -> tuple[FilePath | None, str | None]:
    install = _install()
    return _memo_path(), None if install is None else json.dumps([install, font, weight])


def _recall(font: str, weight: str) -> Face | None:
    """The face remembered for ``font`` and ``weight`` in this process or the memo (caller holds
    the lock)."""
    got = _FACES.get((font, weight))
    if got is None:
        memo, key = _memo_key(font, weight)
        entry = None if memo is None or key is None else _read_memo(memo).get(key)
        got = None if entry is None else _recalled(entry)
        if got is not None:
            _FACES[(font, weight)] = got
    return got


def _held(memo: FilePath, key: str) -> bool:
    entry = _read_memo(memo).get(key)
    return entry is not None and _recalled(entry) is not None


# --- the font objects ---------------------------------------------------------------------------

_FONTS: dict[tuple, Any] = {}


def _forget_fonts() -> None:
    _FONTS.clear()          # FT2Font objects share their FreeType library: none crosses a fork


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_fonts)


# matplotlib makes and lays out the FreeType objects (font_manager.get_font, textpath's
# TextToPath) through names it keeps private: FT2Font's keywords for the fallback fonts, the
# kerning factor and the Last Resort font's warning, its _set_transform and its _layout (raqm's
# layout, each glyph with its font). This module does the same without importing matplotlib's
# package, each name used in one function below; with a matplotlib that lacks one, that function
# says so and the public path is taken instead -- font_manager.get_font for the font object,
# TextPath for outlines -- the same numbers, with matplotlib's package imported.
_FONT_KEYWORDS = {"fallback": "_fallback_list", "kerning": "_kerning_factor",
                  "warn": "_warn_if_used"}
_SET_TRANSFORM = "_set_transform"
_LAYOUT = "_layout"


def _private(obj, name: str):
    """``obj``'s attribute ``name`` (one of matplotlib's private names), None where this
    matplotlib has none."""
    return getattr(obj, name, None)


def _own_font(f: Face):
    """The FT2Font of ``f`` as ``font_manager.get_font`` builds it (its fallbacks and the Last
    Resort font attached), from the extension module alone; None when this matplotlib's FT2Font
    refuses the private keywords that takes."""
    ft, kw = ft2font(), _FONT_KEYWORDS
    kerning = {kw["kerning"]: f.kerning_factor}
    (first, index), *rest = f.paths
    try:
        fallback = [ft.FT2Font(p, face_index=i, **kerning) for p, i in rest]
        try:
            last = f.paths.index((f.last_resort, 0))
        except ValueError:
            last = -1
            if f.enable_last_resort:
                fallback.append(ft.FT2Font(f.last_resort, **kerning, **{kw["warn"]: True}))
                last = len(fallback)
        font = ft.FT2Font(first, face_index=index, **{kw["fallback"]: fallback}, **kerning)
    except TypeError:                   # an unexpected keyword: a matplotlib without it
        return None
    if last == 0:
        font.set_charmap(0)
    elif last > 0:
        fallback[last - 1].set_charmap(0)
    return font


def _public_font(f: Face):
    """The FT2Font of ``f`` from matplotlib's public ``font_manager.get_font`` (its package
    imported; kept there, one per thread; its transform reset there)."""
    from matplotlib.font_manager import get_font

    if all(i == 0 for _, i in f.paths):
        return get_font([p for p, _ in f.paths])
    # a face of a font collection: a matplotlib with FontPath
    from matplotlib.font_manager import FontPath

    return get_font([FontPath(p, i) for p, i in f.paths])


def font_object(f: Face):
    """The FT2Font of ``f`` (its fallbacks and the Last Resort font attached) as matplotlib's
    ``font_manager.get_font`` makes it: one per face and thread, its transform reset on each
    call (:func:`_public_font` where this matplotlib's FT2Font lacks the private keywords)."""
    key = (f, threading.get_ident())
    font = _FONTS.get(key)
    if font is None:
        own = _own_font(f)
        font = _FONTS[key] = own if own is not None else False
    if font is False:
        return _public_font(f)
    reset = _private(font, _SET_TRANSFORM)
    if reset is not None:       # without it nothing to undo: no one else transforms this object
        reset([[0x10000, 0], [0, 0x10000]], [0, 0])
    return font


@functools.lru_cache(maxsize=1)
def _hinting() -> dict:
    """matplotlib's ``text.hinting`` setting -> FreeType load flags (as its Agg backend maps
    them)."""
    flags = ft2font().LoadFlags
    return {
        "default": flags.DEFAULT, "no_autohint": flags.NO_AUTOHINT,
        "force_autohint": flags.FORCE_AUTOHINT, "no_hinting": flags.NO_HINTING,
        True: flags.FORCE_AUTOHINT, False: flags.NO_HINTING, "either": flags.DEFAULT,
        "native": flags.NO_AUTOHINT, "auto": flags.FORCE_AUTOHINT,
        "none": flags.NO_HINTING,
    }


# --- measuring ----------------------------------------------------------------------------------

def _is_math(text: str) -> bool:
    """matplotlib's ``cbook.is_math_text``: an even, non-zero number of unescaped ``$``."""
    dollars = text.count("$") - text.count(r"\$")
    return dollars > 0 and dollars % 2 == 0


@functools.lru_cache(maxsize=4096)
def measure_text(text: str, size_px: float, font: str = "DejaVu Sans",
                 weight: str = "normal") -> TextShape:
    """Outline and box of ``text`` at ``size_px`` pixels (the font size in px at 72 dpi)."""
    f = face(font, weight)
    w, h, d = _text_extent(text, float(size_px), f)
    v, codes = text_outline(text, float(size_px), font, weight)
    codes = codes if codes is not None else np.full(len(v), Path.LINETO, Path.code_type)
    if len(v):
        v[:, 0] -= min(0.0, float(v[:, 0].min()))   # ink left of the origin moves into the box
        w = max(w, float(v[:, 0].max()))
        asc = max(h - d, float(v[:, 1].max()))
        d = max(d, -float(v[:, 1].min()))
    else:
        asc = h - d
    v.setflags(write=False)
    return TextShape(text, float(w), float(asc), float(d), v, np.asarray(codes))


def text_width(text: str, size_pt: float, font: str = "DejaVu Sans",
               weight: str = "normal") -> float:
    """Width in points of ``text`` as plain text (no mathtext) at ``size_pt`` points: the Agg
    renderer's text extent at 72 dpi, where a point is a pixel. For one line of furniture
    (a title, a credit line) that must fit the page's width."""
    return _text_extent(text, float(size_pt), face(font, weight))[0]


def _text_extent(text: str, size_px: float, f: Face) -> tuple[float, float, float]:
    """(width, height, descent) in pixels of ``text`` as matplotlib's Agg backend measures it
    (``get_text_width_height_descent`` of plain text at :data:`_DPI`: the font laid out by
    FreeType with the hinting of ``text.hinting``, in 1/64 pixels; sizes under 1 pt are 1 pt,
    as its font properties make them)."""
    font = font_object(f)
    font.clear()
    font.set_size(max(size_px, 1.0), _DPI)
    font.set_text(text, 0.0, flags=_hinting()[f.hinting])
    w, h = font.get_width_height()
    d = font.get_descent()
    return w / 64.0, h / 64.0, d / 64.0


def text_outline(text: str, size_px: float, font: str = "DejaVu Sans",
                 weight: str = "normal") -> tuple[np.ndarray, np.ndarray]:
    """(vertices (N, 2) float64, a copy; codes uint8) of ``text``'s glyph outlines at
    ``size_px``, as matplotlib's ``TextPath((0, 0), text, size=size_px, prop=...)`` gives them:
    plain text laid out unhinted at 100 pt (``TextToPath.get_text_path``: each glyph's outline
    moved to its pen position) and scaled by ``size_px / 100`` (its ``Affine2D`` transform: the
    same operations, so the same bits). Mathtext goes through ``TextPath`` itself."""
    f = face(font, weight)
    if f.parse_math and _is_math(text):
        return _math_outline(text, size_px, font, weight)
    ft = font_object(f)
    layout = _private(ft, _LAYOUT)
    if layout is None:
        return _public_outline(text, size_px, font, weight)
    if f.parse_math:
        text = text.replace(r"\$", "$")
    ft.set_size(FONT_SCALE, _DPI)
    flags = ft2font().LoadFlags.NO_HINTING
    verts: list = []
    codes: list = []
    outlines: dict = {}
    for item in layout(text, flags, features=None, language=None):
        obj = item.ft_object
        obj.load_glyph(item.glyph_index, flags=flags)
        key = (obj.postscript_name, item.glyph_index)
        if key not in outlines:
            outlines[key] = obj.get_path()
        v1, c1 = outlines[key]
        verts.extend(v1 * 1.0 + [item.x, item.y])
        codes.extend(c1)
    vertices = np.array(verts, np.float64).reshape(-1, 2) if verts else np.empty((0, 2))
    scale = size_px / FONT_SCALE
    # Affine2D().scale(s).transform: x' = (s x + 0 y) + 0, y' = (0 x + s y) + 0
    out = np.empty_like(vertices)
    out[:, 0] = (scale * vertices[:, 0] + 0.0 * vertices[:, 1]) + 0.0
    out[:, 1] = (0.0 * vertices[:, 0] + scale * vertices[:, 1]) + 0.0
    return out, np.asarray(codes)      # as its list of codes becomes one (empty: float64)


def _public_outline(text: str, size_px: float, font: str, weight: str):
    """:func:`text_outline` by matplotlib's public ``TextPath`` (where its FT2Font has no
    ``_layout``): nothing for text with nothing to draw, which TextPath refuses."""
    if not text.strip():
        return np.empty((0, 2)), np.asarray([])
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    prop = FontProperties(family=font, weight=weight, size=float(size_px))
    tp = TextPath((0.0, 0.0), text, size=size_px, prop=prop)
    return np.array(tp.vertices, np.float64), np.asarray(tp.codes)


def _math_outline(text: str, size_px: float, font: str, weight: str):
    from compose.lazy import on_first_use

    on_first_use("matplotlib.dviread")          # TeX's DVI reader: imported, used only for TeX
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    prop = FontProperties(family=font, weight=weight, size=float(size_px))
    tp = TextPath((0.0, 0.0), text, size=size_px, prop=prop)
    return np.array(tp.vertices, np.float64), tp.codes
