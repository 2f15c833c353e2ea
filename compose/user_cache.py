"""The user's cache folder of compose, and the CRS strings pyproj accepted before.

Where: ``$COMPOSE_CACHE`` (a directory; ``off``, ``0``, ``no``, ``false`` or empty: no cache),
else ``$XDG_CACHE_HOME/compose``, else ``~/.cache/compose``. The check keeps its prepared inputs
in its ``check/`` folder (:mod:`compose.check_cache`). ``crs.json`` lists the CRS strings that
pyproj accepted as a canvas CRS, per installed pyproj (its module file's size and modification
time; up to :data:`_INSTALLS` of them, so several environments sharing one cache folder do not
take turns overwriting each other's list): a style naming one of them is loaded without
importing pyproj (0.05-0.15 s of a check's start-up). ``crs-facts.json`` keeps, per installed
rasterio (its GDAL and PROJ are its own), what GDAL answered about CRS strings
(:mod:`compose.sources.crs`), so a draft of plain files asks them again without importing
rasterio. Deleting the folder is always safe.
"""
from __future__ import annotations

import contextlib
import json
import os
from pathlib import Path

__all__ = ["CACHE_ENV", "cache_dir", "crs_known", "remember_crs", "accepted", "crs_facts",
           "remember_crs_facts"]

#: Environment variable naming the cache directory (``off``, ``0`` or empty: no cache).
CACHE_ENV = "COMPOSE_CACHE"
_CRS_FILE = "crs.json"
#: Installed pyprojs (module stamps) whose accepted CRS strings ``crs.json`` keeps, newest last.
_INSTALLS = 8


def cache_dir(option: str | Path | None = None) -> Path | None:
    """The cache's root directory: ``option``, else ``$COMPOSE_CACHE``, else
    ``$XDG_CACHE_HOME/compose``, else ``~/.cache/compose``. None when switched off (``off``,
    ``0``, ``no``, ``false`` or empty)."""
    value = str(option) if option is not None else os.environ.get(CACHE_ENV)
    if value is not None:
        if value.strip().lower() in ("", "0", "off", "no", "false"):
            return None
        return Path(value).expanduser()
    xdg = os.environ.get("XDG_CACHE_HOME")
    base = Path(xdg) if xdg and os.path.isabs(xdg) else Path.home() / ".cache"
    return base / "compose"


def _pyproj_stamp() -> str | None:
    """Size and mtime of the installed pyproj's package file (found without importing it)."""
    import importlib.util

    try:
        spec = importlib.util.find_spec("pyproj")
        st = os.stat(spec.origin) if spec is not None and spec.origin else None
    except (ImportError, ValueError, OSError):
        return None
    return None if st is None else f"{st.st_size}:{st.st_mtime_ns}"


def _read(root: Path) -> dict:
    try:
        data = json.loads((root / _CRS_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def _lists(data: dict) -> dict[str, list[str]]:
    """``crs.json``'s accepted strings per pyproj stamp (anything malformed left out)."""
    per = data.get("installs")
    if not isinstance(per, dict):
        return {}
    return {k: [v for v in vs if isinstance(v, str)] for k, vs in per.items()
            if isinstance(k, str) and isinstance(vs, list)}


#: CRS strings pyproj accepted as a canvas CRS in this process (found in ``crs.json`` or
#: judged here): :func:`accepted` answers from memory, with no cache folder or file read.
_ACCEPTED: set[str] = set()


def accepted(value) -> bool:
    """Whether ``value`` is a string pyproj accepted as a canvas CRS (geographic or projected,
    not engineering) in this process: :func:`crs_known` found it or :func:`remember_crs` noted
    it (a style loaded here named it)."""
    return isinstance(value, str) and value in _ACCEPTED


def crs_known(value: str) -> bool:
    """Whether pyproj (the one installed now) accepted ``value`` as a canvas CRS before."""
    root = cache_dir()
    if root is None:
        return False
    stamp = _pyproj_stamp()
    known = stamp is not None and value in _lists(_read(root)).get(stamp, [])
    if known:
        _ACCEPTED.add(value)
    return known


def remember_crs(value: str) -> None:
    """Note that pyproj accepted ``value`` (written atomically; a cache that cannot be written
    is skipped)."""
    _ACCEPTED.add(value)
    root = cache_dir()
    stamp = _pyproj_stamp()
    if root is None or stamp is None:
        return
    per = _lists(_read(root))
    valid = per.pop(stamp, [])
    if value in valid:
        return
    per[stamp] = (valid + [value])[-256:]          # this install's list goes last (newest)
    per = dict(list(per.items())[-_INSTALLS:])
    # imported here only: 3 ms of the start-up of every command, which reads this file
    import tempfile

    with contextlib.suppress(OSError):
        root.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".crs-", suffix=".part", dir=root)
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump({"installs": per}, f)
            os.replace(tmp, root / _CRS_FILE)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise


_FACTS_FILE = "crs-facts.json"
#: What :func:`crs_facts` read or noted in this process: {text: facts} (None: not read yet).
_FACTS: list[dict | None] = [None]


def _rasterio_stamp() -> str | None:
    """Size and mtime of the installed rasterio's package file (found without importing it)."""
    import importlib.util

    try:
        spec = importlib.util.find_spec("rasterio")
        st = os.stat(spec.origin) if spec is not None and spec.origin else None
    except (ImportError, ValueError, OSError):
        return None
    return None if st is None else f"{st.st_size}:{st.st_mtime_ns}"


def _facts_here() -> dict:
    if _FACTS[0] is None:
        root, stamp = cache_dir(), _rasterio_stamp()
        got: dict = {}
        if root is not None and stamp is not None:
            try:
                data = json.loads((root / _FACTS_FILE).read_text(encoding="utf-8"))
                per = data.get("installs", {}) if isinstance(data, dict) else {}
                mine = per.get(stamp) if isinstance(per, dict) else None
                if isinstance(mine, dict):
                    got = {k: v for k, v in mine.items()
                           if isinstance(k, str) and isinstance(v, dict)}
            except (OSError, ValueError):
                pass
        _FACTS[0] = got
        return got
    return _FACTS[0]


def crs_facts(value: str) -> dict | None:
    """What GDAL (the rasterio installed now) answered about the CRS string ``value`` before
    (:func:`remember_crs_facts`), or None."""
    return _facts_here().get(value)


def remember_crs_facts(value: str, facts: dict) -> None:
    """Note GDAL's answers about ``value`` (written atomically; a cache that cannot be written
    is skipped)."""
    _facts_here()[value] = facts
    root, stamp = cache_dir(), _rasterio_stamp()
    if root is None or stamp is None:
        return
    try:
        data = json.loads((root / _FACTS_FILE).read_text(encoding="utf-8"))
        per = data.get("installs") if isinstance(data, dict) else None
    except (OSError, ValueError):
        per = None
    per = per if isinstance(per, dict) else {}
    mine = per.pop(stamp, None)
    mine = mine if isinstance(mine, dict) else {}
    mine[value] = facts
    per[stamp] = dict(list(mine.items())[-256:])     # this install's answers go last (newest)
    per = dict(list(per.items())[-_INSTALLS:])
    import tempfile

    with contextlib.suppress(OSError):
        root.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".crs-facts-", suffix=".part", dir=root)
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump({"installs": per}, f)
            os.replace(tmp, root / _FACTS_FILE)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise
