"""Validate one ``[ramp.NAME]`` table of a style into a :class:`RampSpec` (nothing built yet).

The style loader hands each ramp over as raw TOML values; every key is checked here, and every
error is a one-line :class:`StyleError` naming the file, the ramp and the key, e.g.
``styles/x.toml: ramp "sea": unknown key 'hues'; did you mean 'hue'?``.
"""
from __future__ import annotations

import difflib
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from compose.color.lab import srgb_to_lch
from compose.color.parse import parse_color
from compose.errors import StyleError

__all__ = ["KINDS", "STEP_METHODS", "MAX_SAMPLES", "RampClass", "RampSpec", "parse_ramp", "closest"]

KINDS = ("sequential", "diverging", "qualitative", "threshold")
STEP_METHODS = ("equal", "quantile")
MAX_SAMPLES = 65533  # + outside low, outside high, nodata entries = 65536 indices of a uint16 image

_SAMPLING = {"domain", "outside", "nodata", "steps", "step_method", "breaks", "samples"}
_KEYS = {
    "sequential": {"kind", "space", "through", "reverse", "values"} | _SAMPLING,
    "diverging": {"kind", "space", "through", "center", "reverse"} | _SAMPLING,
    "threshold": {"kind", "space", "at", "below", "above"} | _SAMPLING,
    "qualitative": {"kind", "classes", "nodata"},
    "twin": {"twin", "hue", "kind"} | _SAMPLING,
}
_CLASS_KEYS = ("value", "label", "color", "family")
_OUTSIDE_KEYS = ("low", "high")   # outside = { low = colour below the domain, high = above }


@dataclass(frozen=True, slots=True)
class RampClass:
    """One class of a qualitative ramp: data value, legend label, sRGB colour (floats 0-1), family."""

    value: float
    label: str
    rgb: tuple[float, float, float]
    family: str | None = None


@dataclass(frozen=True, slots=True)
class RampSpec:
    """A validated ramp table. Stops are CIE LCh(ab) triples (L* 0-100, C*ab, h degrees)."""

    name: str
    kind: str                      # sequential | diverging | qualitative | threshold | twin
    path: Path
    space: str = "cam02ucs"
    domain: tuple[float, float] | None = None   # None: twin inherits its base's; else [0, 1]
    through: tuple[tuple[float, float, float], ...] = ()
    below: tuple[tuple[float, float, float], ...] = ()
    above: tuple[tuple[float, float, float], ...] = ()
    center: float | None = None
    at: float | None = None
    twin: str | None = None
    hue: tuple[float, float] | None = None
    classes: tuple[RampClass, ...] = ()
    outside_low: tuple[float, float, float] | None = None    # drawn below the domain
    outside_high: tuple[float, float, float] | None = None   # drawn above the domain
    nodata: tuple[float, float, float] | None = None
    steps: int | None = None
    step_method: str | None = None
    breaks: tuple[float, ...] | None = None
    samples: int | None = None
    values: tuple[float, ...] | None = None     # sequential: the data value of each stop (pinned)
    listed_reversed: bool = False   # sequential: ``through`` runs opposite to the file's listing

    @property
    def where(self) -> str:
        """Message prefix ``'<file>: ramp "<name>"'``."""
        return f'{self.path}: ramp "{self.name}"'


def closest(word: str, choices) -> str:
    """``"; did you mean 'x'?"`` when a choice is close to ``word``, else ``"; one of: a, b"``."""
    choices = sorted(choices)
    near = difflib.get_close_matches(word, choices, n=1, cutoff=0.6)
    if near:
        return f"; did you mean '{near[0]}'?"
    return f"; one of: {', '.join(choices)}"


def _is_list(value) -> bool:
    """TOML arrays arrive as lists (or tuples, from a read-only copy)."""
    return isinstance(value, (list, tuple))


def _number(value, where: str, key: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise StyleError(f"{where}: '{key}' must be a finite number, got {value!r}")
    return float(value)


def _integer(value, where: str, key: str, lo: int, hi: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
        raise StyleError(f"{where}: '{key}' must be a whole number from {lo} to {hi}, got {value!r}")
    return int(value)


def _lch(value, where: str) -> tuple[float, float, float]:
    """A stop: LCh tables are kept exactly; hex strings are converted (checked by parse_color)."""
    rgb = parse_color(value, where)
    if isinstance(value, Mapping):
        return (float(value["L"]), float(value["C"]), float(value["h"]) % 360.0)
    return tuple(float(v) for v in srgb_to_lch(np.array(rgb)))


def _stops(table: Mapping, key: str, where: str, minimum: int) -> tuple:
    value = table.get(key)
    if value is None:
        raise StyleError(f"{where}: missing key '{key}' (a list of at least {minimum} colours)")
    if not _is_list(value) or len(value) < minimum:
        raise StyleError(f"{where}: '{key}' must be a list of at least {minimum} colours, got {value!r}")
    return tuple(_lch(v, f"{where}: {key}[{i}]") for i, v in enumerate(value))


#: Largest magnitude of a ramp domain end (data units).
MAX_DOMAIN = 1e15


def _domain(table: Mapping, where: str) -> tuple[float, float] | None:
    if "domain" not in table:
        return None
    value = table["domain"]
    if not _is_list(value) or len(value) != 2:
        raise StyleError(f"{where}: 'domain' must be [low, high], got {value!r}")
    lo, hi = (_number(v, where, "domain") for v in value)
    if lo == hi:
        raise StyleError(f"{where}: 'domain' needs two different values, got {value!r}")
    # our own bound (no source): beyond it steps between 1024 table entries lose precision
    if max(abs(lo), abs(hi)) > MAX_DOMAIN or abs(hi - lo) < max(abs(lo), abs(hi)) * 1e-9:
        raise StyleError(f"{where}: 'domain' must lie within +-{MAX_DOMAIN:g} and span more than "
                         f"a billionth of its magnitude, got {value!r}")
    return (lo, hi)


def _pinned(table: Mapping, where: str, n: int) -> tuple[float, ...] | None:
    """``values``: the data value of each of the ``n`` stops, strictly increasing or decreasing."""
    if "values" not in table:
        return None
    value = table["values"]
    if not _is_list(value) or len(value) != n:
        raise StyleError(f"{where}: 'values' must list one data value per stop ({n}), got {value!r}")
    v = [_number(x, where, "values") for x in value]
    d = np.diff(v)
    if not (np.all(d > 0) or np.all(d < 0)):
        raise StyleError(f"{where}: 'values' must increase (or decrease) strictly, got {value!r}")
    return tuple(v)


def _inside(value, key: str, domain: tuple[float, float], where: str) -> float:
    v = _number(value, where, key)
    if not domain[0] < v < domain[1]:
        raise StyleError(f"{where}: '{key}' = {v:g} must lie inside the domain "
                         f"[{domain[0]:g}, {domain[1]:g}]")
    return v


def _classes(table: Mapping, where: str) -> tuple[RampClass, ...]:
    value = table.get("classes")
    if not _is_list(value) or len(value) < 2:
        raise StyleError(f"{where}: 'classes' must be a list of at least 2 tables "
                         f"{{value, label, color, family}}, got {value!r}")
    out, seen = [], set()
    for i, item in enumerate(value):
        w = f"{where}: classes[{i}]"
        if not isinstance(item, Mapping):
            raise StyleError(f"{w}: must be a table {{value, label, color, family}}, got {item!r}")
        for key in item:
            if key not in _CLASS_KEYS:
                raise StyleError(f"{w}: unknown key '{key}'{closest(key, _CLASS_KEYS)}")
        for key in ("value", "color"):
            if key not in item:
                raise StyleError(f"{w}: missing key '{key}'")
        v = _number(item["value"], w, "value")
        if v in seen:
            raise StyleError(f"{w}: value {v:g} is given twice")
        seen.add(v)
        label = item.get("label", f"{v:g}")
        family = item.get("family")
        if not isinstance(label, str) or (family is not None and not isinstance(family, str)):
            raise StyleError(f"{w}: 'label' and 'family' must be strings")
        out.append(RampClass(v, label, parse_color(item["color"], f"{w}: color"), family))
    return tuple(out)


def _sampling(table: Mapping, where: str, domain) -> dict:
    out: dict = {}
    if "nodata" in table:
        out["nodata"] = parse_color(table["nodata"], f"{where}: nodata")
    if "outside" in table:
        outside = table["outside"]
        if not isinstance(outside, Mapping):
            raise StyleError(f"{where}: 'outside' must be a table {{ low = colour, high = colour }}, "
                             f"got {outside!r}")
        for key in outside:
            if key not in _OUTSIDE_KEYS:
                raise StyleError(f"{where}: outside: unknown key '{key}'{closest(str(key), _OUTSIDE_KEYS)}")
        for key in _OUTSIDE_KEYS:
            if key in outside:
                out[f"outside_{key}"] = parse_color(outside[key], f"{where}: outside.{key}")
    if "samples" in table:
        out["samples"] = _integer(table["samples"], where, "samples", 2, MAX_SAMPLES)
    if "steps" in table and "breaks" in table:
        raise StyleError(f"{where}: give either 'steps' or 'breaks', not both")
    if "steps" in table:
        out["steps"] = _integer(table["steps"], where, "steps", 2, 256)
    if "step_method" in table:
        method = table["step_method"]
        if method not in STEP_METHODS:
            raise StyleError(f"{where}: step_method '{method}' is not a step method; "
                             f"one of: {', '.join(STEP_METHODS)}")
        if "steps" not in table:
            raise StyleError(f"{where}: 'step_method' needs 'steps' (a class count)")
        out["step_method"] = method
    if "breaks" in table:
        value = table["breaks"]
        if not _is_list(value) or not value:
            raise StyleError(f"{where}: 'breaks' must be a list of numbers, got {value!r}")
        b = [_number(v, where, "breaks") for v in value]
        if any(y <= x for x, y in zip(b, b[1:])):
            raise StyleError(f"{where}: 'breaks' must increase strictly, got {value!r}")
        if domain is not None and (b[0] <= domain[0] or b[-1] >= domain[1]):
            raise StyleError(f"{where}: 'breaks' must lie inside the domain "
                             f"[{domain[0]:g}, {domain[1]:g}], got {value!r}")
        out["breaks"] = tuple(b)
    return out


def parse_ramp(name: str, table: Mapping, path: Path | str) -> RampSpec:
    """Validate the raw TOML ``table`` of ramp ``name`` read from ``path``; raise StyleError."""
    path = Path(path)
    where = f'{path}: ramp "{name}"'
    if not isinstance(table, Mapping):
        raise StyleError(f"{where}: must be a table, got {table!r}")
    if "twin" in table:
        kind = "twin"
        if table.get("kind", "sequential") not in ("sequential", "diverging"):
            raise StyleError(f"{where}: a twin has its base's kind (sequential or diverging); "
                             "drop 'kind'")
    else:
        if "kind" not in table:
            raise StyleError(f"{where}: missing key 'kind'; one of: {', '.join(KINDS)}")
        kind = table["kind"]
        if kind not in KINDS:
            raise StyleError(f"{where}: kind '{kind}' is not a ramp kind{closest(str(kind), KINDS)}")
    allowed = _KEYS[kind]
    for key in table:
        if key not in allowed:
            label = "a twin" if kind == "twin" else f"a {kind}"
            hint = closest(key, allowed)
            if hint.startswith("; one of"):
                hint = f" for {label} ramp{hint}"
            raise StyleError(f"{where}: unknown key '{key}'{hint}")

    if kind == "qualitative":
        nodata = parse_color(table["nodata"], f"{where}: nodata") if "nodata" in table else None
        return RampSpec(name, kind, path, classes=_classes(table, where), nodata=nodata)

    space = table.get("space", "cam02ucs")
    if kind != "twin" and space not in ("cam02ucs", "cielab"):
        raise StyleError(f"{where}: space '{space}' is not an interpolation space; one of: cam02ucs, cielab")
    domain = _domain(table, where)
    flip = False
    if "reverse" in table:
        if not isinstance(table["reverse"], bool):
            raise StyleError(f"{where}: 'reverse' must be true or false, got {table['reverse']!r}")
        flip = table["reverse"]
    values = _pinned(table, where, len(table["through"])) if kind == "sequential" and _is_list(
        table.get("through")) else None
    if values is not None:      # the stops' values set the domain; their order is the listing's
        ends = (min(values), max(values))
        if domain is not None and tuple(sorted(domain)) != ends:
            raise StyleError(f"{where}: 'domain' {list(domain)} must span the first to the last of "
                             f"'values' {list(ends)} (or leave it out)")
        domain = ends
    if domain is not None and domain[0] > domain[1]:
        if kind not in ("sequential", "diverging"):
            raise StyleError(f"{where}: a domain from high to low is for sequential and diverging "
                             f"ramps; write [low, high], got {list(domain)}")
        domain, flip = (domain[1], domain[0]), not flip
    if kind != "twin":
        domain = domain or (0.0, 1.0)
    fields = _sampling(table, where, domain)
    if kind == "twin":
        base = table["twin"]
        if not isinstance(base, str):
            raise StyleError(f"{where}: 'twin' must be the name of a ramp, got {base!r}")
        hue = table.get("hue")
        if not _is_list(hue) or len(hue) != 2:
            raise StyleError(f"{where}: 'hue' must be [hue at the low end, hue at the high end] "
                             f"in degrees, got {hue!r}")
        return RampSpec(name, kind, path, domain=domain, twin=base,
                        hue=tuple(_number(h, where, "hue") for h in hue), **fields)
    if kind == "sequential":
        through = _stops(table, "through", where, 2)
        listed_reversed = False
        if values is not None and values[0] > values[-1]:   # listed from high to low
            values, through, listed_reversed = values[::-1], through[::-1], True
        if flip:
            through, listed_reversed = through[::-1], not listed_reversed
            if values is not None:
                values = tuple(domain[0] + domain[1] - v for v in values[::-1])
        return RampSpec(name, kind, path, space, domain, through=through, values=values,
                        listed_reversed=listed_reversed, **fields)
    if kind == "diverging":
        through = _stops(table, "through", where, 3)[::-1 if flip else 1]
        if len(through) % 2 == 0:
            raise StyleError(f"{where}: 'through' needs an odd number of colours (the middle one is "
                             f"the midpoint), got {len(through)}")
        center = table.get("center", (domain[0] + domain[1]) / 2)
        return RampSpec(name, kind, path, space, domain, through=through,
                        center=_inside(center, "center", domain, where), **fields)
    if "at" not in table:
        raise StyleError(f"{where}: missing key 'at' (the data value where the hue changes)")
    return RampSpec(name, kind, path, space, domain, below=_stops(table, "below", where, 2),
                    above=_stops(table, "above", where, 2), at=_inside(table["at"], "at", domain, where),
                    **fields)
