"""``compose init``: inspect data files and write a commented starter style that renders and
passes the check (see :mod:`compose.starter.style` for the rules)."""
from compose.starter.inspect import RasterFacts, VectorFacts, inspect_path
from compose.starter.style import Choice, Starter, starter_style

__all__ = ["RasterFacts", "VectorFacts", "inspect_path", "Choice", "Starter", "starter_style"]
