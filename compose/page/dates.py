"""The date the outputs carry: ``SOURCE_DATE_EPOCH`` or none.

The SOURCE_DATE_EPOCH specification (reproducible-builds.org/specs/source-date-epoch, revision
1.1): a tool that writes a date into its output takes it from the environment variable
``SOURCE_DATE_EPOCH`` when it is set -- whole seconds since 1970-01-01 00:00:00 UTC, written as
``date +%s`` prints them -- instead of the current time, so the same inputs give the same bytes;
a malformed value should stop the tool with an error. Without it the page's files carry no date
at all: the time a map was drawn says nothing about the map (its data and style decide it), and
neither the PDF's document information (ISO 32000-1, 14.3.3: every entry optional) nor the
SVG's metadata requires one. With it set the PNGs carry it too, in a tIME chunk (PNG, ISO/IEC
15948:2004 / W3C PNG, 11.3.6.1: the time of the image's last modification, UTC, 7 bytes: year
(2 bytes, big-endian), month, day, hour, minute, second), and the GeoTIFF in its DateTime tag
(TIFF 6.0, tag 306: "YYYY:MM:DD HH:MM:SS", 24-hour clock, 20 bytes with the closing NUL; GDAL's
``TIFFTAG_DATETIME``); unset, neither has one. The report, the review page, the world file and
the series record write no date either way.
"""
from __future__ import annotations

import os
import re
import struct
import zlib
from datetime import UTC, datetime

from compose.errors import ComposeError

__all__ = ["ENV", "source_date", "pdf_date", "svg_date", "png_time_chunk", "dated_png",
           "tiff_datetime"]

#: The environment variable's name (the specification's).
ENV = "SOURCE_DATE_EPOCH"
_DIGITS = re.compile(r"[0-9]+")


def source_date() -> datetime | None:
    """The date of ``SOURCE_DATE_EPOCH`` (UTC, whole seconds), None when it is unset or empty
    (an empty value is read as unset, as matplotlib and fontTools read it). Raises ComposeError
    naming the variable when it is not a whole number of seconds from 0 to the year 9999."""
    value = os.environ.get(ENV, "")
    if not value:
        return None
    if _DIGITS.fullmatch(value) is None:
        raise ComposeError(f"{ENV}={value[:40]!r}: not a whole number of seconds since "
                           "1970-01-01 UTC (the reproducible-builds.org convention)")
    try:
        return datetime.fromtimestamp(int(value), UTC)
    except (OverflowError, OSError, ValueError):
        raise ComposeError(f"{ENV}={value[:40]!r}: seconds beyond the year 9999") from None


def pdf_date() -> dict:
    """The PDF writer's date entries (matplotlib's ``metadata``): ``CreationDate`` from
    :func:`source_date`, or None, which leaves out the date matplotlib would add."""
    return {"CreationDate": source_date()}


def svg_date() -> dict:
    """The SVG writer's date entry (matplotlib's ``metadata``): ``Date`` (``dc:date``) from
    :func:`source_date` in ISO 8601 with its UTC offset, or None, which leaves it out."""
    date = source_date()
    return {"Date": None if date is None else date.isoformat()}


def png_time_chunk() -> bytes:
    """A whole PNG tIME chunk (length, type, 7 data bytes, CRC-32 of type and data) of
    :func:`source_date`, or no bytes when it is unset."""
    date = source_date()
    if date is None:
        return b""
    data = struct.pack(">HBBBBB", date.year, date.month, date.day, date.hour, date.minute,
                       date.second)
    return (struct.pack(">I", len(data)) + b"tIME" + data
            + struct.pack(">I", zlib.crc32(b"tIME" + data) & 0xFFFFFFFF))


def dated_png(data: bytes) -> bytes:
    """The PNG file ``data`` with :func:`png_time_chunk` before its first IDAT chunk (a PNG
    another writer made, such as matplotlib's); ``data`` itself when the variable is unset."""
    chunk = png_time_chunk()
    if not chunk:
        return data
    at = 8                                  # past the signature: walk the chunks to the IDAT
    while at + 8 <= len(data):
        length, kind = struct.unpack(">I4s", data[at:at + 8])
        if kind == b"IDAT":
            return data[:at] + chunk + data[at:]
        at += 12 + length
    raise ValueError("not a PNG file with image data")


def tiff_datetime() -> str | None:
    """:func:`source_date` as TIFF 6.0's DateTime ("YYYY:MM:DD HH:MM:SS"), None when unset."""
    date = source_date()
    return None if date is None else date.strftime("%Y:%m:%d %H:%M:%S")
