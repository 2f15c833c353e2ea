"""CRS questions answered without GDAL (compose.sources.crs): a string pyproj accepted for a
canvas in this process is plainly usable and the same CRS as itself, and a draft's marks
process that promised to reach rasterio only through the module imports nothing before a
thread starts. Each case runs in a fresh interpreter and lists the modules it loaded."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _run(code: str) -> dict:
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT,
                         check=True, env={"COMPOSE_CACHE": "off", "PATH": "/usr/bin:/bin"})
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_a_canvas_crs_pyproj_accepted_is_answered_without_gdal():
    got = _run("""
import json, sys
from compose.style.model import _crs
from compose.style.validate import Scope
from compose.sources import crs
_crs("EPSG:32630", Scope("", ("map",)).at("crs"))          # pyproj judges it (no memo: off)
answers = [crs.plainly_usable("EPSG:32630"), crs.same_crs("EPSG:32630", "EPSG:32630")]
crs.imports_here_only()
crs.before_threads()
quiet = not any(m.startswith("rasterio") for m in sys.modules)
# anything else is GDAL's question, as before: another spelling, another CRS
answers += [crs.same_crs("EPSG:32630", "epsg:32630"), crs.same_crs("EPSG:32630", "EPSG:4326"),
            crs.plainly_usable("EPSG:4326")]
print(json.dumps({"answers": answers, "quiet": quiet,
                  "gdal": any(m.startswith("rasterio") for m in sys.modules)}))
""")
    # GDAL (OSRIsSame) finds the two spellings of EPSG:32630 the same CRS, and EPSG:4326 a
    # different, geographic one (EPSG's registry: WGS 84 / UTM zone 30N; WGS 84)
    assert got == {"answers": [True, True, True, False, True], "quiet": True, "gdal": True}


def test_before_threads_imports_rasterio_unless_promised_otherwise():
    got = _run("""
import json, sys
from compose.sources import crs
crs.before_threads()
print(json.dumps({"gdal": "rasterio.crs" in sys.modules}))
""")
    assert got == {"gdal": True}
