"""One spelling per concept in code: identifiers and file names say ``color`` and ``gray`` (the
package is ``compose.color``, the style key ``color``, as in CSS Color 4). Prose may stay
British; the third-party ``colour`` package (colour-science) keeps its own names."""
from __future__ import annotations

import io
import re
import tokenize
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: Names of the colour-science package itself, which are not ours to spell.
THIRD_PARTY = {"colour", "ColourUsageWarning", "RGB_COLOURSPACES"}
BRITISH = re.compile(r"grey|colour", re.IGNORECASE)


def _sources():
    for top in ("compose", "tests", "bench", "demo_region"):
        yield from sorted((ROOT / top).rglob("*.py"))


def test_identifiers_use_color_and_gray():
    found = []
    for path in _sources():
        tokens = tokenize.generate_tokens(io.StringIO(path.read_text()).readline)
        for tok in tokens:
            if tok.type != tokenize.NAME or tok.string in THIRD_PARTY:
                continue
            if BRITISH.search(tok.string.replace("colour_science", "")):
                found.append(f"{path.relative_to(ROOT)}:{tok.start[0]}: {tok.string}")
    assert not found, "\n".join(found)


def test_file_names_use_color_and_gray():
    names = [p.relative_to(ROOT).as_posix() for p in ROOT.rglob("*")
             if not any(part.startswith(".") for part in p.relative_to(ROOT).parts)
             and "egg-info" not in p.as_posix() and BRITISH.search(p.name)]
    assert not names
