"""Layer kinds: one module per kind with its renderer class (see :mod:`compose.layers.base`).

The registry of kinds -- schema, renderer, legend entry, measurement -- is
:data:`compose.style.kinds.LAYER_KINDS`; renderers are imported from it by name, only when a
render needs them.
"""
