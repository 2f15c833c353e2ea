"""One exception family for the whole engine.

The CLI turns any :class:`ComposeError` into one line on stderr and exit code 2.
Messages name the file, the style key path and the offending value.
"""

__all__ = ["ComposeError", "StyleError", "ColorError", "SourceError", "OutputError"]


class ComposeError(Exception):
    """Raised when compose cannot do what was asked because of its input; the base of all ours."""


class StyleError(ComposeError, ValueError):
    """Raised when a style file is malformed: unknown key, wrong type, bad value, missing ramp."""


class ColorError(StyleError):
    """Raised when a colour string or {L, C, h} table cannot be parsed or is out of range."""


class SourceError(ComposeError, OSError):
    """Raised when a data source is missing, unreadable, has no CRS or does not overlap the canvas."""


class OutputError(ComposeError, OSError):
    """Raised when an output cannot be written (exists without --overwrite, unwritable folder)."""
