"""Frozen values passed between layers.

Nothing here touches the store, the CLI or the UI. Arrays are numpy arrays in
the canonical layout described on each class; the store keeps them as blobs.
"""

from __future__ import annotations

import hashlib
import os
import re
from dataclasses import dataclass, field
from typing import Any

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import numpy as np

# numpy loads with the first function that needs it, so that the CLI's listings and ``--help``
# (which import this module for its dataclasses) start without it.
_NUMPY_CONSTANTS = {"NODE_ID_DTYPE": "str_", "INDEX_DTYPE": "int64", "WEIGHT_DTYPE": "float64"}


def available_cpus() -> int:
    """CPUs this process may run on (affinity-aware): what the numerics' and the readers'
    two-thread paths check before starting a second thread."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def __getattr__(name: str):
    """``NODE_ID_DTYPE`` (numpy ``str_``), ``INDEX_DTYPE`` (int64), ``WEIGHT_DTYPE`` (float64)."""
    if name in _NUMPY_CONSTANTS:
        import numpy as np

        value = getattr(np, _NUMPY_CONSTANTS[name])
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


# Code points one step of the id encoder/decoder may lay out (4 bytes each): ids are handled in
# chunks of rows of at most this many padded code points, so the time per id stays flat and the
# scratch memory bounded whatever the number and length of the ids.
_CHUNK_POINTS = 1 << 22


def _chunk_rows(width: int) -> int:
    return max(1, _CHUNK_POINTS // max(width, 1))


def encode_node_ids(node_ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Pack string node ids as (offsets int64 of length n+1, UTF-8 bytes uint8).

    The packed form is what gets stored and hashed: it has no pickled objects
    and no fixed-width padding, so it stays small for long ids. A numpy ``str``
    array is packed in chunks of rows straight from its UCS-4 code points: the
    UTF-8 length of code point ``c`` is ``1 + [c >= 0x80] + [c >= 0x800] +
    [c >= 0x10000]`` (RFC 3629, section 3), ASCII chunks are narrowed byte by
    byte and other chunks go through Python's UTF-32 -> UTF-8 codecs. Any other
    array goes through ``str(x).encode("utf-8")`` per element. Both give the
    bytes of ``str.encode("utf-8")``.

    References
    ----------
    F. Yergeau, RFC 3629, "UTF-8, a transformation format of ISO 10646" (2003).
    """
    import numpy as np

    node_ids = np.asarray(node_ids)
    n = node_ids.shape[0]
    offsets = np.zeros(n + 1, dtype=np.int64)
    if n == 0:
        return offsets, np.zeros(0, dtype=np.uint8)
    if node_ids.dtype.kind != "U" or not node_ids.dtype.itemsize:
        encoded = [str(x).encode("utf-8") for x in node_ids.tolist()]
        np.cumsum(np.fromiter(map(len, encoded), dtype=np.int64, count=n), out=offsets[1:])
        return offsets, np.frombuffer(b"".join(encoded), dtype=np.uint8).copy()
    width = node_ids.dtype.itemsize // 4
    grid = np.ascontiguousarray(node_ids).view(np.uint32).reshape(n, width)
    lengths = np.strings.str_len(node_ids).astype(np.int64)  # code points, trailing NULs aside
    step = _chunk_rows(width)
    pieces = []
    columns = np.arange(width)
    for a in range(0, n, step):
        b = min(n, a + step)
        block = grid[a:b]
        points = block[columns[None, :] < lengths[a:b, None]]
        if points.size == 0 or int(points.max()) < 0x80:
            offsets[a + 1:b + 1] = lengths[a:b]
            pieces.append(points.astype(np.uint8))
            continue
        row_bytes = lengths[a:b].copy()
        for bound in (0x80, 0x800, 0x10000):
            row_bytes += np.count_nonzero(block >= bound, axis=1)
        offsets[a + 1:b + 1] = row_bytes
        pieces.append(np.frombuffer(points.tobytes().decode("utf-32-le").encode("utf-8"), dtype=np.uint8))
    np.cumsum(offsets[1:], out=offsets[1:])
    data = pieces[0] if len(pieces) == 1 else np.concatenate(pieces)
    return offsets, np.ascontiguousarray(data, dtype=np.uint8)


def decode_node_ids(offsets: np.ndarray, data: np.ndarray) -> np.ndarray:
    """Inverse of :func:`encode_node_ids`; returns a numpy ``str`` array.

    The code points of id ``i`` are found without a per-id loop: a byte
    starts a code point unless it is a continuation byte ``10xxxxxx`` (RFC 3629,
    section 3), so the running count of starting bytes at ``offsets`` gives each
    id's code-point length (for ASCII data its byte length), counted in steps of
    at most ``_CHUNK_POINTS`` bytes. Rows
    are then filled in chunks of bounded size (ASCII bytes widened, other chunks
    through Python's UTF-8 -> UTF-32 codecs), so the cost per id does not jump
    with the number or the length of the ids. Invalid UTF-8 raises
    :class:`UnicodeDecodeError`, as ``bytes.decode`` does.

    References
    ----------
    F. Yergeau, RFC 3629, "UTF-8, a transformation format of ISO 10646" (2003).
    """
    import numpy as np

    offsets = np.asarray(offsets, dtype=np.int64)
    n = offsets.shape[0] - 1
    if n <= 0:
        return np.array([], dtype="<U1")
    data = np.asarray(data, dtype=np.uint8)[offsets[0]:offsets[-1]]
    rel = offsets - offsets[0]
    ascii_only = data.size == 0 or int(data.max()) < 0x80
    lengths = np.diff(rel)
    if not ascii_only:  # code points per id: its bytes less its continuation bytes, in bounded steps
        a = 0
        while a < n:  # bounded: each step takes at least one id
            b = min(n, max(a + 1, int(np.searchsorted(rel, rel[a] + _CHUNK_POINTS, side="right")) - 1))
            starts = np.zeros(int(rel[b] - rel[a]) + 1, dtype=np.int64)
            np.cumsum((data[rel[a]:rel[b]] & 0xC0) != 0x80, out=starts[1:])
            lengths[a:b] = np.diff(starts[rel[a:b + 1] - rel[a]])
            a = b
    width = max(int(lengths.max()), 1)
    out = np.zeros(n, dtype=f"<U{width}")
    grid = out.view(np.uint32).reshape(n, width)
    columns = np.arange(width)
    step = _chunk_rows(width)
    for a in range(0, n, step):
        b = min(n, a + step)
        chunk = data[rel[a]:rel[b]]
        if ascii_only:
            points = chunk
        else:
            points = np.frombuffer(chunk.tobytes().decode("utf-8").encode("utf-32-le"), dtype=np.uint32)
        block = grid[a:b]
        block[columns[None, :] < lengths[a:b, None]] = points
    return out


#: Id bytes read per step when packed ids are read through (:meth:`PackedNodeIds.take`).
_TAKE_BYTES = 1 << 20


class BytesReader:
    """``read(n)``: the next ``n`` bytes of a uint8 array held in memory, as a view.

    The protocol :class:`PackedNodeIds` reads its bytes through (the store gives readers that
    decompress a step at a time with the same method).
    """

    def __init__(self, data: np.ndarray) -> None:
        self._data = data
        self._at = 0

    def read(self, n: int) -> np.ndarray:
        if self._at + n > self._data.shape[0]:
            raise ValueError(f"read past the end of {self._data.shape[0]} bytes")
        self._at += n
        return self._data[self._at - n:self._at]


class PackedNodeIds:
    """A version's node ids as stored: UTF-8 bytes and offsets, decoded only where asked.

    Id ``i`` is ``data[offsets[i]:offsets[i + 1]].decode("utf-8")`` (the layout of
    :func:`encode_node_ids`). A command that needs few id strings (the moved nodes of a
    diff of two runs of one version) or only their bytes (a CSV export) keeps the ids in
    this form: about 8 bytes per id, plus the UTF-8 bytes, which may even stay in the
    store's compressed form and be read through a step at a time (``open_data``), against
    4 bytes per character of the longest id for a numpy ``str`` array. The ids of a stored
    version are canonical (sorted ascending by code point, unique): the store holds no others.

    Parameters
    ----------
    offsets : ndarray of int64, shape (n + 1,)
    data : ndarray of uint8, shape (offsets[-1],), or None
        The bytes in memory; None when ``open_data`` reads them.
    open_data : callable or None
        Returns a fresh reader (an object with ``read(n)`` giving the next ``n`` bytes from
        ``offsets[0]`` on, valid until the next call) over the bytes.
    size : int or None
        Length of the bytes with ``open_data`` (default ``offsets[-1]``).
    """

    __slots__ = ("offsets", "_data", "_open_data", "_size", "_decoded")

    def __init__(self, offsets: np.ndarray, data: np.ndarray | None = None, *, open_data=None,
                 size: int | None = None) -> None:
        import numpy as np

        self.offsets = np.asarray(offsets, dtype=np.int64)
        if self.offsets.ndim != 1 or self.offsets.shape[0] < 1:
            raise ValueError("offsets must be a 1-D array of n + 1 entries")
        if (data is None) == (open_data is None):
            raise ValueError("give the bytes (data) or a way to read them (open_data), one of the two")
        self._data = None if data is None else np.asarray(data, dtype=np.uint8)
        self._open_data = open_data
        self._size = int(self.offsets[-1]) if size is None else int(size)
        self._decoded = None

    def __len__(self) -> int:
        return int(self.offsets.shape[0]) - 1

    @property
    def shape(self) -> tuple[int]:
        return (len(self),)

    @property
    def data(self) -> np.ndarray:
        """All the bytes in memory (read once from ``open_data`` if need be, then kept)."""
        import numpy as np

        if self._data is None:
            # a fresh reader read once: its buffer is handed over, not copied
            self._data = np.asarray(self._open_data().read(self._size), dtype=np.uint8)
        return self._data

    def open_bytes(self):
        """A fresh reader over the bytes (see ``open_data``), in memory or from the store."""
        return BytesReader(self._data) if self._data is not None else self._open_data()

    def strings(self):
        """All ids as an Arrow string array that views their bytes: no ``str`` per id (a numpy ``str``
        array of 10M 40-character ids is 1.6 GB); large offsets from 2 GiB of bytes on."""
        import numpy as np
        import pyarrow as pa

        data = pa.py_buffer(np.ascontiguousarray(self.data))
        if int(self.offsets[-1]) < 2 ** 31:
            return pa.StringArray.from_buffers(len(self), pa.py_buffer(self.offsets.astype(np.int32)), data)
        return pa.LargeStringArray.from_buffers(len(self), pa.py_buffer(self.offsets), data)

    def decode(self) -> np.ndarray:
        """All ids as a numpy ``str`` array (:func:`decode_node_ids`), decoded once and kept."""
        if self._decoded is None:
            self._decoded = decode_node_ids(self.offsets, self.data)
        return self._decoded

    def position(self, node: str) -> int | None:
        """The index of ``node`` among the ids, or None: a binary search over their UTF-8 bytes.

        The ids are sorted by code point, which is the byte order of their UTF-8 encodings
        (a prefix first), the order Python's ``bytes`` compare in; so about ``log2 n`` ids are
        compared and none is decoded (10M 40-character ids decoded to look up one: 2.3 GB).
        """
        key = node.encode("utf-8")
        data, offsets = self.data, self.offsets
        lo, hi = 0, len(self)
        while lo < hi:
            mid = (lo + hi) // 2
            if data[int(offsets[mid]):int(offsets[mid + 1])].tobytes() < key:
                lo = mid + 1
            else:
                hi = mid
        if lo < len(self) and data[int(offsets[lo]):int(offsets[lo + 1])].tobytes() == key:
            return lo
        return None

    def take(self, positions) -> np.ndarray:
        """The ids at ``positions`` (int, any order) as a numpy ``str`` array.

        Only their bytes are gathered and decoded; bytes not in memory are read through once
        in steps of about :data:`_TAKE_BYTES` (whole ids), never held all at once.
        """
        import numpy as np

        positions = np.asarray(positions, dtype=np.int64).reshape(-1)
        if self._decoded is not None:
            return self._decoded[positions]
        if positions.size == 0:
            return np.zeros(0, dtype="<U1")
        n = len(self)
        if int(positions.min()) < -n or int(positions.max()) >= n:
            raise IndexError(f"node position out of range for {n} ids")
        positions = np.where(positions < 0, positions + n, positions)
        wanted, back = np.unique(positions, return_inverse=True)
        starts = self.offsets[wanted]
        lengths = self.offsets[wanted + 1] - starts
        out_offsets = np.zeros(wanted.size + 1, dtype=np.int64)
        np.cumsum(lengths, out=out_offsets[1:])
        gathered = np.empty(int(out_offsets[-1]), dtype=np.uint8)
        reader = self.open_bytes()
        row = 0
        w = 0
        while row < n and w < wanted.size:  # bounded: each step takes at least one row
            end = int(np.searchsorted(self.offsets, self.offsets[row] + _TAKE_BYTES, side="right")) - 1
            end = min(n, max(end, row + 1))
            piece = reader.read(int(self.offsets[end] - self.offsets[row]))
            w_end = int(np.searchsorted(wanted, end))
            if w_end > w:
                first = int(self.offsets[row])
                shift = np.repeat(starts[w:w_end] - first - out_offsets[w:w_end], lengths[w:w_end])
                at = np.arange(out_offsets[w], out_offsets[w_end])
                gathered[out_offsets[w]:out_offsets[w_end]] = piece[shift + at]
                w = w_end
            row = end
        ids = decode_node_ids(out_offsets, gathered)
        return ids[back]


#: :func:`merge_sorted_ids` gives up (and the hash sets of Arrow decide) after this many ids found in only
#: one of the two lists: each costs a few Arrow calls from Python (tens of microseconds), against about
#: 2 microseconds per id for ``is_in``/``index_in``/``sort_indices`` over both lists (10M 40-character
#: ids: 20.6 s).
MERGE_MAX_DIFFERENCES = 50_000

#: First window of :func:`merge_sorted_ids`' element-wise comparison (doubled while the lists agree, up to
#: :data:`MERGE_MAX_WINDOW`, and started again after each difference).
MERGE_FIRST_WINDOW = 4096
MERGE_MAX_WINDOW = 1 << 22


def comparable_strings(a, b):
    """Two Arrow string arrays of one type (both large when their types differ), for ``equals`` and
    the element-wise comparisons of :func:`merge_sorted_ids`."""
    if a.type == b.type:
        return a, b
    import pyarrow as pa

    return a.cast(pa.large_string()), b.cast(pa.large_string())


def merge_sorted_ids(a, b, max_differences: int | None = None):
    """The union of two sorted lists of distinct ids by merging them, or None when either list is not
    strictly increasing or more than ``max_differences`` (default :data:`MERGE_MAX_DIFFERENCES`) ids
    are in only one of them.

    The lists are compared element by element (``pyarrow.compute.equal``) in windows that double
    while they agree; at the first disagreement the smaller id is the one missing from the other list
    (both are sorted), and the walk steps past it. Returns ``(removed, added, pos_a, pos_b, size)``:
    positions in ``a`` of the ids only in ``a`` and in ``b`` of those only in ``b`` (both increasing),
    the position of every id of each list in the sorted union, and the union's size. Linear in the
    lists' length plus the window work of each difference, with no hash set and no sort.

    ``a`` and ``b`` are Arrow string arrays of one type (:func:`comparable_strings`;
    :meth:`PackedNodeIds.strings` views a stored version's ids so). Used by ``io.changes.structural_changes`` and ``compare.align_nodes``.
    """
    import numpy as np
    import pyarrow.compute as pc

    if max_differences is None:
        max_differences = MERGE_MAX_DIFFERENCES
    na, nb = len(a), len(b)
    for x in (a, b):    # strictly increasing (UTF-8 byte order, as stored), else the hash sets decide
        if len(x) > 1 and not pc.all(pc.less(x.slice(0, len(x) - 1), x.slice(1))).as_py():
            return None
    removed, removed_before = [], []     # a's position; b's position it precedes in the union
    added, added_before = [], []         # b's position; a's position it precedes in the union
    i = j = 0
    window = MERGE_FIRST_WINDOW
    while i < na and j < nb:
        span = min(window, na - i, nb - j)
        equal = pc.equal(a.slice(i, span), b.slice(j, span))
        first = pc.index(equal, False).as_py()
        if first < 0:
            i, j = i + span, j + span
            window = min(2 * window, MERGE_MAX_WINDOW)
            continue
        i, j = i + first, j + first
        if len(removed) + len(added) >= max_differences:
            return None
        if a[i].as_py() < b[j].as_py():      # code point order = UTF-8 byte order
            removed.append(i)
            removed_before.append(j)
            i += 1
        else:
            added.append(j)
            added_before.append(i)
            j += 1
        window = MERGE_FIRST_WINDOW
    if (na - i) + (nb - j) + len(removed) + len(added) > max_differences:
        return None
    removed += range(i, na)
    removed_before += [nb] * (na - i)
    added += range(j, nb)
    added_before += [na] * (nb - j)
    shift_a = np.zeros(na + 1, dtype=np.int64)      # ids only in b that come before each id of a
    np.add.at(shift_a, np.asarray(added_before, dtype=np.int64), 1)
    shift_b = np.zeros(nb + 1, dtype=np.int64)      # ids only in a that come before each id of b
    np.add.at(shift_b, np.asarray(removed_before, dtype=np.int64), 1)
    pos_a = np.arange(na, dtype=np.int64) + np.cumsum(shift_a)[:na]
    pos_b = np.arange(nb, dtype=np.int64) + np.cumsum(shift_b)[:nb]
    return (np.asarray(removed, dtype=np.int64), np.asarray(added, dtype=np.int64), pos_a, pos_b,
            na + len(added))


#: Edges per step of the adjacency builder (bounded temporaries).
_EDGE_CHUNK = 1 << 20


def _canonical_pairs(edge_u, edge_v, n: int) -> bool:
    """True when the pairs are canonical: integers in [0, n), ``u <= v``, sorted by (u, v), unique."""
    import numpy as np

    m = int(edge_u.shape[0])
    if edge_u.dtype.kind not in "iu" or edge_v.dtype.kind not in "iu" or edge_v.shape[0] != m:
        return False
    if m == 0:
        return True
    for a in range(0, m, _EDGE_CHUNK):
        b = min(m, a + _EDGE_CHUNK + 1)          # one pair of overlap: the order across chunks
        u, v = edge_u[a:b], edge_v[a:b]
        if int(u.min()) < 0 or int(v.max()) >= n or np.any(u > v):
            return False
        du = np.diff(u)
        if np.any(du < 0) or np.any((du == 0) & (np.diff(v) <= 0)):
            return False
    return True


def _symmetric_csr(edge_u, edge_v, weight, n: int):
    r"""The symmetric CSR adjacency of canonical pairs, built in place (no COO copy).

    The same matrix, bit for bit, as ``csr_array((w, (rows, cols)))`` over both
    directions followed by ``sum_duplicates`` and ``sort_indices``: row ``r``
    holds first its "lower" entries (pairs ``(u, r)``, ``u < r``, in increasing
    ``u``, the order of the pair list), then its "upper" ones (pairs ``(r, v)``,
    ``v >= r``, a contiguous run of the list). Indices are int32 when the
    number of stored entries and ``n`` fit, as scipy chooses them. The lower
    entries of a chunk of pairs are its transpose, put in row order by scipy's
    ``tocsc`` (a counting sort; Gustavson 1978, Two fast algorithms for sparse
    matrices, ACM TOMS 4(3)) instead of a comparison sort: 1M nodes, 7.5M pairs,
    0.35-0.41 s instead of 1.04-1.28 s, and no ``m log m`` term at 10M. Memory:
    the result plus temporaries of ``max(_EDGE_CHUNK, n)`` pairs and a few
    n-vectors.
    """
    import numpy as np

    import scipy.sparse as sp

    m = int(edge_u.shape[0])
    upper = np.bincount(edge_u, minlength=n)
    lower = np.bincount(edge_v, minlength=n)
    loops = edge_u == edge_v
    if loops.any():
        lower -= np.bincount(edge_v[loops], minlength=n)
    del loops
    nnz = int(upper.sum() + lower.sum())
    idx = np.int32 if max(nnz, n) < 2 ** 31 else np.int64
    indptr = np.zeros(n + 1, dtype=idx)
    np.cumsum(upper + lower, out=indptr[1:])
    indices = np.empty(nnz, dtype=idx)
    # one weight for every pair (an unweighted graph): the values are filled in one sequential
    # pass and only the column indices are moved (10M nodes: 2 of 10 s were moving the values)
    uniform = m > 0 and bool(np.all(weight == weight[0]))
    data = np.full(nnz, weight[0], dtype=np.float64) if uniform else np.empty(nnz, dtype=np.float64)
    # upper entries: pair e of row u goes to indptr[u] + lower[u] + (e - first pair of row u)
    shift = indptr[:-1].astype(np.int64) + lower - (np.cumsum(upper) - upper)
    del upper
    fill = np.zeros(n, dtype=np.int64)          # lower entries placed so far per row
    # chunks of at least n pairs: each chunk's transposition costs O(n) besides its pairs
    step = max(_EDGE_CHUNK, n)
    for a in range(0, m, step):
        b = min(m, a + step)
        u, v = edge_u[a:b], edge_v[a:b]
        # (uniform: one byte a pair rides along through the transposition, not the weight)
        w = np.ones(b - a, dtype=np.int8) if uniform else np.asarray(weight[a:b], dtype=np.float64)
        slot = shift[u] + np.arange(a, b)
        indices[slot] = v
        if not uniform:
            data[slot] = w
        del slot
        off = u != v
        u, v, w = u[off], v[off], w[off]
        if v.shape[0] == 0:
            continue
        # the lower entries are the transpose of these pairs: scipy's counting sort (csr_tocsc)
        # puts them by row v, each row in pair-list order (increasing u), with no comparison sort
        first_row = int(u[0])
        rows_here = int(u[-1]) - first_row + 1
        local = np.zeros(rows_here + 1, dtype=idx)
        np.cumsum(np.bincount(u - first_row, minlength=rows_here), out=local[1:])
        T = sp.csr_array((w, v.astype(idx), local), shape=(rows_here, n)).tocsc()
        del u, v, w, local
        counts = np.diff(T.indptr)
        rows = np.flatnonzero(counts)
        counts = counts[rows]
        starts = T.indptr[:-1][rows]
        rows_of = np.repeat(rows, counts)
        slot = indptr[rows_of].astype(np.int64) + fill[rows_of]
        slot += np.arange(slot.shape[0]) - np.repeat(starts, counts)
        del rows_of
        indices[slot] = T.indices + first_row
        if not uniform:
            data[slot] = T.data
        fill[rows] += counts
    A = sp.csr_array((data, indices, indptr), shape=(n, n))
    A.has_sorted_indices = True
    A.has_canonical_format = True
    return A


@dataclass(frozen=True, eq=False)
class GraphData:
    """A weighted graph in canonical form (undirected unless ``directed``).

    Attributes
    ----------
    node_ids : ndarray of str, shape (n,)
        Unique node ids, sorted ascending by code point. Row ``i`` of every
        matrix built from this graph is node ``node_ids[i]``.
    edge_u, edge_v : ndarray of int64, shape (m,)
        Undirected: endpoint indices into ``node_ids`` with ``edge_u <= edge_v``
        (equality only for kept self-loops). Directed: the arc
        ``edge_u -> edge_v`` (either order; ``u -> v`` and ``v -> u`` are two
        arcs). Pairs sorted lexicographically, unique.
    weight : ndarray of float64, shape (m,)
        Positive finite edge weights (1.0 for unweighted input).
    directed : bool, default False
        Arcs kept with their direction (import policy ``directed="keep"``).
    """

    node_ids: np.ndarray
    edge_u: np.ndarray
    edge_v: np.ndarray
    weight: np.ndarray
    directed: bool = False

    @property
    def n_nodes(self) -> int:
        return int(self.node_ids.shape[0])

    @property
    def n_edges(self) -> int:
        return int(self.edge_u.shape[0])

    def degrees(self) -> np.ndarray:
        """Weighted degrees with self-loops counted twice, float64: the row sums of the (for a
        directed graph, symmetrised) adjacency plus its diagonal. An undirected graph whose every
        weight is 1 counts its edge ends instead, without building the adjacency (the same integers,
        exact either way; at 10M nodes the adjacency took 8.6 s)."""
        import numpy as np

        n = self.n_nodes
        if self.directed is False and (self.weight.size == 0 or bool(np.all(self.weight == 1.0))):
            ends = np.bincount(self.edge_u, minlength=n) + np.bincount(self.edge_v, minlength=n)
            return ends.astype(np.float64)
        A = self.adjacency()
        A = A if self.directed is False else (A + A.T)
        return np.asarray(A.sum(axis=1)).ravel() + A.diagonal()

    def adjacency(self):
        """``scipy.sparse.csr_array`` A: symmetric with A[u, v] = A[v, u] = w.

        A kept self-loop (u, u, w) puts w on the diagonal once. For a
        directed graph A[u, v] = w for the arc u -> v only (row = tail).
        """
        import numpy as np

        import scipy.sparse as sp

        n = self.n_nodes
        if self.directed:
            A = sp.csr_array((np.asarray(self.weight, dtype=np.float64),
                              (self.edge_u, self.edge_v)), shape=(n, n))
            A.sum_duplicates()
            A.sort_indices()
            return A
        if _canonical_pairs(self.edge_u, self.edge_v, n):
            return _symmetric_csr(self.edge_u, self.edge_v, self.weight, n)
        off = self.edge_u != self.edge_v
        rows = np.concatenate([self.edge_u, self.edge_v[off]])
        cols = np.concatenate([self.edge_v, self.edge_u[off]])
        vals = np.concatenate([self.weight, self.weight[off]])
        A = sp.csr_array((vals, (rows, cols)), shape=(n, n))
        A.sum_duplicates()
        A.sort_indices()
        return A

    def content_hash(self, encoded_ids: tuple[np.ndarray, np.ndarray] | None = None) -> str:
        """sha256 (hex) over the canonical raw bytes.

        ``encoded_ids``: ``encode_node_ids(self.node_ids)`` when the caller has it already.

        Layout hashed, in order: the tag ``b"cutbook-graph-1\\0"``; n and m as
        little-endian int64; node-id offsets (int64 LE) and UTF-8 bytes;
        ``edge_u``, ``edge_v`` (int64 LE); ``weight`` (float64 LE). Equal graphs
        therefore hash equal whatever file, line order or endpoint order they
        came from. A directed graph uses the tag ``b"cutbook-digraph-1\\0"``
        instead (so it never hashes equal to the undirected graph of the same
        arrays; undirected hashes are unchanged).
        """
        import numpy as np

        offsets, data = encoded_ids if encoded_ids is not None else encode_node_ids(self.node_ids)

        def raw(values, dtype: str) -> memoryview:  # the bytes, without a copy when already so
            return memoryview(np.ascontiguousarray(values, dtype=dtype)).cast("B")

        h = hashlib.sha256(b"cutbook-digraph-1\0" if self.directed else b"cutbook-graph-1\0")
        h.update(np.array([self.n_nodes, self.n_edges], dtype="<i8").tobytes())
        h.update(raw(offsets, "<i8"))
        h.update(raw(data, "u1"))
        h.update(raw(self.edge_u, "<i8"))
        h.update(raw(self.edge_v, "<i8"))
        h.update(raw(self.weight, "<f8"))
        return h.hexdigest()


_REF = re.compile(r"^(?P<project>[^/@\s]+)/(?P<network>[^/@\s]+)(?:@(?P<version>\d+))?$")


@dataclass(frozen=True)
class VersionRef:
    """``project/network[@version]``; ``version=None`` means the latest."""

    project: str
    network: str
    version: int | None = None

    @classmethod
    def parse(cls, text: str) -> "VersionRef":
        from workspace.errors import UsageError

        m = _REF.match(text.strip())
        if not m:
            raise UsageError(f"not a network reference: {text!r} (expected project/network[@version])")
        v = m.group("version")
        return cls(m.group("project"), m.group("network"), int(v) if v is not None else None)

    def __str__(self) -> str:
        base = f"{self.project}/{self.network}"
        return base if self.version is None else f"{base}@{self.version}"


@dataclass(frozen=True)
class ImportPolicy:
    """How a file becomes a canonical graph. Every field is recorded on the version.

    Attributes
    ----------
    duplicates : {"sum", "max", "first", "error"}
        What to do when a pair appears more than once (reversed pairs count).
    self_loops : {"drop", "keep", "error"}
    directed : {"error", "sum", "max", "min", "mean", "keep"}
        How asymmetric directed input is symmetrised; "error" refuses it;
        "keep" keeps the direction (a directed version: rows of a delimited
        file are arcs first column -> second; an edge of a file that
        declares itself undirected becomes two arcs).
    weight : str or int or None
        Weight column by name or 0-based index (delimited files) or attribute
        name (GraphML, JSON); None means unweighted (weight 1).
    numeric_ids : bool
        Coerce node ids to integers (``"007"`` -> ``"7"``); off by default.
    comment : str or None
        Comment character for delimited files; none by default.
    delimiter : str or None
        ``","``, ``"\\t"``, ``"whitespace"`` …; None means by file extension.
    header : {"auto", "yes", "no"}
    """

    duplicates: str = "max"
    self_loops: str = "drop"
    directed: str = "error"
    weight: str | int | None = None
    numeric_ids: bool = False
    comment: str | None = None
    delimiter: str | None = None
    header: str = "auto"

    def as_dict(self) -> dict[str, Any]:
        from dataclasses import asdict

        return asdict(self)


@dataclass(frozen=True)
class ImportReport:
    """What an import found; stored with the version and printed.

    ``weight_summary`` holds min/max/mean/median/total of the kept weights.
    ``component_sizes`` lists sizes in descending order (at most 50, with
    ``components`` the full count).
    """

    source: str
    format: str
    records_read: int
    nodes: int
    edges: int
    components: int
    component_sizes: list[int]
    isolated_nodes: int
    self_loops_found: int
    self_loops_kept: int
    duplicates_merged: int
    asymmetric_pairs: int
    zero_weight_dropped: int
    weighted: bool
    weight_summary: dict[str, float]
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        from dataclasses import asdict

        return asdict(self)


def canonical_labels(labels: np.ndarray) -> np.ndarray:
    """Renumber community labels 0, 1, 2, … by first appearance in node order.

    A label of -1 ("not assigned", e.g. a node missing from an attached file)
    stays -1. Returns int64. Two labelings that define the same partition give
    the same canonical array.
    """
    import numpy as np

    labels = np.asarray(labels)
    out = np.full(labels.shape[0], -1, dtype=np.int64)
    assigned = labels >= 0
    if not assigned.any():
        return out
    values = labels[assigned]
    uniq, first_index, inverse = np.unique(values, return_index=True, return_inverse=True)
    order = np.argsort(first_index, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.shape[0])
    out[assigned] = rank[inverse]
    return out


def membership_hash(labels: np.ndarray) -> str:
    """sha256 (hex) of ``b"cutbook-membership-1\\0"`` + n (int64 LE) + canonical labels (int64 LE)."""
    import numpy as np

    canon = canonical_labels(labels)
    h = hashlib.sha256(b"cutbook-membership-1\0")
    h.update(np.array([canon.shape[0]], dtype="<i8").tobytes())
    h.update(canon.astype("<i8", copy=False).tobytes())
    return h.hexdigest()


def compact_label_dtype(labels: np.ndarray) -> np.dtype:
    """Smallest signed integer dtype that holds ``labels`` (so -1 still fits)."""
    import numpy as np

    top = int(labels.max()) if labels.size else 0
    for dt in (np.int8, np.int16, np.int32):
        if top <= np.iinfo(dt).max:
            return np.dtype(dt)
    return np.dtype(np.int64)
