"""The date the page's PDF and SVG carry: ``SOURCE_DATE_EPOCH`` or none.

The SOURCE_DATE_EPOCH specification (reproducible-builds.org/specs/source-date-epoch, revision
1.1): a tool that writes a date into its output takes it from the environment variable
``SOURCE_DATE_EPOCH`` when it is set -- whole seconds since 1970-01-01 00:00:00 UTC, written as
``date +%s`` prints them -- instead of the current time, so the same inputs give the same bytes;
a malformed value should stop the tool with an error. Without it the page's files carry no date
at all: the time a map was drawn says nothing about the map (its data and style decide it), and
neither the PDF's document information (ISO 32000-1, 14.3.3: every entry optional) nor the
SVG's metadata requires one. Every other output of a render (PNG, GeoTIFF, legend, report, review
page, tiles) writes no date either way.
"""
from __future__ import annotations

import os
import re
from datetime import UTC, datetime

from compose.errors import ComposeError

__all__ = ["ENV", "source_date", "pdf_date", "svg_date"]

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
