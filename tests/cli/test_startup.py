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


def _command(*args: str, before: str = "") -> subprocess.CompletedProcess:
    code = f"import sys\n{before}\nfrom compose.cli.main import main\nsys.argv[1:] = {list(args)!r}\nmain()\n"
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)


def test_the_command_ends_its_process_with_the_exit_code_and_flushed_output():
    # main() without argv ends the process itself (no interpreter teardown): the status is the
    # command's, what it printed into a pipe arrives, and atexit functions still run
    done = _command("--version", before="import atexit\natexit.register(print, 'atexit ran')")
    assert done.returncode == 0
    assert done.stdout.splitlines() == [done.stdout.splitlines()[0], "atexit ran"]
    assert done.stdout.startswith("compose ")
    missing = _command("check", "no-such-style.toml")
    assert missing.returncode == 2 and "no-such-style.toml" in missing.stderr
    assert _command("no-such-command").returncode == 2


def test_python_dash_m_compose_is_the_command(tmp_path):
    """``python -m compose`` runs the command line (it printed nothing and did nothing before)."""
    import subprocess
    import sys
    done = subprocess.run([sys.executable, "-m", "compose", "--help"], capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == 0 and "render" in done.stdout
    missing = subprocess.run([sys.executable, "-m", "compose", "check", str(tmp_path / "no.toml")],
                             capture_output=True, text=True, timeout=60)
    assert missing.returncode == 2 and missing.stderr.count("\n") == 1


def _threads_after_numpy(env: dict) -> tuple[int, str]:
    code = ("from compose.cli.main import main\nimport os, numpy\n"
            "threads = [l for l in open('/proc/self/status') if l.startswith('Threads:')][0]\n"
            "print(threads.split()[1], os.environ.get('OPENBLAS_NUM_THREADS'))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env=env)
    n, setting = out.stdout.split()
    return int(n), setting


def test_the_command_keeps_numpys_blas_to_one_thread_unless_told():
    # OpenBLAS otherwise starts a thread per core on import, which spin (Linux /proc only)
    import os

    import pytest
    if not os.path.exists("/proc/self/status") or (os.cpu_count() or 1) < 2:
        pytest.skip("needs Linux's /proc and 2 cores or more")
    env = {k: v for k, v in os.environ.items() if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS")}
    assert _threads_after_numpy(env) == (1, "1")
    assert _threads_after_numpy(dict(env, OPENBLAS_NUM_THREADS="2"))[1] == "2"
