"""The rule for output names (``map.name``, the stem of NAME.png, NAME.tif, ...).

A name becomes a file name in a folder a user shares with other programs and shells, so it must
be plain: at most :data:`MAX_NAME` characters; no folder separators, no control, format
(bidirectional overrides, zero-width) or line-separator characters; not empty or blank; not
starting with ``-`` (read as an option by the next command) or ``.`` (hidden, or ``..``); no
leading or trailing space; not a name Windows reserves (CON, NUL, COM1, ...), so outputs copy
to any system. Our own rule (no source), after common practice for portable file names.
"""
from __future__ import annotations

import unicodedata

__all__ = ["MAX_NAME", "name_problem"]

#: Longest output name in characters (file systems allow 255 bytes; outputs add up to 20).
MAX_NAME = 100

_RESERVED = {"con", "prn", "aux", "nul"} | {f"{p}{i}" for p in ("com", "lpt") for i in range(1, 10)}


def name_problem(name: str) -> str | None:
    """Why ``name`` is not a safe output name, or None when it is."""
    if not isinstance(name, str) or not name.strip():
        return "must be a non-empty name"
    if len(name) > MAX_NAME:
        return f"must be at most {MAX_NAME} characters, got {len(name)}"
    if len(name.encode("utf-8", "surrogatepass")) > 200:
        return "is too long once encoded (over 200 bytes)"
    for ch in name:
        if ch in "/\\":
            return "must be a file name without folders"
        if unicodedata.category(ch) in ("Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"):
            return f"must not hold control or direction characters (U+{ord(ch):04X})"
    if name.startswith("-"):
        return "must not start with '-'"
    if name.startswith("."):
        return "must not start with '.'"
    if name != name.strip():
        return "must not start or end with a space"
    if name.split(".")[0].strip().lower() in _RESERVED:
        return "is a device name on some systems"
    return None
