"""Reproducible outputs: the same style and data give the same bytes in every output of
``compose render`` (PNG, world file, GeoTIFF, legend, report, review page, PDF, SVG, page PNG),
``compose render --series`` and ``compose tiles``, whether or not SOURCE_DATE_EPOCH is set; with
it set, the PDF and SVG carry its date, and nothing else changes.

Reference: the SOURCE_DATE_EPOCH specification, reproducible-builds.org/specs/source-date-epoch
(revision 1.1): a date written into an output comes from the variable, whole seconds since
1970-01-01 00:00:00 UTC; a malformed value stops the tool with an error."""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from click.testing import CliRunner

from compose.cli.main import cli
from compose.demo import styles_dir
from tests.cli.test_render_batch import STYLE, _field

# a small canvas of the coast demo (188 x 188 px): its page, labels, legend and every output
SMALL = ("--set", "map.pixel=240")


def _command(*args: str | Path, epoch: str | None = None) -> subprocess.CompletedProcess:
    """``compose ARGS`` as a user runs it (a fresh process), SOURCE_DATE_EPOCH set to ``epoch``
    or unset."""
    env = {k: v for k, v in os.environ.items() if k != "SOURCE_DATE_EPOCH"}
    if epoch is not None:
        env["SOURCE_DATE_EPOCH"] = epoch
    return subprocess.run([sys.executable, "-m", "compose", *map(str, args)], env=env,
                          capture_output=True, text=True, timeout=300)


def _files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _render(out: Path, epoch: str | None = None) -> dict[str, bytes]:
    done = _command("render", styles_dir() / "coast.toml", "--out", out, "--overwrite", *SMALL,
                    epoch=epoch)
    assert done.returncode in (0, 1), done.stderr         # 1: the small canvas's check verdict
    return _files(out)


def test_every_output_of_a_render_is_the_same_bytes_and_dated_only_by_source_date_epoch(tmp_path):
    # into the same folder (paths are recorded in the outputs), replaced
    first, second = _render(tmp_path / "out"), _render(tmp_path / "out")
    names = {Path(n).suffix for n in first}
    # every kind of output the command writes for a style with a [page]
    assert {".png", ".pgw", ".tif", ".json", ".html", ".pdf", ".svg"} <= names, sorted(first)
    assert first.keys() == second.keys()
    for name in first:
        assert first[name] == second[name], name
    # without SOURCE_DATE_EPOCH no date at all: the PDF's document information has no
    # CreationDate / ModDate (ISO 32000-1, 14.3.3: both optional), the SVG no dc:date
    pdf, svg = first["coast.pdf"], first["coast.svg"]
    assert b"/CreationDate" not in pdf and b"/ModDate" not in pdf
    assert b"dc:date" not in svg and b"<dc:title>" in svg          # its metadata is there

    # SOURCE_DATE_EPOCH=1700000000 is 2023-11-14 22:13:20 UTC (seconds since the POSIX epoch;
    # GNU `date -u -d @1700000000` prints the same); written as a PDF date string (ISO 32000-1,
    # 7.9.4: D:YYYYMMDDHHmmSS, Z for UT) and in the SVG's Dublin Core dc:date (ISO 8601)
    dated = _render(tmp_path / "out", epoch="1700000000")
    assert b"/CreationDate (D:20231114221320Z)" in dated["coast.pdf"]
    assert b"<dc:date>2023-11-14T22:13:20+00:00</dc:date>" in dated["coast.svg"]
    # every PNG a tIME chunk of that moment (PNG, W3C / ISO/IEC 15948:2004, 11.3.6.1: UTC,
    # year in 2 bytes, then month, day, hour, minute, second), none without the variable
    pngs = [n for n in first if n.endswith(".png")]
    assert {"coast.png", "coast.legend.png", "coast.page.png"} <= set(pngs)
    for name in pngs:
        assert _png_chunks(first[name]).get(b"tIME") is None, name
        assert _png_chunks(dated[name])[b"tIME"] == bytes([0x07, 0xE7, 11, 14, 22, 13, 20]), name
    # the GeoTIFF a DateTime tag (TIFF 6.0, tag 306: "YYYY:MM:DD HH:MM:SS"), read by rasterio
    # (GDAL) and by Pillow's own TIFF reader; none without the variable
    assert _tiff_datetime(tmp_path, first["coast.tif"]) == (None, None)
    assert _tiff_datetime(tmp_path, dated["coast.tif"]) == ("2023:11:14 22:13:20",) * 2
    # ... and nowhere else: the report, the review page and the world file are the undated
    # render's
    assert {n for n in first if first[n] != dated[n]} == {"coast.pdf", "coast.svg", "coast.tif",
                                                          *pngs}


def _png_chunks(data: bytes) -> dict[bytes, bytes]:
    """The chunks of a PNG file by type (PNG 5.3: length, type, data, CRC-32 of type and data;
    each CRC checked), read without compose's code."""
    import struct
    import zlib

    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    out, at = {}, 8
    while at < len(data):
        length, kind = struct.unpack(">I4s", data[at:at + 8])
        body = data[at + 8:at + 8 + length]
        (crc,) = struct.unpack(">I", data[at + 8 + length:at + 12 + length])
        assert crc == zlib.crc32(kind + body) & 0xFFFFFFFF, kind
        out.setdefault(kind, body)
        at += 12 + length
    assert kind == b"IEND"
    return out


def _tiff_datetime(tmp_path: Path, data: bytes) -> tuple[str | None, str | None]:
    """The DateTime of a GeoTIFF's bytes as rasterio and Pillow read it."""
    import rasterio
    from PIL import Image

    path = tmp_path / "read.tif"
    path.write_bytes(data)
    with rasterio.open(path) as ds:
        gdal = ds.tags().get("TIFFTAG_DATETIME")
    with Image.open(path) as im:
        pillow = im.tag_v2.get(306)
    return gdal, pillow


def test_a_malformed_source_date_epoch_stops_the_command_before_any_work(tmp_path, monkeypatch):
    # the specification: a malformed value should end the tool with a non-zero exit code
    for value in ("17e8", "-5", "1.5", "soon"):
        monkeypatch.setenv("SOURCE_DATE_EPOCH", value)
        result = CliRunner().invoke(cli, ["render", str(styles_dir() / "coast.toml"),
                                          "--out", str(tmp_path / "out"), *SMALL])
        assert result.exit_code == 2, result.output
        lines = result.output.strip().splitlines()
        assert len(lines) == 1 and "SOURCE_DATE_EPOCH" in lines[0] and value in lines[0]
        assert not (tmp_path / "out").exists()
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "")          # empty: as unset (matplotlib's reading)
    from compose.page.dates import pdf_date, svg_date
    assert pdf_date() == {"CreationDate": None} and svg_date() == {"Date": None}


def test_a_series_and_its_record_are_the_same_bytes_in_any_folder(tmp_path):
    for i, date in enumerate(("2024-04", "2024-05")):
        _field(tmp_path / f"moist_{date}.tif", 8 * i)
    style = STYLE.format(name="moist-{date}", title="Moisture {date}", source="moist_{date}.tif")
    (tmp_path / "s.toml").write_text(style + '\n[series]\ndate = ["2024-04", "2024-05"]\n')
    # twice into one folder (the second replaces the first), then into another folder two levels
    # deeper; the record names the members' files relative to its own folder
    folders = [tmp_path / "out", tmp_path / "out", tmp_path / "other" / "deeper"]
    runs = []
    for folder in folders:
        done = _command("render", tmp_path / "s.toml", "--series", "--workers", "1",
                        "--overwrite", "--out", folder)
        assert done.returncode == 0, done.stderr
        runs.append(_files(folder))
    assert "s.series.json" in runs[0]
    for folder, run in zip(folders[1:], runs[1:]):
        assert run.keys() == runs[0].keys()
        for name in runs[0]:
            if name == "s.series.json":      # the same but for the style's relative path
                mine, first = json.loads(run[name]), json.loads(runs[0][name])
                assert mine.pop("style") == ("../../s.toml" if folder.name == "deeper"
                                             else "../s.toml")
                first.pop("style")
                assert mine == first
                continue
            assert run[name] == runs[0][name], name
    # the folder moved as a whole: every path the record names resolves from the record's folder
    moved = (tmp_path / "out").rename(tmp_path / "published")
    record = json.loads((moved / "s.series.json").read_text())
    paths = [p for m in record["members"] for p in m["outputs"].values()]
    assert len(paths) == 2 * 6                  # png, world, tif, legend, check, html each
    for p in paths:
        assert not Path(p).is_absolute() and (moved / p).is_file(), p
    assert {moved / p for p in paths} == {moved / n for n in runs[0] if n.startswith("moist-")}
    # the style, relative to the record's folder ('..' out of it; POSIX path resolution)
    assert record["style"] == "../s.toml" and (moved / record["style"]).resolve() == \
        (tmp_path / "s.toml").resolve()


def test_a_series_record_names_its_style_relative_to_its_folder(tmp_path):
    """The style inside the output folder, beside it, and reached through a symbolic link to
    the folder: each recorded relative to the record's real folder ('/' between names)."""
    from compose.series import style_from

    (tmp_path / "pub" / "styles").mkdir(parents=True)
    inside = tmp_path / "pub" / "styles" / "s.toml"
    beside = tmp_path / "s.toml"
    for p in (inside, beside):
        p.write_text("")
    (tmp_path / "link").symlink_to(tmp_path / "pub")
    assert style_from(inside, tmp_path / "pub") == "styles/s.toml"
    assert style_from(beside, tmp_path / "pub") == "../s.toml"
    # through the link, '..' is the real folder's parent (POSIX resolves '..' after the link)
    assert style_from(beside, tmp_path / "link") == "../s.toml"
    assert (tmp_path / "link" / "../s.toml").resolve() == beside.resolve()
    assert style_from(tmp_path / "link" / "styles" / "s.toml", tmp_path / "pub") == "styles/s.toml"


def test_tiles_are_the_same_bytes(tmp_path):
    runs = []
    for _ in range(2):
        done = _command("tiles", styles_dir() / "coast.toml", "--zoom", "8", "--out",
                        tmp_path / "out")
        assert done.returncode in (0, 1), done.stderr
        runs.append(_files(tmp_path / "out"))
    assert {"index.html", "check.json"} <= runs[0].keys() and runs[0].keys() == runs[1].keys()
    for name in runs[0]:
        assert runs[0][name] == runs[1][name], name


def test_the_ramp_figure_and_sheet_are_dated_only_by_source_date_epoch(tmp_path):
    """``compose ramp NAME --plot FILE`` and ``compose ramps --sheet FILE`` as commands: the same
    bytes run after run; with SOURCE_DATE_EPOCH set a tIME chunk of its moment as every PNG of a
    render carries (they carried none), nothing else changed; a malformed value an error before
    any file is written."""
    def both(folder: Path, epoch: str | None) -> dict[str, bytes]:
        folder.mkdir()
        for args in (("ramp", "land-growth", "--plot", folder / "plot.png"),
                     ("ramps", "--sheet", folder / "sheet.png")):
            done = _command(*args, epoch=epoch)
            assert done.returncode == 0, done.stderr
        return _files(folder)

    first, second = both(tmp_path / "a", None), both(tmp_path / "b", None)
    dated = both(tmp_path / "c", "1700000000")
    assert first.keys() == dated.keys() == {"plot.png", "sheet.png"}
    for name in first:
        assert first[name] == second[name], name
        assert _png_chunks(first[name]).get(b"tIME") is None, name
        # 2023-11-14 22:13:20 UTC (as the render's test above), PNG 11.3.6.1
        assert _png_chunks(dated[name])[b"tIME"] == bytes([0x07, 0xE7, 11, 14, 22, 13, 20]), name
        tim = dated[name].index(b"tIME") - 4                        # the chunk: 4 + 4 + 7 + 4
        assert dated[name][:tim] + dated[name][tim + 19:] == first[name], name
    bad = tmp_path / "bad"
    bad.mkdir()
    done = _command("ramp", "land-growth", "--plot", bad / "plot.png", epoch="soon")
    assert done.returncode == 2 and "SOURCE_DATE_EPOCH" in done.stderr, done.stderr
    assert list(bad.iterdir()) == []
