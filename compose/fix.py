"""``compose fix``: apply the checker's proposed changes to a style file, re-check, repeat.

Each round checks the style (at draft resolution by default, :mod:`compose.check.draft`), applies
the structured :class:`~compose.check.report.Change` of every failed rule to the style's own TOML
text with a format-preserving editor (tomlkit: comments, order and layout are kept), re-checks,
and keeps going until the check passes or a round fixes nothing more. The overlays' contrast
fixes wait until no other failed rule proposes a change: a halo or stroke is chosen against
what lies beneath it, so it is chosen on the ground and data as fixed. Changes go into the file
that was given: a layer or ramp defined in a file it ``extends`` gets an override table (layers
merge by name, ramps key by key), so shared base files are never edited.
"""
from __future__ import annotations

import difflib
import os
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import tomlkit

from compose.errors import StyleError

__all__ = ["FixRound", "FixResult", "apply_change", "fix_style", "rebase_paths"]

#: Rules whose fixes depend on what lies beneath the overlay (applied once nothing else is).
ON_TOP = ("overlay-contrast", "label-contrast", "overlay-size")

_TABLE = re.compile(r'^(layer|ramp) "([^"]+)"(?:\.(\w+)\[(\d+)\])?$')


@dataclass
class FixRound:
    """One round: the failed rules before it, and the changes applied (``Change`` objects)."""

    failed: list[str]
    changes: list[Any]


@dataclass
class FixResult:
    """What ``compose fix`` did: the original and patched text, rounds, reports before/after."""

    path: Path
    original: str
    text: str
    before: Any
    after: Any
    rounds: list[FixRound] = field(default_factory=list)
    checked: str = "draft"    # resolution of the check that gave ``after``

    @property
    def changed(self) -> bool:
        return self.text != self.original

    def diff(self, text: str | None = None, new_name: str | None = None) -> str:
        """Unified diff of the style text: as given -> patched (or ``text``, e.g. the patched
        text with paths rebased for another folder)."""
        new = self.text if text is None else text
        return "".join(difflib.unified_diff(self.original.splitlines(True), new.splitlines(True),
                                            self.path.name, new_name or f"{self.path.name} (fixed)"))


def _value(v: Any) -> Any:
    """A change value as a tomlkit item (tables inline, as styles write colours and halos)."""
    if isinstance(v, dict):
        t = tomlkit.inline_table()
        for k, x in v.items():
            t[k] = _value(x)
        return t
    if isinstance(v, (list, tuple)):
        a = tomlkit.array()
        for x in v:
            a.append(_value(x))
        return a
    if isinstance(v, float):
        return round(v, 4)
    return v


def _layer_table(doc, name: str, create: bool):
    layers = doc.get("layer")
    if layers is not None:
        for t in layers:
            if t.get("name") == name:
                return t
    if not create:
        return None
    t = tomlkit.table()
    t["name"] = name
    if layers is None:
        doc["layer"] = tomlkit.aot()
        layers = doc["layer"]
    layers.append(t)
    return layers[-1]


def _ramp_table(doc, style, name: str):
    ramps = doc.get("ramp")
    if ramps is not None and name in ramps:
        return ramps[name]
    if ramps is None:
        doc["ramp"] = tomlkit.table(is_super_table=True)
        ramps = doc["ramp"]
    t = tomlkit.table()
    raw = style.ramps[name].table if name in style.ramps else {}
    for k, v in raw.items():          # the merged table, so a list element can be edited
        t[k] = _value(_plain(v))
    ramps[name] = t
    return ramps[name]


def _plain(v: Any) -> Any:
    if hasattr(v, "items"):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return v


def apply_change(doc, style, change) -> None:
    """Apply one :class:`Change` to the tomlkit document ``doc`` of ``style``'s own file."""
    m = _TABLE.match(change.table)
    if not m:
        raise StyleError(f"cannot apply a change to {change.table}")
    kind, name, listkey, index = m.groups()
    target = _layer_table(doc, name, True) if kind == "layer" else _ramp_table(doc, style, name)
    if listkey is not None:
        target = target[listkey][int(index)]
    for key, value in change.values.items():
        *tables, last = key.split(".")            # "shade.exaggeration" -> shade = { ... }
        t = target
        for sub in tables:
            if sub not in t:
                t[sub] = tomlkit.inline_table()
            t = t[sub]
        t[last] = _value(value)


def rebase_paths(doc, old_dir: Path, new_dir: Path) -> None:
    """Rewrite ``extends`` and layer ``source`` paths of ``doc`` (relative to ``old_dir``) so
    they point at the same files from ``new_dir``."""
    old_dir, new_dir = Path(old_dir).resolve(), Path(new_dir).resolve()
    if old_dir == new_dir:
        return

    def moved(p: str) -> str:
        if os.path.isabs(p) or "://" in p or p.startswith("/vsi"):
            return p
        return Path(os.path.relpath(old_dir / p, new_dir)).as_posix()

    if isinstance(doc.get("extends"), str):
        doc["extends"] = moved(doc["extends"])
    for t in doc.get("layer") or []:
        if isinstance(t.get("source"), str):
            t["source"] = moved(t["source"])


def _check(path: Path, draft: bool):
    from compose.api import check
    return check(path, draft=draft)


def fix_style(path: str | Path, *, draft: bool = True, rounds: int = 6) -> FixResult:
    """Apply the proposed changes of every failed rule to the style at ``path`` until its check
    passes or a round changes nothing that helps; nothing is written to ``path`` (the patched
    text is in the result). Rounds check at draft resolution unless ``draft`` is False; a draft
    pass is confirmed by a full check (and rounds go on at full resolution if it fails)."""
    from compose.style import load_style

    path = Path(path).resolve()
    original = path.read_text(encoding="utf-8")
    before = _check(path, draft)
    result = FixResult(path, original, original, before, before)
    report, text = before, original
    for _ in range(rounds):
        failed = [r for r in report.rules if not r.passed]
        changes = [r.change for r in failed if r.change is not None]
        if not failed or not changes:
            break
        if any(r.rule not in ON_TOP for r in failed if r.change is not None):
            # a halo or stroke is chosen against what lies beneath it: let the ground, the data
            # and the no-data colour settle first, and judge the overlays on them next round
            changes = [r.change for r in failed if r.change is not None and r.rule not in ON_TOP]
        style = load_style(path) if text == original else load_style(_scratch(path, text))
        doc = tomlkit.parse(text)
        done: set = set()
        for c in changes:
            key = (c.table, tuple(sorted(c.values)))
            if key not in done:          # one edit per key and round (the first rule's)
                apply_change(doc, style, c)
                done.add(key)
        new_text = tomlkit.dumps(doc)
        if new_text == text:
            break
        new_report = _check(_scratch(path, new_text), draft)
        if len(new_report.failures) > len(report.failures):
            break                         # the round made things worse: keep the last text
        result.rounds.append(FixRound([r.rule for r in failed], changes))
        text, report = new_text, new_report
        if report.passed and draft:
            # a draft pass is confirmed at full resolution; further rounds use the full check
            draft = False
            report = _check(_scratch(path, text), draft)
        if report.passed:
            break
    result.text, result.after = text, report
    result.checked = "draft" if draft else "full"
    _cleanup(path)
    return result


_SCRATCH: dict[Path, Path] = {}


def _scratch(path: Path, text: str) -> Path:
    """A temporary file beside ``path`` (so relative paths resolve) holding ``text``."""
    old = _SCRATCH.get(path)
    if old is not None and old.exists():
        old.unlink()
    fd, name = tempfile.mkstemp(prefix=f".{path.stem}.fix-", suffix=".toml", dir=path.parent)
    with os.fdopen(fd, "w", encoding="utf-8") as f:
        f.write(text)
    _SCRATCH[path] = Path(name)
    return Path(name)


def _cleanup(path: Path) -> None:
    old = _SCRATCH.pop(path, None)
    if old is not None and old.exists():
        old.unlink()
