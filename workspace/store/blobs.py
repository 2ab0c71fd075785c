"""Array <-> blob codec and content hash.

Codec ``npy+zstd``: ``np.save(..., allow_pickle=False)`` of a little-endian,
C-contiguous 1-D array, compressed with zstandard, in one ``blobs.data`` value.
Codec ``zstd-chunks`` (revision 0006), for arrays larger than the chunk size
(``$CUTBOOK_BLOB_CHUNK_BYTES``, default 64 MiB of raw bytes): the raw little-endian
bytes cut into pieces of whole items, each compressed on its own and stored as one
``blob_chunks`` row with the sha256 of its raw bytes; dtype and length live on the
``blobs`` row. A bytea value and an SQLite blob are each limited to 1 GB (PostgreSQL
documentation, "Binary Data Types"; SQLite "Limits In SQLite", SQLITE_MAX_LENGTH), so
a single value could not hold a 100M-edge network's arrays; chunks can.

The hash is sha256 over ``b"<dtype>:<length>\\0"`` followed by the raw little-endian
bytes, so it does not depend on the codec, the compression level or the chunking.

New code that stores arrays calls ``repo.put_array`` (or ``encode_array`` before the
write transaction and ``repo.put_encoded`` inside it) and reads them with
``repo.get_array``; it never reads or writes ``blobs.data`` itself.
"""

from __future__ import annotations

import hashlib
import io
import os
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # numpy loads inside the functions that use it (quick CLI start-up)
    import numpy as np


CODEC = "npy+zstd"
CHUNKED_CODEC = "zstd-chunks"
_LEVEL = 3
ENV_CHUNK_BYTES = "CUTBOOK_BLOB_CHUNK_BYTES"
DEFAULT_CHUNK_BYTES = 64 << 20  # raw bytes per chunk: compressed, far below the 1 GB value limit


def chunk_bytes() -> int:
    """Raw bytes per chunk: ``$CUTBOOK_BLOB_CHUNK_BYTES`` (tests use a few bytes), else 64 MiB.

    Read at each encoding, so a spawned run process uses the same setting as its parent.
    """
    value = os.environ.get(ENV_CHUNK_BYTES)
    if not value:
        return DEFAULT_CHUNK_BYTES
    try:
        size = int(value)
    except ValueError:
        size = 0
    if size < 1:
        from workspace.errors import UsageError

        raise UsageError(f"${ENV_CHUNK_BYTES} must be a positive number of bytes, not {value!r}")
    return size


@dataclass(frozen=True)
class Chunk:
    """One stored piece of a chunked array: its raw size, the sha256 of its raw bytes, its zstd bytes."""

    raw_size: int
    hash: str
    data: bytes


@dataclass(frozen=True)
class EncodedArray:
    hash: str
    codec: str
    dtype: str
    length: int
    raw_size: int
    data: bytes  # b"" for a chunked array
    chunks: tuple[Chunk, ...] = ()

    @property
    def stored_size(self) -> int:
        """Bytes the database will hold (compressed)."""
        return len(self.data) + sum(len(c.data) for c in self.chunks)


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
    if a.nbytes > chunk_bytes():
        return _encode_chunked(a)
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


def _encode_chunked(a: np.ndarray) -> EncodedArray:
    """``zstd-chunks``: whole items per chunk, each chunk compressed alone (level 1, all cores)."""
    import zstandard

    raw = memoryview(a).cast("B")
    step = max(1, chunk_bytes() // a.itemsize) * a.itemsize
    compressor = zstandard.ZstdCompressor(level=1, threads=-1)
    chunks = tuple(Chunk(len(piece), hashlib.sha256(piece).hexdigest(), compressor.compress(piece))
                   for piece in (raw[i:i + step] for i in range(0, a.nbytes, step)))
    return EncodedArray(array_hash(a), CHUNKED_CODEC, a.dtype.str, int(a.shape[0]), a.nbytes, b"", chunks)


def decompress_chunk_into(data: bytes, out: memoryview) -> None:
    """Decompress one chunk straight into ``out`` (a slice of the array's buffer: no second copy).

    Raises ValueError when the chunk does not fill ``out`` exactly.
    """
    import zstandard

    filled = 0
    with zstandard.ZstdDecompressor().stream_reader(data) as reader:
        while filled < len(out):
            n = reader.readinto(out[filled:])
            if not n:
                break
            filled += n
        extra = reader.read(1)
    if filled != len(out) or extra:
        raise ValueError(f"chunk holds {'more' if extra else filled} bytes, expected {len(out)}")


def chunk_header(dtype: str, length: int) -> bytes:
    """What :func:`array_hash` hashes before the raw bytes (for hashing a chunked array piece by piece)."""
    return f"{dtype}:{length}\0".encode()


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
    return array_from_npy(decompress_npy(codec, data, raw_size))


def decompress_npy(codec: str, data: bytes, raw_size: int | None = None):
    """The ``.npy`` stream of a stored array: a uint8 numpy buffer for large arrays, else bytes.

    Safe to run in several threads at once (zstandard releases the interpreter lock), unlike
    :func:`array_from_npy`: numpy parses the ``.npy`` header with ``ast.literal_eval``, and
    CPython 3.11's compiler is not thread-safe ("AST constructor recursion depth mismatch").
    """
    import numpy as np

    import zstandard

    if codec != CODEC:
        raise ValueError(f"unknown blob codec {codec!r}")
    if raw_size and raw_size > 1 << 20:
        buf = np.empty(raw_size, dtype=np.uint8)
        decompress_chunk_into(data, memoryview(buf))
        return buf
    return zstandard.ZstdDecompressor().decompress(data, max_output_size=raw_size or 0)


def array_from_npy(stream) -> np.ndarray:
    """The array of a ``.npy`` stream from :func:`decompress_npy` (call it in one thread at a time)."""
    import numpy as np

    if isinstance(stream, np.ndarray):
        # large arrays: the array viewed in place after its header (np.load from bytes would
        # copy the values once more)
        buf, raw_size = stream, stream.shape[0]
        head = io.BytesIO(buf[:min(raw_size, 1 << 16)].tobytes())
        version = np.lib.format.read_magic(head)
        read_header = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                       else np.lib.format.read_array_header_2_0)
        shape, fortran, dtype = read_header(head)
        start = head.tell()
        if len(shape) == 1 and not dtype.hasobject and start + shape[0] * dtype.itemsize == raw_size:
            return buf[start:].view(dtype)
        raw = buf.tobytes()
    else:
        raw = stream
    return np.load(io.BytesIO(raw), allow_pickle=False)


class ArrayBytesReader:
    """The raw bytes of a stored array, read in order and decompressed a step at a time.

    ``frames`` are the array's compressed pieces in order with their raw sizes: one ``.npy``
    stream for codec ``npy+zstd`` (its header is skipped), the chunks for ``zstd-chunks``.
    :meth:`read` returns the next ``n`` bytes as a uint8 view into one reused buffer (valid
    until the next call), so reading a large array through costs no allocation of its size
    (a fresh buffer of hundreds of MB costs page faults and, with transparent huge pages,
    compaction, several times the decompression itself).
    """

    def __init__(self, frames: list[tuple[bytes, int]], *, npy: bool, capacity: int = 1 << 20) -> None:
        import numpy as np

        self._frames = list(frames)
        self._npy = npy
        self._next = 0
        self._reader = None
        self._left = 0  # raw bytes still expected from the open frame
        self._buf = np.empty(max(capacity, 16), dtype=np.uint8)

    def _open_next(self) -> bool:
        import zstandard

        if self._reader is not None:
            self._reader.close()
            self._reader = None
        if self._left:
            raise ValueError(f"a stored array's piece ended {self._left} bytes short")
        if self._next >= len(self._frames):
            return False
        data, raw_size = self._frames[self._next]
        self._next += 1
        self._reader = zstandard.ZstdDecompressor().stream_reader(data)
        self._left = raw_size
        if self._npy:  # skip the .npy header: magic, version, header length, header
            self._npy = False
            lead = self._exact(10)
            if lead[:6] != _NPY_MAGIC:
                raise ValueError("not an .npy stream")
            size = int.from_bytes(lead[8:10], "little") if lead[6] == 1 else \
                int.from_bytes(lead[8:10] + self._exact(2), "little")
            self._exact(size)
        return True

    def _exact(self, n: int) -> bytes:
        got = self._reader.read(n)
        while len(got) < n:  # bounded: each pass reads at least one byte or stops
            more = self._reader.read(n - len(got))
            if not more:
                raise ValueError("a stored array's piece ended early")
            got += more
        self._left -= n
        return got

    def read(self, n: int):
        """The next ``n`` bytes (uint8 view, valid until the next call); ValueError past the end."""
        import numpy as np

        if n > self._buf.shape[0]:
            self._buf = np.empty(n, dtype=np.uint8)
        out = memoryview(self._buf)
        filled = 0
        while filled < n:  # bounded: every pass fills bytes or opens the next of finitely many frames
            if self._reader is None or self._left == 0:
                if not self._open_next():
                    raise ValueError(f"a stored array ended {n - filled} bytes early")
                continue
            got = self._reader.readinto(out[filled:filled + min(n - filled, self._left)])
            if not got:
                raise ValueError("a stored array's piece ended early")
            filled += got
            self._left -= got
        return self._buf[:n]


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
