"""Reading a style file: TOML, the ``extends`` chain and its merge, paths, then validation.

Stages, each a function: read one file (:func:`_read`) -> check its shape and resolve its paths
against its own folder (:func:`_prepare`) -> follow ``extends`` (:func:`_chain`) -> merge base
first (:func:`_merge`) -> validate the merged tables into a :class:`Style` (:func:`_build`).
Errors of one file's shape name that file; errors of the merged content name the style loaded.
"""
from __future__ import annotations

import functools
import os
import tomllib
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any

from compose.errors import StyleError
from compose.limits import MAX_NESTING, MAX_STRING, MAX_STYLE_BYTES
from compose.sources.guard import is_remote, read_regular_file
from compose.style.kinds import AVOIDABLE, LAYER_KINDS
from compose.style.model import BLEND_MODES, BUDGET_TABLES, ROLES, Budgets, LayerSpec, MapSpec, RampTable, Style, Waiver
from compose.style.overrides import Override, apply_overrides, series_members, substitute
from compose.style.validate import (
    Scope,
    as_table,
    boolean,
    build_from_table,
    check_choice,
    check_keys,
    missing_keys,
    number,
    option_keys,
    string,
)

__all__ = ["load_style", "library_tables", "parse_layer", "merge_layers", "freeze", "TOP_KEYS", "COMMON_KEYS"]

#: Keys allowed at the top level of a style file.
TOP_KEYS = ("extends", "map", "page", "budget", "ramp", "layer", "waive", "series")
#: Keys of one ``[[waive]]`` table.
WAIVE_KEYS = ("rule", "layer", "reason")
#: Keys every layer may state, whatever its kind.
COMMON_KEYS = ("name", "role", "kind", "source", "blend", "opacity", "enabled")
_REQUIRED = ("role", "kind", "source")


@dataclass(frozen=True, slots=True)
class _File:
    """One parsed style file: absolute path, its tables (paths resolved), raw text."""

    path: Path
    data: dict
    text: str


def _show(path: Path) -> str:
    """``path`` relative to the working folder when inside it, else absolute."""
    try:
        return str(path.relative_to(Path.cwd()))
    except ValueError:
        return str(path)


@contextmanager
def _blame(path: Path) -> Iterator[None]:
    """Prefix the message of any StyleError raised inside with the file's name."""
    try:
        yield
    except StyleError as e:
        raise type(e)(f"{_show(path)}: {e}") from e


def freeze(value: Any) -> Any:
    """Deep read-only copy of TOML data: tables -> MappingProxyType, arrays -> tuples."""
    if isinstance(value, Mapping):
        return MappingProxyType({k: freeze(v) for k, v in value.items()})
    if isinstance(value, list):
        return tuple(freeze(v) for v in value)
    return value


def _read(path: Path) -> tuple[dict, str]:
    """TOML of one file -> (tables, raw text). Only a regular file of at most
    :data:`~compose.limits.MAX_STYLE_BYTES` is read (never a pipe or a device); nesting and string
    lengths are bounded (:func:`_check_bounds`)."""
    data = read_regular_file(path, "style file", MAX_STYLE_BYTES, StyleError)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise StyleError(f"{_show(path)}: not UTF-8 text") from None
    try:
        tables = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise StyleError(f"{_show(path)}: invalid TOML: {e}") from None
    except RecursionError:
        raise StyleError(f"{_show(path)}: values nested too deeply "
                         f"(at most {MAX_NESTING} levels of tables and arrays)") from None
    with _blame(path):
        _check_bounds(tables)
    return tables, text


def _check_bounds(tables: dict) -> None:
    """Refuse nesting deeper than :data:`~compose.limits.MAX_NESTING` and strings (keys or
    values) longer than :data:`~compose.limits.MAX_STRING` characters, naming the key path."""
    todo: list[tuple[Any, tuple[str, ...]]] = [(tables, ())]
    while todo:
        value, where = todo.pop()
        shown = ".".join(where) or "the style"
        if len(where) > MAX_NESTING:
            raise StyleError(f"{shown[:200]}: values nested too deeply "
                             f"(at most {MAX_NESTING} levels of tables and arrays)")
        if isinstance(value, str) and len(value) > MAX_STRING:
            raise StyleError(f"{shown}: a string of {len(value):,} characters; "
                             f"at most {MAX_STRING:,}")
        if isinstance(value, dict):
            for k, v in value.items():
                if len(k) > MAX_STRING:
                    raise StyleError(f"{shown}: a key of {len(k):,} characters; at most {MAX_STRING:,}")
                todo.append((v, where + (k,)))
        elif isinstance(value, list):
            last = where[-1] if where else ""
            todo.extend((v, where[:-1] + (f"{last}[{i}]",)) for i, v in enumerate(value))


def _path_string(value: Any, at: Scope) -> str:
    """A file name of a style (``extends``, ``source``): a non-empty string without control
    characters (a NUL byte would end the name early)."""
    text = string()(value, at)
    bad = next((ch for ch in text if ord(ch) < 32 or ord(ch) == 127), None)
    if bad is not None:
        raise StyleError(f"{at.path} must be a file name without control characters "
                         f"(found U+{ord(bad):04X}), got {value!r}")
    return text


def _prepare(data: dict, folder: Path) -> None:
    """Check the shape merging relies on and the keys of the fixed tables (so errors name this
    file); make layer sources absolute (relative to ``folder``)."""
    top = Scope()
    check_keys(data, TOP_KEYS, top)
    if "extends" in data:
        _path_string(data["extends"], top.at("extends"))
    if "map" in data:
        check_keys(as_table(data["map"], top.at("map")), option_keys(MapSpec), top.at("map"))
    if "page" in data:
        from compose.page.spec import PageSpec
        check_keys(as_table(data["page"], top.at("page")), option_keys(PageSpec), top.at("page"))
    if "budget" in data:
        budget = as_table(data["budget"], top.at("budget"))
        check_keys(budget, BUDGET_TABLES, top.at("budget"))
        for role, table in budget.items():
            at = top.at("budget").at(role)
            check_keys(as_table(table, at), option_keys(BUDGET_TABLES[role]), at)
    if "ramp" in data:
        for name, table in as_table(data["ramp"], top.at("ramp")).items():
            as_table(table, top.at("ramp").at(name))
    waivers = data.get("waive", [])
    if not isinstance(waivers, list) or not all(isinstance(t, dict) for t in waivers):
        raise StyleError("waive must be an array of tables; write each as [[waive]]")
    for i, table in enumerate(waivers, start=1):
        at = Scope(f"waive {i}")
        check_keys(table, WAIVE_KEYS, at)
        missing = [k for k in WAIVE_KEYS if k not in table]
        if missing:
            raise missing_keys(missing, at)
        for key in WAIVE_KEYS:
            string()(table[key], at.at(key))
    layers = data.get("layer", [])
    if not isinstance(layers, list) or not all(isinstance(t, dict) for t in layers):
        raise StyleError("layer must be an array of tables; write each as [[layer]]")
    seen: set[str] = set()
    for i, table in enumerate(layers, start=1):
        if "name" not in table:
            raise missing_keys(["name"], Scope(f"layer {i}"))
        name = string()(table["name"], Scope(f"layer {i}").at("name"))
        if name in seen:
            raise StyleError(f'layer "{name}" is listed twice; layer names must be unique')
        seen.add(name)
        if isinstance(table.get("source"), str) and table["source"].strip():
            source = _path_string(table["source"], Scope(f'layer "{name}"').at("source"))
            if not is_remote(source):     # URLs and /vsi paths stay as written
                source = str(os.path.abspath(folder / source))
            table["source"] = source


def _resolve(path: Path, what: str) -> Path:
    """``path`` made absolute with symlinks followed; a symlink loop or an impossible name is
    a StyleError naming ``what``."""
    try:
        return path.resolve()
    except (OSError, RuntimeError, ValueError) as e:
        reason = getattr(e, "strerror", None) or str(e)
        raise StyleError(f"{what}: cannot follow {path}: {reason}") from None


def _chain(path: Path) -> list[_File]:
    """The style at ``path`` and the files it extends, the deepest base first."""
    files: list[_File] = []
    current = path
    while True:
        data, text = _read(current)
        with _blame(current):
            _prepare(data, current.parent)
        files.append(_File(current, data, text))
        if "extends" not in data:
            return files[::-1]
        target = _resolve(current.parent / data["extends"], f"{_show(current)}: extends")
        seen = [f.path for f in files]
        if target in seen:
            loop = " -> ".join(_show(p) for p in seen[seen.index(target):] + [target])
            raise StyleError(f"{_show(current)}: extends cycle: {loop}")
        try:
            found = target.is_file()
        except OSError as e:            # e.g. a name too long for the file system
            raise StyleError(f"{_show(current)}: extends: cannot use {_show(target)}: "
                             f"{e.strerror or e}") from None
        if not found:
            raise StyleError(f"{_show(current)}: extends: file not found: {_show(target)}")
        current = target


def merge_layers(base: list[dict], new: list[dict]) -> list[dict]:
    """Merge the layers of an extending file into its base's (both lowest first).

    A known name overrides the keys it states, in the base's position. A new name goes directly
    above the layer listed just before it in the extending file, or on top if it comes first.
    """
    out = [dict(t) for t in base]
    where = {t["name"]: i for i, t in enumerate(out)}
    previous: str | None = None
    for table in new:
        name = table["name"]
        if name in where:
            out[where[name]].update(table)
        else:
            out.insert(len(out) if previous is None else where[previous] + 1, dict(table))
            where = {t["name"]: i for i, t in enumerate(out)}
        previous = name
    return out


def _merge(files: list[_File]) -> tuple[dict, dict[str, Path]]:
    """Merge files base first: tables key by key, layers by name. Returns (tables, ramp -> file)."""
    merged: dict[str, Any] = {"budget": {}, "ramp": {}, "layer": [], "waive": []}
    origin: dict[str, Path] = {}
    for f in files:
        d = f.data
        if "map" in d:
            merged.setdefault("map", {}).update(d["map"])
        if "page" in d:
            merged.setdefault("page", {}).update(d["page"])
        for role, table in d.get("budget", {}).items():
            merged["budget"].setdefault(role, {}).update(table)
        for name, table in d.get("ramp", {}).items():
            merged["ramp"].setdefault(name, {}).update(table)
            origin[name] = f.path
        merged["layer"] = merge_layers(merged["layer"], d.get("layer", []))
        merged["waive"] += [dict(t) for t in d.get("waive", [])]
        if "series" in d:
            merged.setdefault("series", {}).update(d["series"])
    return merged, origin


def _elsewhere(key: str, kind: str | None) -> str | None:
    kinds = [k for k, s in LAYER_KINDS.items() if key in s.keys]
    if not kinds:
        return None
    return f"{key!r} is a key of {', '.join(kinds)} layers" + (f", not {kind}" if kind else "")


def parse_layer(table: Mapping, ramps: Mapping[str, Any],
                library: Mapping[str, Any] | None = None) -> LayerSpec:
    """Validate one merged layer table into a :class:`LayerSpec`; ``ramps``: the style's ramps by
    name; ``library``: the library ramps a layer may also name."""
    library = library or {}
    name = table["name"]
    at = Scope(f'layer "{name}"')
    schema = None
    if "kind" in table:
        schema = LAYER_KINDS[check_choice(table["kind"], LAYER_KINDS, at.at("kind"), "layer kind")]
        allowed = COMMON_KEYS + schema.keys
    else:
        allowed = COMMON_KEYS + tuple(k for s in LAYER_KINDS.values() for k in s.keys)
    check_keys(table, allowed, at, hint=lambda k: _elsewhere(k, schema.name if schema else None))
    missing = [k for k in _REQUIRED + (schema.required if schema else ()) if k not in table]
    if missing:
        raise missing_keys(missing, at)
    options = schema.parse({k: v for k, v in table.items() if k not in COMMON_KEYS}, at)
    ramp = getattr(options, "ramp", None)
    if ramp is not None and ramp not in ramps and ramp not in library:
        known = ", ".join(sorted(ramps)) if ramps else "none are defined"
        extra = f"; library: {', '.join(sorted(library))}" if library else ""
        raise StyleError(f"{at.path}: unknown ramp {ramp!r}; ramps: {known}{extra}")
    role = check_choice(table["role"], ROLES, at.at("role"), "layer role")
    if role not in schema.roles:
        raise StyleError(f"{at.at('role').path}: a {schema.name} layer cannot be {role!r} (its "
                         f"rules would not be applied); allowed: {', '.join(schema.roles)}")
    return LayerSpec(
        name=name,
        role=role,
        kind=schema.name,
        source=Path(string()(table["source"], at.at("source"))),
        blend=check_choice(table.get("blend", "normal"), BLEND_MODES, at.at("blend"), "blend mode"),
        opacity=number(ge=0, le=1)(table.get("opacity", 1.0), at.at("opacity")),
        enabled=True,
        options=options,
    )


def check_avoid(layers: Sequence[LayerSpec], all_names: Sequence[str] = ()) -> None:
    """A labels layer's ``avoid`` names layers of a kind in
    :data:`~compose.style.kinds.AVOIDABLE` (lines, areas), else a :class:`StyleError` with its
    key path. ``layers``: the enabled ones; ``all_names``: every layer of the style. A disabled
    layer named is passed over (a style that extends another may turn one off, or
    ``--set layer.NAME.enabled=false``): there is nothing drawn to keep off."""
    kinds = {spec.name: spec.kind for spec in layers}
    for spec in layers:
        names = getattr(spec.options, "avoid", ())
        if spec.kind != "labels" or not names:
            continue
        path = Scope(f'layer "{spec.name}"').at("avoid").path
        for name in names:
            kind = kinds.get(name)
            if kind in AVOIDABLE or (kind is None and name in all_names):
                continue
            known = [l.name for l in layers if l.kind in AVOIDABLE]
            some = f"; lines and areas layers: {', '.join(known) if known else 'none'}"
            if kind is not None:
                raise StyleError(f'{path}: layer "{name}" is a {kind} layer; avoid needs a lines '
                                 f"or areas layer{some}")
            raise StyleError(f'{path}: no lines or areas layer named "{name}"{some}')


def _build(merged: dict, origin: dict[str, Path], files: list[_File], require_map: bool,
           library: bool = True, variables: Mapping[str, str] | None = None) -> Style:
    top = files[-1]
    members = series_members(merged.get("series"), "the style")
    if variables is not None:
        unknown = sorted(set(variables) - set(members[0] if members else {}))
        if unknown:
            raise StyleError(f"series variable(s) {', '.join(unknown)} are not in [series]")
        series_table = merged.pop("series", None)
        merged = substitute(merged, variables)
        if series_table is not None:
            merged["series"] = series_table
    if "map" in merged:
        spec = build_from_table(MapSpec, merged["map"], Scope("", ("map",)))
    elif require_map:
        raise StyleError("no [map] table; a style to render needs map.crs, map.extent and map.pixel "
                         "(or map.like = \"a raster layer's name\")")
    else:
        spec = None
    page = None
    if "page" in merged:
        from compose.page.spec import parse_page
        page = parse_page(merged["page"])
    stated = frozenset(f"{t}.{k}" for t, table in merged["budget"].items() for k in table)
    budgets = build_from_table(Budgets, merged["budget"], Scope("", ("budget",)), stated=stated)
    own = {name: RampTable(name, freeze(table), origin[name], origin[name].parent)
           for name, table in merged["ramp"].items()}
    lib: Mapping[str, Any] = {}
    if library:   # library ramps are named freely; the style's own replace them
        lib = library_tables()
    layers = []
    for table in merged["layer"]:
        at = Scope(f'layer "{table["name"]}"').at("enabled")
        if boolean()(table.get("enabled", True), at):
            layers.append(parse_layer(table, own, lib))
    if library:
        from compose.ramps.library import with_library
        used = [r for r in (getattr(l.options, "ramp", None) for l in layers) if r is not None]
        ramps = with_library(own, used, lib)
    else:
        ramps = MappingProxyType(own)
    if require_map and not layers:
        raise StyleError("the style has no layers; add at least one [[layer]]")
    check_avoid(layers, [str(t["name"]) for t in merged["layer"]])
    if spec is not None and spec.like is not None:
        like = next((l for l in layers if l.name == spec.like), None)
        if like is None:
            names = ", ".join(l.name for l in layers) or "none"
            raise StyleError(f'map.like: no enabled layer named "{spec.like}"; layers: {names}')
        if not LAYER_KINDS[like.kind].raster:
            raise StyleError(f'map.like: layer "{like.name}" is a {like.kind} layer; like needs a '
                             "raster layer (relief, field or classes)")
    name = spec.name if spec is not None and spec.name else top.path.stem
    if variables and not _names_member(files, merged):
        name = "-".join([name] + [_safe(v) for v in variables.values()])
    return Style(path=top.path, name=name, map=spec, budgets=budgets, ramps=ramps,
                 layers=tuple(layers), text=top.text, chain=tuple(f.path for f in files),
                 waivers=_waivers(merged["waive"], layers), page=page,
                 series=tuple(MappingProxyType(m) for m in members),
                 variables=MappingProxyType(dict(variables)) if variables is not None else None)


def _names_member(files: list[_File], merged: dict) -> bool:
    """True when the style's own ``map.name`` uses a series variable (so members differ)."""
    for f in reversed(files):
        name = f.data.get("map", {}).get("name")
        if name is not None:
            return isinstance(name, str) and "{" in name
    return False


def _safe(value: str) -> str:
    """A series value as part of a file name: letters, digits, '-', '_' and '.' kept."""
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in value) or "_"


def _waivers(tables: list[dict], layers: list[LayerSpec]) -> tuple[Waiver, ...]:
    """``[[waive]]`` tables -> :class:`Waiver` s; the rule must be in the catalogue and the layer
    drawn (a waiver of nothing would hide a typo)."""
    if not tables:          # the checker's package stays unloaded (a draft forks before it)
        return ()
    from compose.check.catalog import CATALOG

    names = [spec.name for spec in layers]
    out = []
    for i, t in enumerate(tables, start=1):
        at = Scope(f"waive {i}")
        rule = check_choice(t["rule"], CATALOG, at.at("rule"), "rule id")
        if t["layer"] not in names:
            raise StyleError(f"{at.at('layer').path}: no drawn layer {t['layer']!r}; layers: "
                             f"{', '.join(names)}")
        out.append(Waiver(rule, t["layer"], t["reason"].strip()))
    return tuple(out)


@functools.lru_cache(maxsize=1)
def library_tables() -> Mapping[str, Any]:
    """The ramp library's ramps by name (:mod:`compose.ramps.library`): read-only
    :class:`compose.style.model.RampTable` objects, read once per process."""
    from compose.ramps.library import library_path

    return load_style(library_path(), require_map=False, library=False).ramps


def load_style(path: str | Path, *, require_map: bool = True, library: bool = True,
               overrides: Mapping[str, Any] | Sequence[Override] | None = None,
               variables: Mapping[str, str] | None = None) -> Style:
    """Load, merge (``extends``) and validate the style at ``path``.

    ``require_map=False`` accepts a file without ``[map]`` and layers, such as a ramp library
    (``Style.map`` is then None). Raises :class:`StyleError` (or its :class:`ColorError`) with a
    one-line message naming the file, the key path and the value. Layer sources are made
    absolute but not checked for existence.

    ``library``: complete the style's ramps with the library ramps it names (and their twin
    bases; :mod:`compose.ramps.library`); False reads the file's own ramps only.

    ``overrides``: key path -> value (``{"map.pixel": 60}``) or ``--set`` changes, applied to the
    merged tables before validation (:mod:`compose.style.overrides`). ``variables``: one series
    member's values, filled into every string (``{date}``); the output name gets the values
    appended unless ``map.name`` uses them.
    """
    path = _resolve(Path(path).expanduser(), "style file")
    files = _chain(path)
    merged, origin = _merge(files)
    with _blame(path):
        if overrides:
            apply_overrides(merged, overrides)
        return _build(merged, origin, files, require_map, library, variables)
