"""`compose check` imports only what the check of the style needs (no timing here: the start-up
time is measured by bench/check_draft.py). Each case runs in a fresh interpreter and lists the
modules loaded afterwards."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from tests.check._maps import field, relief, style, write_style

ROOT = Path(__file__).resolve().parents[2]

# the render's writers: nothing of these is needed to judge a map held in memory
WRITERS = ("compose.render", "compose.output", "compose.page.draw", "compose.page.vectors",
           "compose.proof", "compose.tiles", "compose.cli.render", "matplotlib.figure",
           "matplotlib.pyplot", "matplotlib.backends.backend_pdf", "matplotlib.backends.backend_svg")


def _loaded(code: str) -> list[str]:
    out = subprocess.run([sys.executable, "-c", code + "\nimport sys, json\n"
                          "print(json.dumps(sorted(sys.modules)))"],
                         capture_output=True, text=True, cwd=ROOT, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def _any(loaded: list[str], prefixes) -> list[str]:
    return [m for m in loaded if any(m == p or m.startswith(p + ".") for p in prefixes)]


def test_a_missing_style_loads_no_geodata_or_drawing_library():
    loaded = _loaded("from compose.cli.main import main\n"
                     "try:\n    main(['check', 'no-such-style.toml'])\n"
                     "except SystemExit as e:\n    assert e.code == 2, e.code\n")
    assert _any(loaded, ("rasterio", "pyproj", "shapely", "pyogrio", "fiona", "matplotlib",
                         "compose.engine", "compose.layers", "compose.sources.raster")) == []


def test_the_demo_check_loads_none_of_the_writers():
    loaded = _loaded("import compose.api\ncompose.api.check('styles/coast.toml', draft=True)")
    assert "compose.engine" in loaded and "compose.layers.label_layer" in loaded
    assert _any(loaded, WRITERS) == []


def test_a_raster_only_check_loads_no_matplotlib(tmp_path, data):
    path = write_style(tmp_path, style([relief(data["hills"]), field(data["gradient"])]))
    loaded = _loaded(f"import compose.api\ncompose.api.check({str(path)!r})")
    assert "compose.layers.relief" in loaded
    assert _any(loaded, ("matplotlib", "compose.layers.draw", "fiona", *WRITERS)) == []
