"""compose.heap: the allocator settings a render makes are the C library's own calls (glibc
mallopt / malloc_trim); a MALLOC_ARENA_MAX the user set is kept."""
from __future__ import annotations

import platform

import pytest

from compose import heap

glibc = platform.libc_ver()[0] == "glibc"


@pytest.mark.skipif(not glibc, reason="glibc only")
def test_trim_and_arena_limit_on_glibc(monkeypatch):
    monkeypatch.delenv("MALLOC_ARENA_MAX", raising=False)
    assert heap.trim() is True
    assert heap.limit_arenas(heap.ARENAS) is True


def test_users_arena_setting_kept(monkeypatch):
    monkeypatch.setenv("MALLOC_ARENA_MAX", "4")
    assert heap.limit_arenas() is False


@pytest.mark.skipif(platform.system() != "Linux", reason="Linux only")
def test_no_huge_pages_for_the_process_and_its_children():
    # Outside reference: the kernel's own account of the process (/proc/PID/status,
    # THP_enabled, Linux 5.0 and later), in a child so this test process keeps its setting;
    # the setting is inherited across fork (prctl(2), PR_SET_THP_DISABLE).
    import subprocess
    import sys

    code = ("import os; from compose import heap; assert heap.limit_arenas() in (True, False); "
            "pid = os.fork()\n"
            "if pid == 0:\n"
            "    print(open('/proc/self/status').read().split('THP_enabled:')[1].split()[0]); os._exit(0)\n"
            "os.waitpid(pid, 0)\n"
            "print(open('/proc/self/status').read().split('THP_enabled:')[1].split()[0])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["0", "0"]
