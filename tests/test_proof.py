"""Proofs: grey of equal CIELAB L* and Machado, Oliveira & Fernandes (2009) CVD simulation at
severity 100 in linear RGB, checked against colour-science per pixel; streaming sink, thumbnails,
files and the ``compose proof`` command."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from click.testing import CliRunner
from matplotlib.image import imread

from compose.cli.main import cli
from compose.proof import PROOFS, ProofSink, cvd_proof, gray_proof, proof_image, proof_paths, write_proofs
from compose.style import load_style
from tests.check._maps import field, lines, make_data, relief, style, write_style

colour = pytest.importorskip("colour")
MACHADO = {"deutan": "Deuteranomaly", "protan": "Protanomaly", "tritan": "Tritanomaly"}


def _lab(rgb):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))


def _reference_cvd(rgb8, kind):
    """colour-science: decode, Machado 2009 matrix (severity 1.0), clip, encode."""
    with warnings.catch_warnings():          # its note that the tritan matrix is an approximation
        warnings.simplefilter("ignore")
        m = colour.blindness.matrix_cvd_Machado2009(MACHADO[kind], 1.0)
    lin = colour.cctf_decoding(rgb8 / 255.0, function="sRGB")
    return colour.cctf_encoding(np.clip(lin @ m.T, 0, 1), function="sRGB") * 255


@pytest.fixture(scope="module")
def pixels():
    rng = np.random.default_rng(11)
    return rng.integers(0, 256, (40, 50, 3), dtype=np.uint8)


def test_gray_has_the_same_l_star(pixels):
    gray = gray_proof(pixels)
    assert np.all(gray[..., 0] == gray[..., 1]) and np.all(gray[..., 1] == gray[..., 2])
    np.testing.assert_allclose(_lab(gray / 255.0)[..., 0], _lab(pixels / 255.0)[..., 0], atol=0.5)
    # an average of the encoded channels would not do: pure green (L* 87.7) is not grey 85
    assert int(gray_proof(np.array([[0, 255, 0]], np.uint8))[0, 0]) > 200


@pytest.mark.parametrize("kind", ["deutan", "protan", "tritan"])
def test_cvd_matches_colour_science_machado(pixels, kind):
    got = cvd_proof(pixels, kind).astype(float)
    np.testing.assert_allclose(got, _reference_cvd(pixels, kind), atol=1.0)


def test_cvd_reference_values():
    # references.md section 4: red (255, 0, 0) -> deutan 163.22, 144.28, 0; protan 108.79, 95.03, 0
    red = np.array([[255, 0, 0]], np.uint8)
    np.testing.assert_allclose(cvd_proof(red, "deutan")[0], [163.22, 144.28, 0], atol=0.6)
    np.testing.assert_allclose(cvd_proof(red, "protan")[0], [108.79, 95.03, 0], atol=0.6)
    gray = np.array([[128, 128, 128]], np.uint8)   # rows sum to 1: neutrals are kept
    for kind in MACHADO:
        assert np.all(np.abs(cvd_proof(gray, kind).astype(int) - 128) <= 1)


def test_sink_streams_bands_and_box_averages(tmp_path, pixels):
    h, w = pixels.shape[:2]
    paths = {p: tmp_path / f"{p}.png" for p in PROOFS}
    sink = ProofSink(paths, w, h, panel=10)          # thumbnails shrink by 5
    for r0, r1 in ((0, 7), (7, 30), (30, 40)):       # irregular bands, as a render delivers them
        sink.rows(r0, pixels[r0:r1])
    sink.close()
    for p in PROOFS:
        written = np.rint(imread(paths[p])[..., :3] * 255).astype(np.uint8)
        np.testing.assert_array_equal(written, proof_image(pixels, p))
    thumb = sink.thumbnails()["map"]
    assert thumb.shape == (8, 10, 3)
    want = pixels.reshape(8, 5, 10, 5, 3).mean(axis=(1, 3))
    np.testing.assert_allclose(thumb, want, atol=0.5)


def _style(tmp_path):
    data = make_data(tmp_path / "src")
    return write_style(tmp_path, style([relief(data["hills"]), field(data["gradient"]),
                                        lines(data["coast"], stroke="#303030", width=1.0)]))


def test_write_proofs_files_and_metrics(tmp_path):
    st = load_style(_style(tmp_path))
    result = write_proofs(st, tmp_path / "out")
    assert set(result.outputs) == set(PROOFS) | {"sheet"}
    for p in PROOFS:
        img = imread(result.outputs[p])
        assert img.shape[:2] == (64, 64)
    sheet = imread(result.outputs["sheet"])
    assert sheet.shape[1] > 5 * 64
    assert result.report.rule("grayscale-order")
    assert not list((tmp_path / "out").glob(".*part*"))


def test_proofs_are_all_or_nothing(tmp_path, monkeypatch):
    import compose.proof as proof
    st = load_style(_style(tmp_path))

    def broken(*a, **k):
        raise RuntimeError("sheet failed")
    monkeypatch.setattr(proof, "write_sheet", broken)
    with pytest.raises(RuntimeError):
        proof.write_proofs(st, tmp_path / "out")
    assert not any(p.exists() for p in proof_paths(st, tmp_path / "out").values())
    assert list((tmp_path / "out").iterdir()) == []


def test_proof_command(tmp_path):
    path = _style(tmp_path)
    out = tmp_path / "out"
    res = CliRunner().invoke(cli, ["proof", str(path), "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "grayscale-order" in res.output and "Illustration only" in res.output
    assert (out / "map.proof-sheet.png").exists()
    again = CliRunner().invoke(cli, ["proof", str(path), "--out", str(out)])
    assert again.exit_code == 2 and "--overwrite" in again.output
    assert CliRunner().invoke(cli, ["proof", str(path), "--out", str(out), "--overwrite"]).exit_code == 0


def test_proof_rules_are_catalogued_rules():
    from compose.check.catalog import CATALOG, PROOF_RULES

    assert PROOF_RULES and all(rule in CATALOG for rule in PROOF_RULES)


def test_proof_images_decode_once_and_give_each_proof():
    """proof_images shares one decode of the channels between the four proofs: the same pixels
    as each proof made on its own (whose maths the tests above check against their sources)."""
    from compose.proof import PROOFS, proof_image, proof_images

    rgb = np.random.default_rng(7).integers(0, 256, (33, 45, 3)).astype(np.uint8)
    got = proof_images(rgb)
    assert list(got) == list(PROOFS)
    for kind in PROOFS:
        assert np.array_equal(got[kind], proof_image(rgb, kind)), kind


def test_the_contact_sheet_is_dated_only_by_source_date_epoch(tmp_path, monkeypatch):
    """matplotlib writes the sheet without a date; with SOURCE_DATE_EPOCH set it gets a tIME
    chunk (PNG, W3C / ISO/IEC 15948:2004, 11.3.6.1: year in 2 bytes, month, day, hour, minute,
    second, UTC) before its image data, read here by Pillow; the pixels are the same."""
    from PIL import Image, PngImagePlugin

    from compose.proof import write_sheet

    thumbs = {"map": np.full((20, 30, 3), 90, np.uint8), "gray": np.full((20, 30, 3), 40, np.uint8)}
    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    write_sheet(tmp_path / "plain.png", thumbs, "A $5 title")
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")      # 2023-11-14 22:13:20 UTC
    write_sheet(tmp_path / "dated.png", thumbs, "A $5 title")

    def chunks(path):
        with open(path, "rb") as f:
            f.read(8)
            reader = PngImagePlugin.ChunkStream(f)
            out = []
            while True:
                kind, pos, length = reader.read()
                data = f.read(length)
                reader.crc(kind, data)                      # Pillow checks each chunk's CRC
                out.append((kind, data))
                if kind == b"IEND":
                    return out

    plain, dated = chunks(tmp_path / "plain.png"), chunks(tmp_path / "dated.png")
    assert b"tIME" not in [k for k, _ in plain]
    kinds = [k for k, _ in dated]
    assert kinds.index(b"tIME") < kinds.index(b"IDAT")
    assert dict(dated)[b"tIME"] == bytes([0x07, 0xE7, 11, 14, 22, 13, 20])
    assert [c for c in dated if c[0] != b"tIME"] == plain
    with Image.open(tmp_path / "plain.png") as a, Image.open(tmp_path / "dated.png") as b:
        assert np.array_equal(np.asarray(a), np.asarray(b))
