"""Array <-> blob codec and content hash.

Codec ``npy+zstd``: ``np.save(..., allow_pickle=False)`` of a little-endian,
C-contiguous 1-D array, compressed with zstandard. The hash is sha256 over
``b"<dtype>:<length>\\0"`` followed by the raw little-endian bytes, so it does
not depend on the codec or compression level.
"""

from __future__ import annotations

import hashlib
import io
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # numpy loads inside the functions that use it (quick CLI start-up)
    import numpy as np


CODEC = "npy+zstd"
_LEVEL = 3


@dataclass(frozen=True)
class EncodedArray:
    hash: str
    codec: str
    dtype: str
    length: int
    raw_size: int
    data: bytes


def _canonical(arr: np.ndarray) -> np.ndarray:
    import numpy as np

    arr = np.asarray(arr)
    if arr.ndim != 1:
        raise ValueError("blobs hold 1-D arrays")
    if arr.dtype.kind not in "iufb":
        raise ValueError(f"blobs hold numeric arrays, not {arr.dtype}")
    return np.ascontiguousarray(arr, dtype=arr.dtype.newbyteorder("<"))


def array_hash(arr: np.ndarray) -> str:
    a = _canonical(arr)
    h = hashlib.sha256(f"{a.dtype.str}:{a.shape[0]}\0".encode())
    h.update(memoryview(a).cast("B"))
    return h.hexdigest()


def encode_array(arr: np.ndarray) -> EncodedArray:
    import numpy as np

    import zstandard

    a = _canonical(arr)
    if a.nbytes <= 1 << 22:
        buf = io.BytesIO()
        np.save(buf, a, allow_pickle=False)
        raw = buf.getvalue()
        data = zstandard.ZstdCompressor(level=_LEVEL).compress(raw)
        return EncodedArray(array_hash(a), CODEC, a.dtype.str, int(a.shape[0]), len(raw), data)
    # large arrays: the fastest level, on all cores (ratio differs by a few %), and the same
    # .npy stream (header, then the array's own memory) fed to the compressor without first
    # copying it into one bytes object
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(header, np.lib.format.header_data_from_array_1_0(a))
    head = header.getvalue()
    size = len(head) + a.nbytes
    compressor = zstandard.ZstdCompressor(level=1, threads=-1).compressobj(size=size)
    data = (compressor.compress(head) + compressor.compress(memoryview(a).cast("B"))
            + compressor.flush())
    return EncodedArray(array_hash(a), CODEC, a.dtype.str, int(a.shape[0]), size, data)


_NPY_MAGIC = b"\x93NUMPY"
_STRUCT_CODES = {"<f8": "d", "<f4": "f", "<i8": "q", "<i4": "i", "<i2": "h", "|i1": "b",
                 "<u8": "Q", "<u4": "I", "<u2": "H", "|u1": "B", "|b1": "?"}


def decode_values(codec: str, data: bytes, raw_size: int | None = None) -> list:
    """A stored 1-D array as a Python list, read without numpy (for small arrays on quick paths).

    Reads the ``.npy`` stream of :func:`encode_array` - magic, version, header length, the
    header dict, then the little-endian values - with ``struct``; the values equal
    ``decode_array(...).tolist()``. Reference: the NPY format description, numpy
    ``numpy.lib.format`` (NEP 1, 2007).
    """
    import ast
    import struct

    import zstandard

    if codec != CODEC:
        raise ValueError(f"unknown blob codec {codec!r}")
    raw = zstandard.ZstdDecompressor().decompress(data, max_output_size=raw_size or 0)
    if raw[:6] != _NPY_MAGIC:
        raise ValueError("not an .npy stream")
    if raw[6] == 1:
        (length,), start = struct.unpack_from("<H", raw, 8), 10
    else:
        (length,), start = struct.unpack_from("<I", raw, 8), 12
    header = ast.literal_eval(raw[start:start + length].decode("latin-1"))
    code = _STRUCT_CODES.get(header["descr"])
    shape = header["shape"]
    if code is None or header["fortran_order"] or len(shape) != 1:
        return decode_array(codec, data, raw_size).tolist()
    return list(struct.unpack_from(f"<{shape[0]}{code}", raw, start + length))


def decode_array(codec: str, data: bytes, raw_size: int | None = None) -> np.ndarray:
    import numpy as np

    import zstandard

    if codec != CODEC:
        raise ValueError(f"unknown blob codec {codec!r}")
    raw = zstandard.ZstdDecompressor().decompress(data, max_output_size=raw_size or 0)
    return np.load(io.BytesIO(raw), allow_pickle=False)


#: The five arrays of a network version, in the order of their blob columns.
GRAPH_ARRAYS = ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")


def encode_graph_arrays(graph, encoded_ids=None) -> dict[str, EncodedArray]:
    """The five encoded arrays of a graph; ``encoded_ids`` is ``encode_node_ids(graph.node_ids)``
    when the caller has it. Imports no SQL layer, so an import can compress before the store opens.
    """
    from workspace.domain import encode_node_ids

    offsets, data = encoded_ids if encoded_ids is not None else encode_node_ids(graph.node_ids)
    return dict(zip(GRAPH_ARRAYS, map(encode_array, (offsets, data, graph.edge_u, graph.edge_v,
                                                     graph.weight))))
