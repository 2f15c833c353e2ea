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
