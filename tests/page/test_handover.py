"""compose.page.handover: a prepared render pickled for a process forked before it existed."""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from types import MappingProxyType

from compose.page.handover import pack, shared_objects, unpack
from compose.sources.vector import VectorSource


@dataclass(frozen=True)
class _Spec:
    name: str
    options: MappingProxyType = field(default_factory=lambda: MappingProxyType({"width": 1.0}))


@dataclass(frozen=True)
class _Style:
    layers: tuple


class _Layer:
    def __init__(self, spec, source):
        self.spec = spec
        self.source = source
        self.placed = [("Sabreyroc", (10.0, 20.0))]


def test_the_styles_objects_go_by_reference_and_sources_stay_behind():
    style = _Style((_Spec("rivers"), _Spec("towns")))
    shared = shared_objects(style)
    assert id(style.layers[1].options) in shared
    source = VectorSource.__new__(VectorSource)     # an open source (never read here)
    layers = [_Layer(spec, source) for spec in style.layers]
    data = pack(layers, shared)
    back = unpack(data, shared)
    assert [la.spec for la in back] == list(style.layers)
    assert back[0].spec is style.layers[0]           # the same object, not a copy
    assert back[0].source is None and back[0].placed == layers[0].placed


def test_a_forked_process_gets_the_same_objects_back():
    style = _Style((_Spec("rivers"),))
    shared = shared_objects(style)
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:                                    # the child: made before the layers
        status = 1
        try:
            os.close(w)
            with os.fdopen(r, "rb") as inp:
                back = unpack(inp.read(), shared)
            status = 0 if back[0].spec is style.layers[0] and back[0].placed[0][0] == "Sabreyroc" else 1
        finally:
            os._exit(status)
    os.close(r)
    layers = [_Layer(style.layers[0], None)]        # made after the fork
    with os.fdopen(w, "wb") as out:
        out.write(pack(layers, shared))
    _, status = os.waitpid(pid, 0)
    assert os.waitstatus_to_exitcode(status) == 0
