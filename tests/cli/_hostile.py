"""Helpers for the hostile-input tests: run the CLI in-process or as a bounded subprocess, and
judge how it ended (exit code, one stderr line, no traceback, no partial outputs)."""
from __future__ import annotations

import os
import resource
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

from click.testing import CliRunner

from compose.cli.main import cli

__all__ = ["Ended", "run_in_process", "run_subprocess", "leftovers", "replace_in", "OUTPUT_SUFFIXES"]

OUTPUT_SUFFIXES = (".png", ".tif", ".json", ".html")


@dataclass
class Ended:
    """How one command ended."""

    code: int
    stdout: str
    stderr: str

    @property
    def lines(self) -> list[str]:
        return [line for line in self.stderr.splitlines() if line.strip()]

    def assert_one_line(self, code: int | tuple[int, ...] = 2, *contains: str) -> str:
        """Exit ``code`` (or one of them) and exactly one stderr line containing ``contains``."""
        codes = (code,) if isinstance(code, int) else code
        assert self.code in codes, (self.code, self.stderr[-2000:])
        assert "Traceback" not in self.stderr and "Traceback" not in self.stdout, self.stderr[-2000:]
        assert len(self.lines) == 1, self.stderr[-2000:]
        line = self.lines[0]
        for word in contains:
            assert word in line, line
        return line


def run_in_process(*args: str) -> Ended:
    """``compose ARGS`` through click's runner (stderr kept apart from stdout)."""
    result = CliRunner().invoke(cli, [str(a) for a in args])
    code = result.exit_code
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        import traceback
        tb = "".join(traceback.format_exception(result.exception))
        return Ended(code if code not in (0, None) else 99, result.stdout, "Traceback\n" + tb)
    return Ended(code, result.stdout, result.stderr)


def _limits(memory_bytes: int):
    def apply() -> None:
        resource.setrlimit(resource.RLIMIT_AS, (memory_bytes, memory_bytes))
        os.setsid()
    return apply


def run_subprocess(*args: str, timeout: float = 60.0, memory_bytes: int = 3 << 30,
                   cwd: Path | None = None, env: dict | None = None) -> Ended:
    """``compose ARGS`` in a child python with an address-space limit and a wall-clock bound;
    a hang past ``timeout`` fails the calling test."""
    cmd = [sys.executable, "-c", "from compose.cli.main import main; main()", *map(str, args)]
    full_env = dict(os.environ, **(env or {}))
    full_env.pop("COMPOSE_DEBUG", None)
    try:
        p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=cwd,
                           env=full_env, preexec_fn=_limits(memory_bytes))
    except subprocess.TimeoutExpired as exc:
        raise AssertionError(f"compose {' '.join(map(str, args))} ran past {timeout} s") from exc
    return Ended(p.returncode, p.stdout, p.stderr)


def leftovers(folder: Path) -> list[str]:
    """Files in ``folder`` (recursively) that look like outputs or temporaries of a render."""
    if not folder.exists():
        return []
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*")
                  if p.is_file() and (p.suffix in OUTPUT_SUFFIXES or ".part" in p.name
                                      or p.name.startswith(".")))


def replace_in(path: Path, old: str, new: str) -> Path:
    """Replace the first ``old`` in the text file ``path`` by ``new`` (which must change it)."""
    text = path.read_text(encoding="utf-8")
    assert old in text, old
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return path
