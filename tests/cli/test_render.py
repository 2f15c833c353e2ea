"""`compose render` and `compose --help` through click's runner, on the tiny real style."""
from __future__ import annotations

from click.testing import CliRunner

from compose.api import check as check_report
from compose.cli.main import cli
from tests.output._tiny import tiny_style

OUTPUTS = ("tiny.png", "tiny.tif", "tiny.legend.png", "tiny.check.json", "tiny.html")


def test_help_lists_the_commands():
    result = CliRunner().invoke(cli, ["--help"])
    assert result.exit_code == 0
    for name in ("ramp", "render", "check", "proof", "demo"):
        assert name in result.output


def test_render_writes_every_output_and_refuses_to_overwrite(tmp_path):
    style = tiny_style(tmp_path)
    out = tmp_path / "out"
    # the tiny legend fixture does not pass every rule: render then exits 1, outputs written
    verdict = 0 if check_report(style).passed else 1
    first = CliRunner().invoke(cli, ["render", str(style), "--out", str(out)])
    assert first.exit_code == verdict, first.output
    for name in OUTPUTS:
        assert (out / name).stat().st_size > 0, name
    assert "rendered 64 x 64 px" in first.output
    before = (out / "tiny.png").stat().st_mtime_ns
    again = CliRunner().invoke(cli, ["render", str(style), "--out", str(out)])
    assert again.exit_code == 2
    assert "--overwrite" in again.output and len(again.output.strip().splitlines()) == 1
    assert (out / "tiny.png").stat().st_mtime_ns == before
    forced = CliRunner().invoke(cli, ["render", str(style), "--out", str(out), "--overwrite"])
    assert forced.exit_code == verdict, forced.output


def test_missing_source_is_one_line_exit_2_and_nothing_written(tmp_path):
    style = tiny_style(tmp_path)
    text = style.read_text()
    style.write_text(text.replace('source = "dem.tif"', 'source = "gone.tif"', 1))
    out = tmp_path / "out"
    result = CliRunner().invoke(cli, ["render", str(style), "--out", str(out)])
    assert result.exit_code == 2
    line = result.output.strip()
    assert len(line.splitlines()) == 1 and "source not found" in line and "gone.tif" in line
    assert "Traceback" not in result.output
    assert not out.exists() or not any(out.iterdir())


def test_render_exits_1_when_the_check_fails_unless_no_check(tmp_path):
    # issue 10: CI renders once; a failed hierarchy is a failed build, with the evidence written
    style = tiny_style(tmp_path)
    text = style.read_text()
    style.write_text(text + '\n[budget.ground]\nchroma = [0, 0.01]\n')   # nothing can pass this
    out = tmp_path / "out"
    failed = CliRunner().invoke(cli, ["render", str(style), "--out", str(out)])
    assert failed.exit_code == 1, failed.output
    assert "check   FAILED" in failed.output and "ground-chroma" in failed.output
    for name in OUTPUTS:
        assert (out / name).exists(), name
    unchecked = CliRunner().invoke(cli, ["render", str(style), "--out", str(out), "--overwrite",
                                         "--no-check"])
    assert unchecked.exit_code == 0, unchecked.output


def test_render_help_says_how_it_exits():
    text = CliRunner().invoke(cli, ["render", "--help"]).output
    assert "Exits 1 when the hierarchy check fails" in text and "--no-check" in text


def test_what_is_loaded_before_a_render_is_frozen_during_it_and_only_then(tmp_path, monkeypatch):
    """compose.cli.render: the objects alive when a render starts (modules, the style) are kept
    out of the garbage collector's generations while it runs (gc.freeze, Python's gc module)
    and handed back when it returns or fails, so a batch's next style can collect them."""
    import gc
    import importlib

    module = importlib.import_module("compose.render")   # (compose.render is also a function)
    seen = []
    real = module.render_style

    def render_style(*args, **kw):
        seen.append(gc.get_freeze_count())
        if len(seen) == 2:
            raise RuntimeError("a render that fails")
        return real(*args, **kw)

    monkeypatch.setattr(module, "render_style", render_style)
    style = tiny_style(tmp_path)
    assert gc.get_freeze_count() == 0
    CliRunner().invoke(cli, ["render", str(style), "--out", str(tmp_path / "a")])
    assert len(seen) == 1 and seen[0] > 1000 and gc.get_freeze_count() == 0
    failed = CliRunner().invoke(cli, ["render", str(style), "--out", str(tmp_path / "b")])
    assert failed.exit_code != 0 and len(seen) == 2 and gc.get_freeze_count() == 0
