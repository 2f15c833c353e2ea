"""compose.page: a finished map page -- paper, map frame, furniture -- written as PDF, SVG and PNG.

:mod:`~compose.page.spec` reads ``[page]``; :mod:`~compose.page.geometry` does the geodesy (print
scale -> canvas, scale bar, true north, grids); :mod:`~compose.page.layout` places everything;
:mod:`~compose.page.draw` and :mod:`~compose.page.vectors` describe the page as one figure;
:mod:`~compose.page.write` is the render's sink and the writers; :mod:`~compose.page.contrast`
judges the furniture like any overlay.
"""
