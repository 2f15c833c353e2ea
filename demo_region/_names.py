"""Invented names built from syllables for the demo region (dev script, not part of compose)."""

from __future__ import annotations

import numpy as np

__all__ = ["invent_names"]

_FIRST = ["Vel", "Dor", "Ismar", "Keth", "Orv", "Sabr", "Tul", "Quer", "Ruv", "Fenn",
          "Aldr", "Morv", "Ysk", "Brenn", "Caul", "Harv", "Ost", "Nim", "Zeld", "Lusk"]
_MID = ["a", "e", "i", "o", "u", "ae", "ey"]
_LAST = ["dun", "mere", "vik", "stal", "rin", "beck", "wen", "thorp", "lys", "garde",
         "nor", "sket", "dale", "mont", "roc", "vale", "brae", "holm", "quay", "fell"]


def invent_names(rng: np.random.Generator, count: int, taken: set[str] | None = None) -> list[str]:
    """``count`` distinct invented names (first syllable + vowel + ending), none in ``taken``.

    ``taken`` is updated with the new names, so calls sharing it never repeat a name.
    """
    taken = set() if taken is None else taken
    out: list[str] = []
    while len(out) < count:
        name = (_FIRST[rng.integers(len(_FIRST))] + _MID[rng.integers(len(_MID))]
                + _LAST[rng.integers(len(_LAST))])
        name = name[0] + name[1:].lower()
        if name not in taken:
            taken.add(name)
            out.append(name)
    return out
