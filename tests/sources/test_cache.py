"""GDAL's block cache is bounded in every compose process (a render's memory must not grow with
the canvas), and a GDAL_CACHEMAX the user set is kept."""
from __future__ import annotations

import os
import subprocess
import sys

from compose.sources.guard import GDAL_CACHE_MB

PROBE = ("import compose.sources.raster, rasterio\n"
         "from rasterio.env import get_gdal_config\n"
         "with rasterio.Env():\n"
         "    print(get_gdal_config('GDAL_CACHEMAX'))\n")


def _cache_bytes(env: dict) -> int:
    out = subprocess.run([sys.executable, "-c", PROBE], env=env, capture_output=True, text=True,
                         check=True)
    return int(out.stdout.strip().splitlines()[-1])


def test_cache_bounded_by_default():
    env = {k: v for k, v in os.environ.items() if k != "GDAL_CACHEMAX"}
    assert _cache_bytes(env) == GDAL_CACHE_MB << 20


def test_users_setting_kept():
    env = dict(os.environ, GDAL_CACHEMAX="48")
    assert _cache_bytes(env) == 48 << 20
