"""Overriding keys of a style at load time: ``{"map.pixel": 60, "layer.coast.width": 1.2}``.

A key path names a table key the way the style file does: ``map.KEY``, ``budget.ROLE.KEY``,
``ramp.NAME.KEY`` and ``layer.NAME.KEY`` (a layer by its name); deeper parts name keys of inline
tables (``layer.coast.halo.width``). Overrides are applied to the merged style (after
``extends``) before it is validated, so an overridden value is checked like a written one and
errors name the key path.
"""
from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from compose.errors import StyleError

__all__ = ["apply_overrides"]

_TABLES = ("map", "budget", "ramp", "layer")


def _set(table: dict, parts: list[str], value: Any, key: str) -> None:
    for i, part in enumerate(parts[:-1]):
        nxt = table.get(part)
        if nxt is None:
            nxt = table[part] = {}
        elif not isinstance(nxt, dict):
            raise StyleError(f"override {key}: {'.'.join(parts[:i + 1])} is not a table")
        table = nxt
    table[parts[-1]] = value


def apply_overrides(merged: dict, overrides: Mapping[str, Any]) -> None:
    """Apply ``overrides`` (key path -> value) to ``merged`` style data in place."""
    for key, value in overrides.items():
        parts = str(key).split(".")
        if len(parts) < 2 or parts[0] not in _TABLES or not all(parts):
            raise StyleError(f"override {key}: a key path starts with one of "
                             f"{', '.join(_TABLES)} and names a key, e.g. map.pixel")
        head, rest = parts[0], parts[1:]
        if head == "map":
            _set(merged.setdefault("map", {}), rest, value, key)
        elif head in ("budget", "ramp"):
            if len(rest) < 2:
                raise StyleError(f"override {key}: name the {head} table and its key, "
                                 f"e.g. {head}.NAME.KEY")
            _set(merged.setdefault(head, {}).setdefault(rest[0], {}), rest[1:], value, key)
        else:
            layers = [t for t in merged.get("layer", []) if t.get("name") == rest[0]]
            if not layers:
                names = ", ".join(str(t.get("name")) for t in merged.get("layer", []))
                raise StyleError(f'override {key}: no layer named "{rest[0]}"; layers: {names}')
            if len(rest) < 2:
                raise StyleError(f"override {key}: name a key of the layer, e.g. layer.NAME.KEY")
            _set(layers[0], rest[1:], value, key)
