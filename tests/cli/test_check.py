"""``compose check``: table or JSON, exit 0 / 1 / 2, nothing written."""
from __future__ import annotations

import json

from click.testing import CliRunner

from compose.cli.main import cli
from tests.check._maps import lines, make_data, relief, style, write_style


def _run(args):
    return CliRunner().invoke(cli, args)


def test_check_passes_with_exit_0_and_writes_nothing(tmp_path):
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"]), lines(data["coast"],
                                                                    stroke="#303030", width=1.5)]))
    before = set(tmp_path.rglob("*"))
    res = _run(["check", str(path)])
    assert res.exit_code == 0, res.output
    assert "PASSED" in res.output and "Illustration only" in res.output
    assert set(tmp_path.rglob("*")) == before


def test_check_json_and_exit_1_on_failure(tmp_path):
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"]), lines(data["coast"],
                                                                    stroke="#c8c8c8", width=1.5)]))
    res = _run(["check", str(path), "--json"])
    assert res.exit_code == 1
    obj = json.loads(res.stdout if hasattr(res, "stdout") else res.output)
    assert obj["passed"] is False and set(obj) >= {"passed", "rules", "layers", "caution"}
    assert any(r["rule"] == "overlay-contrast" and not r["passed"] for r in obj["rules"])


def test_set_overrides_a_key_for_one_check_full_and_draft(tmp_path):
    # the same --set as compose render: a pale stroke fails its contrast (WCAG 2 1.4.11), the
    # file passes as written; a key the style does not have is exit 2 in one line
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"]), lines(data["coast"],
                                                                    stroke="#303030", width=1.5)]))
    assert _run(["check", str(path), "--no-cache"]).exit_code == 0
    for extra in ([], ["--draft"]):
        res = _run(["check", str(path), "--no-cache", "--json", "--set",
                    'layer.coast.stroke="#c8c8c8"', *extra])
        assert res.exit_code == 1, res.output
        obj = json.loads(res.stdout)
        assert any(r["rule"] == "overlay-contrast" and not r["passed"] for r in obj["rules"])
    bad = _run(["check", str(path), "--set", "layer.coast.colour=red"])
    assert bad.exit_code == 2
    assert "layer \"coast\"" in bad.output and "colour" in bad.output
    assert "Traceback" not in bad.output


def test_check_invalid_style_exits_2_with_one_line(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[map]\ncrs = 'EPSG:32631'\n", encoding="utf-8")
    res = _run(["check", str(bad)])
    assert res.exit_code == 2
    assert res.output.strip().count("\n") == 0 and "compose: error:" in res.output
    assert _run(["check", str(tmp_path / "missing.toml")]).exit_code == 2


def test_relief_as_overlay_is_a_style_error_exit_2(tmp_path):
    # Before issue 10 this map passed with the ground rules silently skipped.
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"], role="overlay")]))
    res = _run(["check", str(path)])
    assert res.exit_code == 2
    assert 'layer "relief": role: a relief layer cannot be \'overlay\'' in res.output
    assert res.output.strip().count("\n") == 0


def test_rules_and_explain_print_the_catalogue():
    from compose.check.catalog import CATALOG
    res = _run(["check", "--rules"])
    assert res.exit_code == 0
    for rid in CATALOG:
        assert f"\n{rid}" in "\n" + res.output
    assert "common practice, no source" in res.output and "WCAG 2.1 SC 1.4.11" in res.output
    one = _run(["check", "--explain", "grayscale-order"])
    assert one.exit_code == 0 and one.output.startswith("grayscale-order")
    assert "budget.theme.gray_order, default 0.95" in one.output
    bad = _run(["check", "--explain", "gray-order"])
    assert bad.exit_code == 2 and "is not a rule id" in bad.output


def test_strict_turns_warnings_into_failures(tmp_path):
    # a relief and a line, no theme: passes with a roles-present warning
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"]), lines(data["coast"],
                                                                    stroke="#303030", width=1.5)]))
    res = _run(["check", str(path)])
    assert res.exit_code == 0 and "no layer is judged as theme" in res.output
    strict = _run(["check", str(path), "--strict", "--json"])
    assert strict.exit_code == 1
    obj = json.loads(strict.output)
    assert obj["strict"] is True and obj["passed"] is False and obj["counts"]["warn"] >= 1


def test_draft_checks_a_reduced_canvas_and_says_so(tmp_path):
    data = make_data(tmp_path / "src")
    path = write_style(tmp_path, style([relief(data["hills"]), lines(data["coast"],
                                                                    stroke="#303030", width=1.5)]))
    res = _run(["check", str(path), "--draft", "--json"])
    obj = json.loads(res.output)
    assert obj["draft"] is None      # 64 x 64 is already smaller than a draft: checked as is


_REUSE = """
import resource, sys
import numpy as np
if sys.argv[1] == "reuse":
    from compose.cli.check import reuse_freed_memory
    print(reuse_freed_memory())
else:
    print(None)
a = np.ones(48 << 20, np.uint8)
del a
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(4):
    a = np.ones(48 << 20, np.uint8)
    del a
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def test_a_draft_command_reuses_the_memory_it_frees():
    """``compose check --draft`` sets glibc's malloc (reuse_freed_memory) so a 48 MB array freed
    and made again lands in the memory freed: no new page faults, where glibc's defaults map
    each one anew (its mmap threshold rises with what is freed only up to 32 MB: glibc
    mallopt(3), M_MMAP_THRESHOLD); the environment's own MALLOC_ settings win."""
    import os
    import platform
    import subprocess
    import sys

    import pytest

    if platform.libc_ver()[0] != "glibc":
        pytest.skip("glibc's malloc only")
    env = {k: v for k, v in os.environ.items()
           if not k.startswith("MALLOC_") and k != "GLIBC_TUNABLES"}

    def run(mode, **extra):
        out = subprocess.run([sys.executable, "-c", _REUSE, mode], env={**env, **extra},
                             capture_output=True, text=True, check=True).stdout.split()
        return out[0], int(out[1])

    assert run("reuse")[0] == "True" and run("reuse")[1] < 100
    assert run("default")[1] >= 4 * 20      # each array faulted in anew (huge pages or not)
    assert run("reuse", MALLOC_ARENA_MAX="2")[0] == "False"
