"""Arrow arrays from numpy arrays and lists of text, without importing pandas.

``pyarrow.array`` imports pandas (when it is installed) to check whether its
argument is a pandas object: about 0.2 s in every process that builds a shard,
a count file or a word list. These helpers build the same arrays (same types,
no validity buffer, so the files written are byte for byte the same) from the
buffers themselves; ``numpy_of`` reads fixed-width Arrow arrays back the same way.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

__all__ = ["arrow_array", "arrow_strings", "numpy_of"]


def arrow_array(values: np.ndarray) -> Any:
    """A 1-D numeric or bool numpy array as an Arrow array of the same type.

    >>> arrow_array(np.arange(3, dtype=np.int32)).to_pylist()
    [0, 1, 2]
    """
    import pyarrow as pa

    v = np.ascontiguousarray(values)
    if v.ndim == 1 and v.dtype.kind == "b":
        bits = np.packbits(v, bitorder="little")
        return pa.Array.from_buffers(pa.bool_(), len(v), [None, pa.py_buffer(bits)])
    if v.ndim != 1 or v.dtype.kind not in "iuf":
        return pa.array(v)
    return pa.Array.from_buffers(pa.from_numpy_dtype(v.dtype), len(v), [None, pa.py_buffer(v)])


def arrow_strings(texts: Sequence[str], *, large: bool = True) -> Any:
    """Texts as an Arrow (large_)string array.

    >>> arrow_strings(["to", "be"]).to_pylist()
    ['to', 'be']
    """
    import pyarrow as pa

    data = [t.encode("utf-8") for t in texts]
    offsets = np.zeros(len(data) + 1, np.int64 if large else np.int32)
    if data:
        np.cumsum(np.fromiter(map(len, data), np.int64, len(data)), out=offsets[1:])
    kind = pa.large_string() if large else pa.string()
    return pa.Array.from_buffers(
        kind, len(data), [None, pa.py_buffer(offsets), pa.py_buffer(b"".join(data))]
    )


def numpy_of(array: Any, dtype: Any = None) -> np.ndarray:
    """A fixed-width Arrow array or chunked array without nulls as numpy (others: to_numpy).

    >>> numpy_of(arrow_array(np.arange(3, dtype=np.uint16)), np.int64).tolist()
    [0, 1, 2]
    """
    import pyarrow as pa

    chunks = array.chunks if isinstance(array, pa.ChunkedArray) else [array]
    if all(c.null_count == 0 and (pa.types.is_integer(c.type) or pa.types.is_floating(c.type))
           for c in chunks):
        parts = [np.frombuffer(c.buffers()[1], c.type.to_pandas_dtype())[c.offset:][:len(c)]
                 for c in chunks if len(c)]
        if not parts:
            return np.zeros(0, dtype or array.type.to_pandas_dtype())
        out = parts[0] if len(parts) == 1 else np.concatenate(parts)
        return out if dtype is None else np.asarray(out, dtype=dtype)
    out = array.to_numpy(zero_copy_only=False)
    return out if dtype is None else np.asarray(out, dtype=dtype)
