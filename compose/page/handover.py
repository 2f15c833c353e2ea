"""Handing a prepared render to a page process forked before the render was prepared.

The page process is forked as soon as the style is loaded, so that loading its drawing modules
runs on the other core beside the render's own imports and preparation instead of beside the
walk. It then needs what the preparation made: the canvas, the built ramps and the prepared
layers (the overlays' features and placed labels, the legend's palettes). :func:`pack` pickles
them with every object the style already held at the fork passed by reference
(:func:`shared_objects`: the child has the very same objects at the same addresses, so it gets
them back by their ``id``; the style's frozen mapping views could not be pickled anyway), and the
layers' open sources left behind (the page never reads a source). :func:`unpack` is the child's
side.
"""
from __future__ import annotations

import io
import pickle
from types import MappingProxyType

__all__ = ["shared_objects", "pack", "unpack", "LEFT_BEHIND"]

#: The layers' sources ((module, class) names: open files and datasets) stay in the render's
#: process: the page process gets None in their place.
LEFT_BEHIND = (("compose.sources.raster", "RasterSource"), ("compose.sources.vector", "VectorSource"))

_ATOMS = (str, bytes, int, float, complex, bool, type(None))


def shared_objects(root, limit: int = 100_000) -> dict[int, object]:
    """id -> object for ``root`` and everything reachable from it through dataclass fields,
    tuples, lists, dicts and mapping views (numbers and strings aside), at most ``limit``
    objects. Keeping them here keeps them alive, so no id is reused while the map exists."""
    seen: dict[int, object] = {}
    todo = [root]
    while todo and len(seen) < limit:
        obj = todo.pop()
        if isinstance(obj, _ATOMS) or id(obj) in seen:
            continue
        seen[id(obj)] = obj
        if isinstance(obj, (tuple, list, set, frozenset)):
            todo.extend(obj)
        elif isinstance(obj, (dict, MappingProxyType)):
            todo.extend(obj.values())
        elif hasattr(obj, "__dataclass_fields__"):
            todo.extend(getattr(obj, name, None) for name in obj.__dataclass_fields__)
    return seen


class _Packer(pickle.Pickler):
    def __init__(self, file, shared: dict[int, object]):
        super().__init__(file, protocol=pickle.HIGHEST_PROTOCOL)
        self.shared = shared

    def persistent_id(self, obj):
        if isinstance(obj, _ATOMS):
            return None
        if self.shared.get(id(obj)) is obj:
            return ("shared", id(obj))
        kind = type(obj)
        if (kind.__module__, kind.__qualname__) in LEFT_BEHIND:
            return ("left",)
        return None


class _Unpacker(pickle.Unpickler):
    def __init__(self, file, shared: dict[int, object]):
        super().__init__(file)
        self.shared = shared

    def persistent_load(self, pid):
        if pid[0] == "shared":
            return self.shared[pid[1]]
        return None


def pack(obj, shared: dict[int, object]) -> bytes:
    """``obj`` pickled, objects in ``shared`` by reference, open sources left behind."""
    buf = io.BytesIO()
    _Packer(buf, shared).dump(obj)
    return buf.getvalue()


def unpack(data: bytes, shared: dict[int, object]):
    """What :func:`pack` packed, in a process forked when ``shared`` held the same objects."""
    return _Unpacker(io.BytesIO(data), shared).load()
