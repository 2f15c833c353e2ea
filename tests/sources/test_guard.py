"""A style reads only the local files it names: no network request, no virtual file system, no
VRT raw band, unless the run allows remote sources. A real HTTP server on 127.0.0.1 counts the
requests that arrive."""
from __future__ import annotations

import http.server
import os
import threading
from pathlib import Path

import pytest

from compose.errors import SourceError
from compose.limits import use_limits
from compose.sources.guard import check_source, gdal_name, is_remote
from tests.cli._hostile import replace_in, run_in_process
from tests.output._tiny import tiny_style


@pytest.fixture
def server(tmp_path):
    """An HTTP server on 127.0.0.1 serving ``tmp_path/www``; yields (base URL, list of requests)."""
    www = tmp_path / "www"
    www.mkdir()
    requests: list[str] = []

    class Handler(http.server.SimpleHTTPRequestHandler):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, directory=str(www), **kwargs)

        def log_message(self, fmt, *args):
            requests.append(self.path)

    srv = http.server.ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=srv.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{srv.server_address[1]}", requests, www
    finally:
        srv.shutdown()
        srv.server_close()
        thread.join(timeout=5)


@pytest.fixture
def style(tmp_path):
    return tiny_style(tmp_path / "in", extra=False, overlays=False)


def _use_source(style: Path, source: str) -> None:
    replace_in(style, 'source = "land.tif"', f'source = "{source}"')


VRT_URL = """<VRTDataset rasterXSize="64" rasterYSize="64">
  <SRS>EPSG:32631</SRS>
  <GeoTransform>500000, 30, 0, 4001920, 0, -30</GeoTransform>
  <VRTRasterBand dataType="Float32" band="1">
    <SimpleSource><SourceFilename>/vsicurl/{url}/land.tif</SourceFilename><SourceBand>1</SourceBand></SimpleSource>
  </VRTRasterBand>
</VRTDataset>
"""

VRT_RAW = """<VRTDataset rasterXSize="16" rasterYSize="16">
  <SRS>EPSG:32631</SRS>
  <GeoTransform>500000, 120, 0, 4001920, 0, -120</GeoTransform>
  <VRTRasterBand dataType="Byte" band="1" subClass="VRTRawRasterBand">
    <SourceFilename relativetoVRT="0">{target}</SourceFilename>
  </VRTRasterBand>
</VRTDataset>
"""

WMS = """<GDAL_WMS>
  <Service name="TMS"><ServerUrl>{url}/tiles/${{z}}/${{x}}/${{y}}.png</ServerUrl></Service>
  <DataWindow><UpperLeftX>-20037508.34</UpperLeftX><UpperLeftY>20037508.34</UpperLeftY>
    <LowerRightX>20037508.34</LowerRightX><LowerRightY>-20037508.34</LowerRightY>
    <TileLevel>3</TileLevel><TileCountX>1</TileCountX><TileCountY>1</TileCountY></DataWindow>
  <Projection>EPSG:3857</Projection><BlockSizeX>256</BlockSizeX><BlockSizeY>256</BlockSizeY>
  <BandsCount>3</BandsCount>
</GDAL_WMS>
"""


@pytest.mark.parametrize("kind", ["vsicurl", "url", "vrt", "wms", "vrt-named-xml"])
def test_no_request_reaches_the_network_without_allow_remote(style, server, kind):
    url, requests, www = server
    (www / "land.tif").write_bytes((style.parent / "land.tif").read_bytes())
    if kind == "vsicurl":
        _use_source(style, f"/vsicurl/{url}/land.tif")
    elif kind == "url":
        _use_source(style, f"{url}/land.tif")
    elif kind == "vrt":
        (style.parent / "remote.vrt").write_text(VRT_URL.format(url=url))
        _use_source(style, "remote.vrt")
    elif kind == "wms":
        (style.parent / "tiles.xml").write_text(WMS.format(url=url))
        _use_source(style, "tiles.xml")
    else:   # a wrapper is recognised by its content, not its name
        (style.parent / "innocent.tif").write_text(VRT_URL.format(url=url))
        _use_source(style, "innocent.tif")
    line = run_in_process("check", style).assert_one_line(2, 'layer "land-growth"')
    assert "--allow-remote" in line
    assert requests == []


def test_allow_remote_does_reach_the_server(style, server):
    """The control: with the option the same style does contact the server (so the test above
    would see a request if one were made)."""
    url, requests, www = server
    (www / "land.tif").write_bytes((style.parent / "land.tif").read_bytes())
    _use_source(style, f"/vsicurl/{url}/land.tif")
    ended = run_in_process("check", style, "--allow-remote")
    assert ended.code in (0, 1, 2) and "Traceback" not in ended.stderr
    assert requests, "no request arrived even with --allow-remote"


def test_vsi_paths_are_refused(style):
    _use_source(style, "/vsis3/some-bucket/land.tif")
    run_in_process("check", style).assert_one_line(2, "remote or virtual", "--allow-remote")


def test_a_vrt_raw_band_never_reads_another_file(style, tmp_path):
    secret = tmp_path / "secret.bin"
    secret.write_bytes(os.urandom(256))
    (style.parent / "raw.vrt").write_text(VRT_RAW.format(target=secret))
    _use_source(style, "raw.vrt")
    run_in_process("check", style).assert_one_line(2, "raw.vrt", "raw band")
    # refused even when remote and virtual sources are allowed
    run_in_process("check", style, "--allow-remote").assert_one_line(2, "raw.vrt", "raw band")


def test_is_remote_and_gdal_name():
    assert is_remote("/vsicurl/http://h/x.tif") and is_remote("https://h/x.tif")
    assert is_remote("WMS:http://h/") and is_remote("/vsizip/a.zip/x.tif")
    assert is_remote(str(Path("https://h/x.tif")))          # a Path folds "//"
    assert not is_remote("/data/x.tif") and not is_remote("C:/x.tif")
    assert not is_remote("/data/https/x.tif")
    assert gdal_name(Path("/vsicurl/https://h/x.tif")) == "/vsicurl/https://h/x.tif"


def test_check_source_refuses_what_is_not_a_regular_file(tmp_path):
    os.mkfifo(tmp_path / "pipe")
    (tmp_path / "empty.tif").write_bytes(b"")
    os.symlink(tmp_path / "loop", tmp_path / "loop")
    for name, words in (("pipe", "pipe"), ("empty.tif", "empty"), ("loop", "loop"),
                        ("missing.tif", "not found")):
        with pytest.raises(SourceError, match=words):
            check_source(tmp_path / name, 'layer "x"')
    with pytest.raises(SourceError, match="device"):
        check_source("/dev/zero", 'layer "x"')
    with use_limits(allow_remote=True):
        assert check_source("/vsicurl/http://h/x.tif", 'layer "x"') is False


def test_read_errors_mid_render_name_the_layer_and_file():
    from types import SimpleNamespace

    from rasterio.errors import RasterioIOError

    from compose.sources.guard import as_source_error

    spec = SimpleNamespace(name="land", source=Path("/data/land.tif"))
    error = as_source_error(RasterioIOError("Read error at row 1024"), spec)
    assert isinstance(error, SourceError)
    assert str(error).startswith('layer "land": cannot read /data/land.tif: Read error at row 1024')
    bug = ZeroDivisionError("x")
    assert as_source_error(bug, spec) is bug          # a fault of ours stays one (exit 3)
    full = OSError(28, "No space left on device")
    assert as_source_error(full, spec) is full        # a full disk is about outputs, not sources


def test_plain_local_vector_formats_stay_allowed():
    # The .shp/.dbf/.shx file set and GeoPackage are plain local files: allowed without the option;
    # a GDAL XML wrapper of a tile service is not.
    from compose.sources.guard import allowed_drivers

    vector = allowed_drivers("vector")
    assert "GPKG" in vector and any(d.endswith(" Shapefile") for d in vector)
    assert "WMS" not in allowed_drivers("raster") and "VRT" not in allowed_drivers("raster")
