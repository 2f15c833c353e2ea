"""compose.tiles: a Web Mercator tile pyramid of a style, rendered zoom by zoom by the engine,
with a self-contained viewer and a check report (see :mod:`compose.tiles.render`)."""
