"""Changes to a style from outside the file: key-path overrides (``--set KEY=VALUE`` on the
command line, ``overrides={"map.pixel": 60}`` in :func:`compose.load_style`) and series variables.

Keys are dotted paths into the merged style: ``map.title``, ``page.title``, ``budget.ground.chroma``,
``ramp.NAME.domain``, ``layer.NAME.source``, ``layer.NAME.shade.azimuth`` (a layer name may itself
contain dots or spaces: the longest layer name that fits is taken). The value is read as a TOML
value (``[0, 10]``, ``true``, ``2.5``, ``"text"``) and, when it is not one, kept as plain text, so
``--set map.title=Dry season`` works unquoted. A ``layer.NAME.source`` set from the command line is
relative to the working folder. Overrides are applied to the merged style (after ``extends``)
before it is validated, so an overridden value is checked like a written one and errors name the
key path.

Series variables (``[series]``, e.g. ``date = ["2024-04", "2024-05"]``) fill ``{date}`` in every
string of the style; ``{{`` and ``}}`` stand for literal braces.
"""
from __future__ import annotations

import string
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from compose.errors import StyleError

__all__ = ["Override", "parse_override", "apply_overrides", "series_members", "substitute"]

_TABLES = ("map", "page", "budget", "ramp", "layer", "series")


@dataclass(frozen=True, slots=True)
class Override:
    """One ``--set``: the key as written, and its parsed value."""

    key: str
    value: Any


def parse_override(text: str) -> Override:
    """``"map.title=Dry season"`` -> Override("map.title", "Dry season"); StyleError if malformed."""
    if "=" not in text:
        raise StyleError(f"--set {text!r}: write KEY=VALUE, e.g. map.title=\"Dry season\"")
    key, raw = (part.strip() for part in text.split("=", 1))
    _check_key(key, f"--set {key}")
    try:
        value = tomllib.loads(f"v = {raw}")["v"]
    except tomllib.TOMLDecodeError:
        value = raw
    return Override(key, value)


def _check_key(key: str, where: str) -> None:
    parts = str(key).split(".")
    if len(parts) < 2 or parts[0] not in _TABLES or not all(parts):
        raise StyleError(f"{where}: a key path starts with one of {', '.join(_TABLES)} and names a "
                         "key, e.g. map.pixel")


def _set(table: dict, parts: Sequence[str], value: Any, where: str) -> None:
    for i, part in enumerate(parts[:-1]):
        nxt = table.get(part)
        if nxt is None:
            nxt = table[part] = {}
        elif not isinstance(nxt, dict):
            raise StyleError(f"{where}: {'.'.join(parts[:i + 1])} is not a table")
        table = nxt
    table[parts[-1]] = value


def apply_overrides(merged: dict, overrides: Mapping[str, Any] | Sequence[Override],
                    cwd: Path | None = None) -> None:
    """Apply ``overrides`` in order to the merged style tables (in place): a mapping key path ->
    value (errors say ``override KEY``) or :class:`Override` s from the command line (``--set KEY``)."""
    cwd = Path.cwd() if cwd is None else Path(cwd)
    if isinstance(overrides, Mapping):
        items = [(str(k), v, f"override {k}") for k, v in overrides.items()]
    else:
        items = [(o.key, o.value, f"--set {o.key}") for o in overrides]
    for key, value, where in items:
        _check_key(key, where)
        head, rest = key.split(".", 1)
        if head == "series":
            raise StyleError(f"{where}: series values are set in the style's [series] table")
        if head in ("budget", "ramp") and "." not in rest:
            raise StyleError(f"{where}: name the {head} table and its key, e.g. {head}.NAME.KEY")
        if head != "layer":
            _set(merged.setdefault(head, {}), rest.split("."), value, where)
            continue
        names = sorted((t["name"] for t in merged.get("layer", [])), key=len, reverse=True)
        name = next((n for n in names if rest.startswith(n + ".")), None)
        if name is None:
            known = ", ".join(t["name"] for t in merged.get("layer", [])) or "none"
            raise StyleError(f'{where}: no layer named "{rest.split(".")[0]}"; layers: {known}')
        keys = rest[len(name) + 1:].split(".")
        if keys == ["name"]:
            raise StyleError(f"{where}: a layer's name cannot be changed")
        if keys == ["source"] and isinstance(value, str) and value.strip():
            value = str((cwd / value).resolve())
        table = next(t for t in merged["layer"] if t["name"] == name)
        _set(table, keys, value, where)


def series_members(table: Mapping[str, Any] | None, where: str) -> list[dict[str, str]]:
    """The members of a ``[series]`` table: variable -> list of values, all lists the same length
    (members are taken in order, the i-th value of every variable together)."""
    if not table:
        return []
    lengths = set()
    for name, values in table.items():
        if not name.isidentifier():
            raise StyleError(f"{where}: series.{name}: a variable name is letters, digits and _")
        if not isinstance(values, (list, tuple)) or not values or not all(
                isinstance(v, (str, int, float)) and not isinstance(v, bool) for v in values):
            raise StyleError(f"{where}: series.{name} must be a list of values, got {values!r}")
        lengths.add(len(values))
    if len(lengths) != 1:
        raise StyleError(f"{where}: every [series] variable needs the same number of values; got "
                         + ", ".join(f"{k} {len(v)}" for k, v in table.items()))
    n = lengths.pop()
    return [{k: str(v[i]) for k, v in table.items()} for i in range(n)]


def _fill(text: str, variables: Mapping[str, str], at: str) -> str:
    if "{" not in text and "}" not in text:
        return text
    try:
        fields = [f for _, f, _, _ in string.Formatter().parse(text) if f is not None]
    except ValueError as exc:
        raise StyleError(f"{at}: {text!r}: {exc} (write {{{{ and }}}} for literal braces)") from None
    for f in fields:
        if f not in variables:
            known = ", ".join(variables) or "none (declare them in [series])"
            raise StyleError(f"{at}: {text!r} uses {{{f}}}; series variables: {known}")
    return text.format_map(variables)


def substitute(value: Any, variables: Mapping[str, str], at: str = "the style") -> Any:
    """``value`` with every string's ``{name}`` replaced (tables and arrays walked)."""
    if isinstance(value, str):
        return _fill(value, variables, at)
    if isinstance(value, dict):
        return {k: substitute(v, variables, f"{at}.{k}" if at != "the style" else k)
                for k, v in value.items()}
    if isinstance(value, list):
        return [substitute(v, variables, at) for v in value]
    return value
