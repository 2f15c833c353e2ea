"""`compose --help` stays light: no heavy library is imported to list the commands (start-up
time itself is measured by bench/render.py, never asserted)."""
import subprocess
import sys

HEAVY = ("numpy", "rasterio", "matplotlib", "shapely", "pyproj", "fiona", "pyogrio", "distributed")


def test_help_imports_no_heavy_library():
    code = ("import sys\nfrom compose.cli.main import main\n"
            "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
            f"print('HEAVY:' + ','.join(m for m in {HEAVY!r} if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip().splitlines()[-1] == "HEAVY:"
