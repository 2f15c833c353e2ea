"""The caution printed on every map product, report and page (one wording everywhere)."""
from __future__ import annotations

__all__ = ["CAUTION"]

#: Under every report, on every page and in every GeoTIFF's description.
CAUTION = ("Illustration only: not for navigation, hazard or safety decisions; "
           "defer to official sources.")
