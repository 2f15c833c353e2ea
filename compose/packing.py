"""Pickling for window results and prepared layers sent between processes (worker processes,
cluster workers, the drawing helper of :mod:`compose.drawer`): mostly-zero numeric arrays (the
statistics' histograms) travel as their non-zero entries, and the style's read-only tables
(mapping proxies) as plain dicts."""
from __future__ import annotations

import copyreg
import io
import pickle
import types
from typing import Any

import numpy as np

__all__ = ["pack", "unpack"]


def _mapping_proxy(d: dict) -> types.MappingProxyType:
    return types.MappingProxyType(d)


# styles are frozen: their tables are read-only mapping proxies, which pickle as plain dicts
copyreg.pickle(types.MappingProxyType, lambda m: (_mapping_proxy, (dict(m),)))


def _sparse_array(shape, dtype, index, values) -> np.ndarray:
    out = np.zeros(shape, dtype)
    out.reshape(-1)[index] = values
    return out


class _Packer(pickle.Pickler):
    def reducer_override(self, obj):
        if type(obj) is np.ndarray and obj.size >= 1024 and obj.dtype.kind in "fiu":
            flat = obj.reshape(-1)
            index = np.flatnonzero(flat)
            if index.size * 3 < flat.size:        # mostly zeros: send the non-zero entries
                small = np.uint32 if flat.size < 2**32 else np.int64
                return _sparse_array, (obj.shape, obj.dtype, index.astype(small), flat[index])
        return NotImplemented


def pack(obj: Any) -> bytes:
    """Pickle ``obj`` with mostly-zero numeric arrays sent as their non-zero entries."""
    buf = io.BytesIO()
    _Packer(buf, protocol=pickle.HIGHEST_PROTOCOL).dump(obj)
    return buf.getvalue()


def unpack(data: bytes) -> Any:
    """The object :func:`pack` packed."""
    return pickle.loads(data)
