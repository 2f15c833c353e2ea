"""Small validation helpers for style tables: key paths, typed readers, key and choice checks.

A :class:`Scope` says where a value sits (``layer "coast": width``, ``map.extent``) so every
message names its key path. A *reader* is a function ``(value, at: Scope) -> parsed`` that
checks one value's type and range and raises :class:`StyleError` with a one-line message.
Dataclass fields declare their reader with :func:`option`; :func:`build_from_table` turns a TOML
table into such a dataclass (unknown keys, missing keys, types), so each schema is stated once.
"""
from __future__ import annotations

import difflib
import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import MISSING, Field, dataclass, field, fields
from types import MappingProxyType
from typing import Any

from compose.color.parse import parse_color
from compose.errors import StyleError

__all__ = [
    "RGB", "Reader", "Scope", "suggest", "check_keys", "check_choice", "missing_keys",
    "as_table", "number", "integer", "string", "boolean", "choice", "color", "pair", "numbers",
    "scalars", "table_of", "option", "option_keys", "required_keys", "build_from_table",
]

RGB = tuple[float, float, float]
Reader = Callable[[Any, "Scope"], Any]


@dataclass(frozen=True, slots=True)
class Scope:
    """A place in a style for messages.

    label: the object the keys belong to, e.g. ``'layer "coast"'``; ``''`` for the file's tables.
    parts: the dotted key path inside it, e.g. ``("map", "extent")`` or ``("shade",)``.
    """

    label: str = ""
    parts: tuple[str, ...] = ()

    def at(self, key: str) -> Scope:
        """The scope of ``key`` inside this one."""
        return Scope(self.label, self.parts + (str(key),))

    @property
    def path(self) -> str:
        """Key path for value messages: ``layer "coast": shade.azimuth``, ``map.extent``."""
        dotted = ".".join(self.parts)
        if self.label and dotted:
            return f"{self.label}: {dotted}"
        return self.label or dotted or "the style"

    @property
    def here(self) -> str:
        """Table name for "in ..." messages: ``layer "relief".shade``, ``map``, ``the style``."""
        dotted = ".".join(self.parts)
        if self.label and dotted:
            return f"{self.label}.{dotted}"
        return self.label or dotted or "the style"


def _quote_list(items: Iterable[str]) -> str:
    return ", ".join(repr(str(i)) for i in items)


def suggest(key: str, allowed: Iterable[str]) -> str | None:
    """The closest allowed key to ``key`` (difflib ratio >= 0.6), or None."""
    matches = difflib.get_close_matches(str(key), [str(a) for a in allowed], n=1, cutoff=0.6)
    return matches[0] if matches else None


def check_keys(table: Mapping, allowed: Iterable[str], at: Scope,
               hint: Callable[[str], str | None] | None = None) -> None:
    """Raise on the first key of ``table`` not in ``allowed``, suggesting the closest allowed key.

    ``hint(key)`` may supply a fallback explanation when no key is close.
    """
    allowed = list(allowed)
    for key in table:
        if key in allowed:
            continue
        msg = f"unknown key {str(key)!r} in {at.here}"
        best = suggest(key, allowed)
        extra = hint(key) if hint is not None and best is None else None
        if best is not None:
            msg += f"; did you mean {best!r}?"
        elif extra:
            msg += f"; {extra}"
        else:
            msg += f"; known keys: {', '.join(sorted(allowed))}"
        raise StyleError(msg)


def missing_keys(keys: Iterable[str], at: Scope) -> StyleError:
    """The error for required ``keys`` absent from the table at ``at``."""
    keys = list(keys)
    word = "key" if len(keys) == 1 else "keys"
    return StyleError(f"{at.here}: missing {word} {_quote_list(keys)}")


def check_choice(value: Any, choices: Iterable[str], at: Scope, what: str) -> str:
    """Return ``value`` if it is one of ``choices``; else raise, listing them all."""
    choices = list(choices)
    if isinstance(value, str) and value in choices:
        return value
    raise StyleError(f"{at.path}: {value!r} is not a {what}; one of: {', '.join(choices)}")


def as_table(value: Any, at: Scope) -> Mapping:
    """``value`` if it is a TOML table, else raise."""
    if not isinstance(value, Mapping):
        raise StyleError(f"{at.path} must be a table, got {value!r}")
    return value


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _bounds(gt=None, ge=None, lt=None, le=None) -> tuple[Callable[[float], bool], str]:
    """A range test and its wording, e.g. ``'between 0 and 1'`` or ``'> 0'``."""
    if ge is not None and le is not None and gt is None and lt is None:
        return (lambda v: ge <= v <= le), f"between {ge:g} and {le:g}"
    tests, words = [], []
    for bound, op, ok in ((gt, ">", lambda v, b: v > b), (ge, ">=", lambda v, b: v >= b),
                          (lt, "<", lambda v, b: v < b), (le, "<=", lambda v, b: v <= b)):
        if bound is not None:
            tests.append((ok, bound))
            words.append(f"{op} {bound:g}")
    return (lambda v: all(ok(v, b) for ok, b in tests)), " and ".join(words)


def number(*, gt: float | None = None, ge: float | None = None, lt: float | None = None,
           le: float | None = None) -> Reader:
    """Reader of a finite number (float) inside the given bounds."""
    inside, wording = _bounds(gt, ge, lt, le)

    def read(value: Any, at: Scope) -> float:
        if not _is_number(value) or not math.isfinite(value):
            raise StyleError(f"{at.path} must be a number, got {value!r}")
        if not inside(value):
            raise StyleError(f"{at.path} must be {wording}, got {value:g}")
        return float(value)
    return read


def integer(*, ge: int | None = None, le: int | None = None) -> Reader:
    """Reader of a whole number (int) inside the given bounds."""
    inside, wording = _bounds(None, ge, None, le)

    def read(value: Any, at: Scope) -> int:
        if not isinstance(value, int) or isinstance(value, bool):
            raise StyleError(f"{at.path} must be a whole number, got {value!r}")
        if not inside(value):
            raise StyleError(f"{at.path} must be {wording}, got {value}")
        return int(value)
    return read


def string() -> Reader:
    """Reader of a non-empty string."""
    def read(value: Any, at: Scope) -> str:
        if not isinstance(value, str) or not value.strip():
            raise StyleError(f"{at.path} must be a non-empty string, got {value!r}")
        return value
    return read


def boolean() -> Reader:
    """Reader of ``true`` / ``false``."""
    def read(value: Any, at: Scope) -> bool:
        if not isinstance(value, bool):
            raise StyleError(f"{at.path} must be true or false, got {value!r}")
        return value
    return read


def choice(choices: Iterable[str], what: str) -> Reader:
    """Reader of one of a closed set of strings; the message lists them (``what``: 'blend mode')."""
    choices = tuple(choices)
    return lambda value, at: check_choice(value, choices, at, what)


def color() -> Reader:
    """Reader of a colour (``"#rrggbb"``, ``"#rgb"``, ``{L, C, h}``) -> gamma-encoded sRGB in [0, 1]."""
    return lambda value, at: parse_color(value, where=at.path)


def pair(*, ge: float | None = None, le: float | None = None, whole: bool = False) -> Reader:
    """Reader of ``[low, high]`` with low <= high, both inside [ge, le]; ints when ``whole``."""
    item = integer(ge=ge, le=le) if whole else number(ge=ge, le=le)
    kind = "whole numbers" if whole else "numbers"

    def read(value: Any, at: Scope) -> tuple:
        ok = isinstance(value, list) and len(value) == 2 and all(_is_number(v) for v in value)
        if not ok or (whole and not all(isinstance(v, int) for v in value)):
            raise StyleError(f"{at.path} must be 2 {kind} [low, high], got {value!r}")
        lo, hi = (item(v, at) for v in value)
        if lo > hi:
            raise StyleError(f"{at.path}: need low <= high, got {value!r}")
        return lo, hi
    return read


def numbers(*, gt: float | None = None, ge: float | None = None, le: float | None = None,
            even: bool = False, min_count: int = 1, max_count: int = 256) -> Reader:
    """Reader of a list of numbers -> tuple of floats (``min_count`` to ``max_count`` of them;
    an even count if asked)."""
    item = number(gt=gt, ge=ge, le=le)

    def read(value: Any, at: Scope) -> tuple[float, ...]:
        if (not isinstance(value, list) or not min_count <= len(value) <= max_count
                or (even and len(value) % 2)):
            need = "an even count of numbers" if even else f"at least {min_count} numbers"
            raise StyleError(f"{at.path} must be a list of {need}, got {value!r}")
        return tuple(item(v, at) for v in value)
    return read


def scalars() -> Reader:
    """Reader of ``{ key = value | [values] }`` -> read-only mapping key -> tuple of values."""
    def read(value: Any, at: Scope) -> Mapping[str, tuple]:
        table = as_table(value, at)
        out = {}
        for key, v in table.items():
            vals = v if isinstance(v, list) else [v]
            if not vals or not all(isinstance(x, (str, int, float)) for x in vals):
                raise StyleError(f"{at.at(key).path} must be a value or a list of values, got {v!r}")
            out[str(key)] = tuple(vals)
        return MappingProxyType(out)
    return read


def table_of(cls: type) -> Reader:
    """Reader of a sub-table into the dataclass ``cls`` (fields declared with :func:`option`)."""
    return lambda value, at: build_from_table(cls, as_table(value, at), at)


def option(read: Reader, default: Any = MISSING, *, factory: Callable[[], Any] | None = None,
           group: str | None = None) -> Any:
    """A dataclass field read from a style key of the same name with ``read``.

    No ``default`` (and no ``factory``) makes the key required. ``group`` puts the key inside an
    inline sub-table of that name (``shade = { azimuth = .. }``).
    """
    meta = {"read": read, "group": group}
    if factory is not None:
        return field(default_factory=factory, metadata=meta)
    return field(default=default, metadata=meta)


def _options(cls: type) -> list[Field]:
    return [f for f in fields(cls) if "read" in f.metadata]


def _required(f: Field) -> bool:
    return f.default is MISSING and f.default_factory is MISSING


def option_keys(cls: type) -> tuple[str, ...]:
    """The keys a table of ``cls`` may state at its own level (group names stand for their keys)."""
    keys: list[str] = []
    for f in _options(cls):
        k = f.metadata["group"] or f.name
        if k not in keys:
            keys.append(k)
    return tuple(keys)


def required_keys(cls: type) -> tuple[str, ...]:
    """Keys of ``cls`` without a default."""
    return tuple(f.name for f in _options(cls) if _required(f) and not f.metadata["group"])


def build_from_table(cls: type, table: Mapping, at: Scope, *, check: bool = True, **extra: Any):
    """Read ``table`` into the dataclass ``cls``: unknown keys, missing keys, then each value.

    Fields declared with :func:`option` are read from the key of their name (inside their group's
    sub-table if any); absent keys take the field default. ``extra`` is passed to ``cls`` as is.
    """
    specs = _options(cls)
    if check:
        check_keys(table, option_keys(cls), at)
    missing = [k for k in required_keys(cls) if k not in table]
    if missing:
        raise missing_keys(missing, at)
    groups: dict[str, Mapping] = {}
    for g in {f.metadata["group"] for f in specs if f.metadata["group"]}:
        if g in table:
            groups[g] = as_table(table[g], at.at(g))
            names = [f.name for f in specs if f.metadata["group"] == g]
            check_keys(groups[g], names, at.at(g))
    values: dict[str, Any] = {}
    for f in specs:
        g = f.metadata["group"]
        source, where = (table, at) if g is None else (groups.get(g, {}), at.at(g))
        if f.name in source:
            values[f.name] = f.metadata["read"](source[f.name], where.at(f.name))
    return cls(**values, **extra)
