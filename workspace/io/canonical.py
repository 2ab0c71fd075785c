"""Edge records -> canonical :class:`~workspace.domain.GraphData` + :class:`ImportReport`.

All steps are vectorised: pyarrow.compute dictionary encoding and sorting for ids, numpy
sorting of int64 pair keys ``lo * n + hi`` for duplicates and symmetrisation,
numpy hooking and pointer jumping for the report's connected components.
"""

from __future__ import annotations

import math

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.domain import GraphData, ImportPolicy, ImportReport, available_cpus, decode_node_ids
from workspace.errors import InputError
from workspace.io._common import EdgeRecords, Progress, first_cast_failure, report_progress

COMPONENT_SIZES_LISTED = 50


def _single(values: pa.Array | pa.ChunkedArray) -> pa.Array:
    if isinstance(values, pa.ChunkedArray):
        if values.num_chunks == 1:
            return values.chunk(0)
        if values.num_chunks == 0:
            return pa.array([], type=values.type)
        return values.combine_chunks()
    return values


def _numeric_ids(values: pa.Array) -> tuple[pa.Array | None, int | None]:
    """Ids as canonical decimal integers (``"007" -> "7"``), or (None, first bad index).

    Blanks around the id are trimmed and a leading ``+`` is dropped.
    """
    cleaned = pc.replace_substring_regex(pc.utf8_trim_whitespace(values), r"^\+", "")
    try:
        integers = pc.cast(cleaned, pa.int64())
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None, first_cast_failure(cleaned, pa.int64())
    return pc.cast(integers, pa.string()), None


MAX_ID_BYTES = 4096


def _length_faults(values: pa.Array | pa.ChunkedArray) -> tuple[int | None, int | None]:
    """(index of the first empty id, index of the first id longer than ``MAX_ID_BYTES``), each
    None when there is none: one length pass, chunk by chunk (no lengths array of the whole
    column)."""
    empty = long = None
    at = 0
    for chunk in _chunks(values):
        if len(chunk):
            lengths = pc.binary_length(chunk)
            low, high = (x.as_py() for x in pc.min_max(lengths).values())
            if empty is None and low == 0:
                empty = at + pc.index(lengths, 0).as_py()
            if long is None and high > MAX_ID_BYTES:
                long = at + pc.index(pc.greater(lengths, MAX_ID_BYTES), True).as_py()
            if empty is not None and long is not None:
                break
        at += len(chunk)
    return empty, long


def _check_ids(rec: EdgeRecords, source: pa.Array, target: pa.Array, extra: pa.Array | None,
               numeric: bool):
    """Numeric conversion (if asked), empty-id and id-length checks; errors at the earliest record.

    Node ids are identifiers: longer than ``MAX_ID_BYTES`` (4096) UTF-8 bytes is refused.
    """
    columns = [source, target] + ([extra] if extra is not None else [])
    if numeric:
        converted = [_numeric_ids(c) for c in columns]
        bad = [(i, k) for k, (_, i) in enumerate(converted) if i is not None]
        if bad:
            endpoint = [(i, k) for i, k in bad if k < 2]
            i, k = min(endpoint) if endpoint else bad[0]
            raise rec.error(i, f"node id {columns[k][i].as_py()!r} is not an integer (numeric "
                               "ids were asked for)", node=k == 2)
        columns = [c for c, _ in converted]
    faults = [_length_faults(c) for c in columns]
    empty = [(i, k) for k, (i, _) in enumerate(faults) if i is not None]
    if empty:
        endpoint = [(i, k) for i, k in empty if k < 2]
        i, k = min(endpoint) if endpoint else empty[0]
        raise rec.error(i, "empty node id", node=k == 2)
    long = [(i, k) for k, (_, i) in enumerate(faults) if i is not None]
    if long:
        i, k = min(long)
        raise rec.error(i, f"node id longer than {MAX_ID_BYTES} bytes "
                           f"({len(columns[k][i].as_py().encode())} bytes): is this the right column or file?",
                        node=k == 2)
    return columns[0], columns[1], (columns[2] if extra is not None else None)


def _chunks(values: pa.Array | pa.ChunkedArray) -> list[pa.Array]:
    return list(values.chunks) if isinstance(values, pa.ChunkedArray) else [values]


def _string_array_to_numpy(values: pa.Array) -> np.ndarray:
    """A pyarrow string array as a numpy ``str`` array (same values, width of the longest).

    Straight from Arrow's offset and UTF-8 data buffers through the chunked node-id decoder
    (:func:`workspace.domain.decode_node_ids`): no Python ``str`` per id, for any id length.
    """
    from workspace.domain import decode_node_ids

    n = len(values)
    if n == 0:
        return np.array([], dtype="<U1")
    if values.type not in (pa.string(), pa.large_string()):
        values = values.cast(pa.string())
    return decode_node_ids(*_string_buffers(values))


def _dictionary_encode(parts: list[pa.Array]) -> tuple[pa.Array, np.ndarray]:
    """One pass of Arrow's hash kernel over ``parts``: (distinct ids in order of first
    appearance, int32 codes of all parts, concatenated, into them)."""
    if not parts:
        return pa.array([], pa.string()), np.zeros(0, dtype=np.int32)
    encoded = pc.dictionary_encode(pa.chunked_array(parts, type=pa.string()))
    chunks = encoded.chunks
    dictionary = chunks[-1].dictionary if chunks else pa.array([], pa.string())
    # The kernel shares one hash table across chunks, so every chunk's dictionary is a
    # prefix of the last one; if that ever changes, unify explicitly.
    if any(c.dictionary is not dictionary and not c.dictionary.equals(
            dictionary.slice(0, len(c.dictionary))) for c in chunks):
        chunks = pa.table({"id": encoded}).unify_dictionaries().column("id").chunks
        dictionary = chunks[0].dictionary
    codes = [c.indices.to_numpy(zero_copy_only=False) for c in chunks]
    return dictionary, (np.concatenate(codes) if len(codes) != 1 else codes[0])


#: ids of at most this many 8-byte words are encoded as integer keys (:func:`_encode_by_words`);
#: longer ones go through Arrow's string hash kernel
_MAX_KEY_WORDS = 8
#: ``_KEEP_BYTES[r]`` keeps the first ``r`` bytes of a little-endian 8-byte word
_KEEP_BYTES = np.array([(1 << (8 * r)) - 1 for r in range(9)], dtype=np.uint64)
#: the multiplier of :func:`_fold_key`: 2**64 over the golden ratio, rounded to odd
_MIX = np.uint64(0x9E3779B97F4A7C15)


def _string_buffers(values: pa.Array) -> tuple[np.ndarray, np.ndarray]:
    """(int64 offsets of length n + 1, uint8 data) of a string or large_string array."""
    n = len(values)
    offset_type = np.int64 if values.type == pa.large_string() else np.int32
    buffers = values.buffers()
    offsets = np.frombuffer(buffers[1], dtype=offset_type, count=n + 1,
                            offset=values.offset * np.dtype(offset_type).itemsize).astype(np.int64)
    data = (np.frombuffer(buffers[2], dtype=np.uint8)
            if buffers[2] is not None else np.zeros(0, dtype=np.uint8))
    return offsets, data


class _IdWords:
    """The ids of one string array as little-endian 64-bit words, made when asked for.

    :meth:`words` ``(W)`` gives an array of shape ``(n, W)``: byte ``j`` of ``out[i, k]``
    (value ``out[i, k] >> 8 j & 255``) is byte ``8 k + j`` of id ``i``
    (``data[offsets[i]:offsets[i + 1]]``), or 0 past its end. Nothing per id is kept between
    calls (the offsets are read from Arrow's buffer again), so only one part's words are
    held at a time.
    """

    def __init__(self, values: pa.Array) -> None:
        self.values = values
        self.size = len(values)
        offsets, data = _string_buffers(values)
        self.longest = int(np.max(np.diff(offsets))) if self.size else 0
        used = data[int(offsets[0]):int(offsets[-1])]
        self.has_nul = bool(used.size) and not bool(used.all())

    def words(self, n_words: int, rows: np.ndarray | None = None) -> np.ndarray:
        """The words of every id, or (``rows``: increasing positions) of those ids only."""
        offsets, data = _string_buffers(self.values)
        if rows is None:
            start = offsets[:-1]
            length = np.diff(offsets)
        else:
            start = offsets[rows]
            length = offsets[rows + 1] - start
        out = np.empty((start.size, n_words), dtype=np.uint64)
        # every 8-byte window of the data: window p holds bytes p .. p + 7 (none if fewer than 8)
        inner = max(data.size - 7, 0)
        windows = np.ndarray(shape=(inner,), dtype="<u8", buffer=data, strides=(1,))
        # windows from the last 7 bytes on, read from a zero-padded copy of them
        end = np.zeros(data.size - inner + 8 * n_words + 8, dtype=np.uint8)
        end[:data.size - inner] = data[inner:]
        end_windows = np.ndarray(shape=(end.size - 7,), dtype="<u8", buffer=end, strides=(1,))
        shortest = int(length.min()) if length.size else 0
        uniform = rows is None and length.size > 0 and shortest == int(length.max())
        for k in range(n_words):
            if uniform:
                self._uniform_word(out[:, k], windows, end_windows, start, shortest, 8 * k)
                continue
            at = start + 8 * k  # non-decreasing
            tail = int(np.searchsorted(at, inner, side="left"))  # at[tail:] >= inner
            word = out[:, k]
            if shortest >= 8 * (k + 1):  # word k lies inside every id: nothing to mask
                # (fancy indexing: np.take would first copy the overlapping windows' view)
                word[:tail] = windows[at[:tail]]
                if tail < at.size:
                    word[tail:] = end_windows[at[tail:] - inner]
                continue
            keep = _KEEP_BYTES[np.clip(length - 8 * k, 0, 8)]
            np.bitwise_and(windows[at[:tail]], keep[:tail], out=word[:tail])
            if tail < at.size:
                np.bitwise_and(end_windows[at[tail:] - inner], keep[tail:], out=word[tail:])
        return out

    @staticmethod
    def _uniform_word(word: np.ndarray, windows: np.ndarray, end_windows: np.ndarray,
                      start: np.ndarray, length: int, byte: int) -> None:
        """Word ``byte // 8`` of ids that all have ``length`` bytes: they lie every ``length``
        bytes, so the windows are read as a strided view (``windows[start[0] + byte::length]``), the
        same values as the indexed read of the general case without its gather (at 1M nodes,
        15M records of 40-byte ids, the key and check passes took 0.42 / 0.38 s instead of
        0.59 / 0.59 s; load 0.85 on 2 cores)."""
        inner = windows.size
        first = int(start[0]) + byte
        # the ids whose word starts at or past ``inner`` (no whole window left) are read from the
        # padded end; no array of every id's word position is made
        tail = min(start.size, max(0, -(-(inner - first) // length)))
        keep = _KEEP_BYTES[min(max(length - byte, 0), 8)]
        view = windows[first:first + length * tail:length]
        if length - byte >= 8:
            word[:tail] = view
        else:
            np.bitwise_and(view, keep, out=word[:tail])
        if tail < start.size:
            np.bitwise_and(end_windows[start[tail:] + (byte - inner)], keep, out=word[tail:])


def _fold_key(key: np.ndarray | None, word: np.ndarray) -> np.ndarray:
    """One more word into the uint64 keys: ``h_0 = w_0 K``, ``h_k = (h_{k-1} xor w_k) K`` with
    ``K = 0x9E3779B97F4A7C15`` (2**64 over the golden ratio, rounded to odd; Knuth 1998,
    section 6.4), arithmetic modulo 2**64; ``key`` is updated in place (None: the first word).
    Not injective: callers check for collisions."""
    if key is None:
        return word * _MIX
    key ^= word
    key *= _MIX
    return key


#: From this many id records the integer-key encoding runs its per-part steps (words, keys,
#: checks) in two threads, and the check beside the sort: numpy's and Arrow's kernels run
#: without the interpreter lock. Below it a thread hand-off is a visible share of the work.
PARALLEL_ENCODE_MIN_RECORDS = 1 << 18


def _thread_pool(records: int):
    """A two-thread pool for the integer-key encoding of ``records`` records, or None (serial)."""
    if records < PARALLEL_ENCODE_MIN_RECORDS or available_cpus() < 2:
        return None
    from concurrent.futures import ThreadPoolExecutor

    return ThreadPoolExecutor(2, thread_name_prefix="cutbook-encode")


def _each(pool, function, items) -> list:
    """``[function(x) for x in items]``, on ``pool``'s threads when there is one (in order)."""
    if pool is None:
        return [function(x) for x in items]
    return list(pool.map(function, items))


def _dense_ranks(values: np.ndarray) -> tuple[np.ndarray, int]:
    """(rank of each value among the distinct values, as int64; their number)."""
    distinct, rank = np.unique(values, return_inverse=True)
    return rank.astype(np.int64, copy=False).reshape(-1), int(distinct.size)


#: Distinct ids up to which :func:`_byte_order` ranks two-word ids instead of ``lexsort``
#: (at 3M nodes the ranks' temporaries beside the collision check raised the import's peak from
#: 0.53 to 0.62 GB per 1M nodes).
DENSE_RANK_ORDER_MAX_IDS = 1 << 19


def _byte_order(words: np.ndarray) -> np.ndarray:
    """The order that sorts distinct ids given as little-endian words (:class:`_IdWords`) by
    their bytes: read big-endian, the words compare as the bytes do, first word first.

    Up to two words (ids of at most 16 bytes) the words are replaced by their dense ranks
    ``r_k`` and the ids by the single integer ``r_0 d_1 + r_1`` (``d_1`` distinct second
    words), whose order is the lexicographic one; its values are distinct, so numpy's
    unstable vectorised sort gives the order. Measured at 400k-1M ids this took 0.02-0.06 s
    against 0.05-0.11 s for ``numpy.lexsort`` (stable merge sorts of the words); from three
    words on the two took about the same time, and ``lexsort`` is kept. ``numpy.unique``'s
    copies make the ranks the heavier of the two in memory, so beyond
    :data:`DENSE_RANK_ORDER_MAX_IDS` distinct ids (where the import's peak is set while the ids
    are encoded) ``lexsort`` is used as well.
    """
    swapped = words.byteswap()
    if swapped.shape[1] == 1:
        return np.argsort(swapped[:, 0])  # distinct values: any sort gives the order
    if swapped.shape[1] > 2 or swapped.shape[0] > DENSE_RANK_ORDER_MAX_IDS:
        return np.lexsort(swapped.T[::-1])
    major, _ = _dense_ranks(swapped[:, 0])
    minor, n_minor = _dense_ranks(swapped[:, 1])
    major *= n_minor
    major += minor  # < n ** 2 <= 2 ** 62 (n < 2 ** 31)
    return np.argsort(major)


#: records per step of :func:`group_keys`: bounds its temporaries (about 30 bytes a record of a step)
GROUP_STEP_RECORDS = 1 << 20
#: records per sort of :func:`group_keys`' distinct keys (a copy of 8 bytes a record, sorted in place),
#: at least
GROUP_SORT_RECORDS = 1 << 22
#: later steps take at least this many new values per distinct value found so far: each step sorts
#: the distinct values again with its own, so steps of one fixed size would cost (records / step)
#: x distinct, more than linear once the distinct values outnumber a step (10M nodes, 150M keys:
#: 5.9 s of the 9.9 s, against 0.17 of 0.67 s at 1M nodes)
GROUP_SORT_GROWTH = 2
#: probes of the following distinct keys before a key is found by bisection instead
_GROUP_PROBES = 4


def group_keys(key: np.ndarray, pool=None) -> tuple[np.ndarray, np.ndarray]:
    """Equal uint64 keys grouped: ``(codes, first)``, the int32 code of every key, numbering the
    distinct keys in order of first appearance, and ``first[c]``, the position of code ``c``'s
    first appearance (increasing): the indices of Arrow's ``dictionary_encode`` and the first
    positions of its dictionary entries, without a hash table.

    With ``h = key K mod 2**64`` (``K`` of :func:`_fold_key`, odd, so ``h`` is a bijection of the
    key), the distinct ``h`` are sorted (``d``: steps of :data:`GROUP_SORT_RECORDS` keys, or
    :data:`GROUP_SORT_GROWTH` times as many as ``d`` holds, sorted into it in turn; with two
    threads and several steps, each takes one half of the range of ``h``) and bucketed by their
    top ``b`` bits (``2**b >= n``, the number of distinct keys;
    multiplicative hashing spreads any set of keys over the buckets, Knuth 1998, section 6.4).
    A table of where each bucket begins in ``d`` then finds every key's position in ``d``: at its
    bucket's start or among the next :data:`_GROUP_PROBES` entries; the rare key further on is
    found by bisection (``numpy.searchsorted``), so the work stays linear whatever the keys.
    The positions are then renumbered by first appearance. Sorting and looking up stream
    through memory where a hash table of n entries misses the cache at almost every key: at 4M
    keys with 400k distinct this took 0.05-0.07 s against 0.10-0.33 s for ``dictionary_encode``
    (2 cores). The steps run on ``pool``'s two threads when given (numpy's sorts and gathers
    release the interpreter lock); the result does not depend on it.

    References
    ----------
    D. E. Knuth, The Art of Computer Programming vol. 3 (1998), section 6.4 (multiplicative
    hashing); Apache Arrow compute function ``dictionary_encode`` (the same output).
    """
    m = key.size
    if m == 0:
        return np.zeros(0, dtype=np.int32), np.zeros(0, dtype=np.int64)
    if m >= 2 ** 31:
        raise ValueError("group_keys numbers at most 2**31 - 1 keys")

    def spans(step: int) -> list[tuple[int, int]]:
        return [(s, min(s + step, m)) for s in range(0, m, step)]

    def distinct_in(top: int | None) -> np.ndarray:
        """The sorted distinct h with top bit ``top`` (None: all), a sorted step at a time merged in."""
        d = np.zeros(0, dtype=np.uint64)
        s = 0
        while s < m:
            # about half of a step's keys have the top bit asked for
            grow = GROUP_SORT_GROWTH * d.size * (1 if top is None else 2)
            e = min(m, s + max(GROUP_SORT_RECORDS, grow))
            h = key[s:e] * _MIX
            if top is not None:
                h = h[(h >> np.uint64(63)) == np.uint64(top)]
            d = _merge_distinct(d, h)
            s = e
        return d

    # with several steps, two threads take the two halves of the range of h (disjoint, so joined
    # in order); one step is sorted in one thread (halving it only added the selection)
    tops = [None] if pool is None or m <= GROUP_SORT_RECORDS else [0, 1]
    d = np.concatenate(_each(pool, distinct_in, tops))
    n = d.size
    bits = max(1, (n - 1).bit_length())
    shift = np.uint64(64 - bits)
    counts = np.bincount(d >> shift, minlength=1 << bits)
    start = np.zeros(1 << bits, dtype=np.int32)
    np.cumsum(counts[:-1], out=start[1:])
    del counts
    codes = np.empty(m, dtype=np.int32)
    steps = spans(GROUP_STEP_RECORDS)
    halves = [steps] if pool is None else [steps[:len(steps) // 2], steps[len(steps) // 2:]]
    halves = [h for h in halves if h]  # (one step: one half)

    def find(own: list[tuple[int, int]]) -> np.ndarray:
        """Each key's position in ``d`` (into ``codes``); returns, per position, the first key of
        ``own`` at it (``m`` where none)."""
        first = np.full(n, m, dtype=np.int64)
        for s, e in own[::-1]:  # the last step first: the earlier ones overwrite later positions
            h = key[s:e] * _MIX  # made again per step rather than kept (8 bytes a record)
            pos = start[h >> shift]
            miss = np.flatnonzero(d[pos] != h)
            for _ in range(_GROUP_PROBES):
                if miss.size == 0:
                    break
                at = pos[miss] + 1
                np.minimum(at, n - 1, out=at)
                pos[miss] = at
                miss = miss[d[at] != h[miss]]
            if miss.size:
                pos[miss] = np.searchsorted(d, h[miss])
            codes[s:e] = pos
            first[pos[::-1]] = np.arange(e - 1, s - 1, -1, dtype=np.int64)
        return first

    firsts = _each(pool, find, halves)
    first = firsts[0] if len(firsts) == 1 else np.minimum(firsts[0], firsts[1])
    del firsts
    # the positions in d renumbered by first appearance: sorted (first, position) pairs, packed
    packed = first.astype(np.uint64)
    packed <<= np.uint64(32)
    packed |= np.arange(n, dtype=np.uint64)
    packed.sort()
    renumber = np.empty(n, dtype=np.int32)
    renumber[(packed & np.uint64(0xFFFFFFFF)).astype(np.int64)] = np.arange(n, dtype=np.int32)
    first = (packed >> np.uint64(32)).astype(np.int64)
    del packed

    def relabel(own: list[tuple[int, int]]) -> None:
        for s, e in own:
            codes[s:e] = renumber[codes[s:e]]

    _each(pool, relabel, halves)
    return codes, first


def _merge_distinct(d: np.ndarray, more: np.ndarray) -> np.ndarray:
    """The sorted distinct values of ``d`` (sorted, distinct) and ``more`` (any)."""
    both = np.concatenate((d, more))
    if both.size < 2:
        return both
    both.sort()  # numpy's vectorised sort: an in-place sort is cheaper than a merge done by hand
    keep = np.empty(both.size, dtype=bool)
    keep[0] = True
    np.not_equal(both[1:], both[:-1], out=keep[1:])
    return both[keep]


def _encode_by_words(parts: list[pa.Array]) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """Distinct ids of short-id columns through integer keys, or None when they do not apply.

    An id of at most ``8 W`` UTF-8 bytes (``W <= _MAX_KEY_WORDS``) is read as ``W``
    64-bit words, zero-padded (:class:`_IdWords`). Without NUL bytes in the data these
    words determine the id, and comparing them in turn, each read as a big-endian number,
    compares the ids byte by byte: so sorting distinct ids by their byte-swapped words
    (:func:`_byte_order`) gives UTF-8 byte order, the order Arrow's ``sort_indices`` gives
    on the strings. Records are grouped (:func:`group_keys`) by one uint64 key: the word
    itself for ``W = 1``, else a multiply-xorshift fold of the words (:func:`_fold_key`),
    checked afterwards: every record's words must equal those of its group's representative,
    else (a key collision) None is returned and the caller hashes the strings. The last word
    needs no comparison: the fold's last step is a bijection of it for fixed earlier words, so
    equal keys and equal earlier words imply it. The words are made one part at a time (once
    for the key, once for the check) and, for the representatives, only theirs, so the memory
    held is a few arrays of one value per record whatever ``W``. From
    :data:`PARALLEL_ENCODE_MIN_RECORDS` records the parts are handled in two threads, and the
    check runs beside the sort; the results do not depend on it.

    Returns ``(codes, order, words)``: the int32 code of every record (all parts
    concatenated; codes number the distinct ids in order of first appearance), ``order`` (the
    code of each sorted position) and the distinct ids' words (n, W) in code order; or
    None (no records, an id longer than ``8 * _MAX_KEY_WORDS`` bytes, a NUL byte, or a key
    collision).

    References
    ----------
    F. Yergeau, RFC 3629, "UTF-8" (2003), section 1 (byte order of UTF-8 is code point
    order); D. E. Knuth, The Art of Computer Programming vol. 3 (1998), section 6.4
    (multiplicative hashing); Apache Arrow compute function ``dictionary_encode``.
    """
    m = sum(len(p) for p in parts)
    if m == 0 or m >= 2 ** 31:  # (int32 codes: beyond them the string path)
        return None
    readers = [_IdWords(p) for p in parts]
    longest = max(r.longest for r in readers)
    n_words = max(1, -(-longest // 8))
    if n_words > _MAX_KEY_WORDS or any(r.has_nul for r in readers):
        return None  # long ids take the string path; a NUL byte is reported there
    bounds = np.cumsum([0] + [r.size for r in readers])
    spans = list(zip(readers, bounds[:-1].tolist()))
    pool = _thread_pool(m)
    try:
        # one key per record, folded part by part (the words of one part at a time)
        key = np.empty(m, dtype=np.uint64)

        def fold(span, key=key) -> None:
            r, at = span
            words = r.words(n_words)
            if n_words == 1:
                key[at:at + r.size] = words[:, 0]
                return
            folded = None
            for k in range(n_words):
                folded = _fold_key(folded, words[:, k])
            key[at:at + r.size] = folded

        _each(pool, fold, spans)
        del fold  # (its default argument holds the keys, freed below once the codes are made)
        # codes numbering first appearances; first[c]: the first record of code c, increasing in c
        codes, first = group_keys(key, pool)
        n = first.size
        if n_words == 1:
            distinct = key[first][:, None]  # the key is the word: no collision possible
            del key
            return codes, _byte_order(distinct), distinct
        del key
        # the words of the distinct ids, (n, W): the representatives' own, part by part
        distinct = np.empty((n, n_words), dtype=np.uint64)

        def representatives(span) -> None:
            r, at = span
            lo, hi = np.searchsorted(first, [at, at + r.size])
            if hi > lo:
                distinct[lo:hi] = r.words(n_words, first[lo:hi] - at)

        _each(pool, representatives, spans)

        # every record against its group's representative, on all words but the last: for a
        # fixed h_{W-2} the last fold step w -> (h_{W-2} xor w) K is a bijection (xor with a
        # constant, then a product with an odd number modulo 2**64), so records with equal keys
        # and equal words 0..W-2 have equal last words too
        def same_words(span) -> bool:
            r, at = span
            # (np.take along axis 0 gathers whole rows, several times faster than d[index])
            return np.array_equal(np.take(distinct, codes[at:at + r.size], axis=0)[:, :n_words - 1],
                                  r.words(n_words - 1))

        if pool is None:
            if not all(same_words(span) for span in spans):
                return None  # two ids share a key
            return codes, _byte_order(distinct), distinct
        checks = [pool.submit(same_words, span) for span in spans]
        order = _byte_order(distinct)  # beside the checks
        if not all(check.result() for check in checks):
            return None  # two ids share a key
        return codes, order, distinct
    finally:
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)


#: sorted ids made into bytes per step of :func:`packed_from_words` (bounds its temporaries)
PACK_ROWS = 1 << 20


def packed_from_words(words: np.ndarray, order: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The ids ``words[order]`` packed as ``domain.encode_node_ids`` packs them: (int64 offsets,
    UTF-8 bytes).

    ``words`` holds ids as :class:`_IdWords` makes them (byte ``j`` of word ``k`` is byte
    ``8 k + j`` of the id, zeros past its end) for ids without NUL bytes, so each id is its
    words' bytes before the first zero and its length is the count of its non-zero bytes. Made
    :data:`PACK_ROWS` ids at a time (``numpy.take`` along axis 0 gathers whole rows).
    """
    n = int(order.size)
    width = 8 * words.shape[1]
    offsets = np.zeros(n + 1, dtype=np.int64)
    pieces = []
    for s in range(0, n, PACK_ROWS):
        e = min(s + PACK_ROWS, n)
        rows = np.take(words, order[s:e], axis=0).astype("<u8", copy=False).view(np.uint8).reshape(-1, width)
        offsets[s + 1:e + 1] = np.count_nonzero(rows, axis=1)
        pieces.append(rows[rows != 0])
        del rows
    np.cumsum(offsets, out=offsets)
    data = pieces[0] if len(pieces) == 1 else np.concatenate(pieces) if pieces else np.zeros(0, np.uint8)
    return offsets, data


def encode_ids(source: pa.Array | pa.ChunkedArray, target: pa.Array | pa.ChunkedArray,
               extra: pa.Array | None, *, packed: bool = False) -> tuple:
    """Sorted unique ids and indices of ``source`` and ``target`` into them (int32 while the
    ids number fewer than 2**31, else int64). With ``packed``: ``(None, u, v, (offsets,
    data))``, the sorted ids packed as ``domain.encode_node_ids`` packs them (int64 offsets,
    UTF-8 bytes: from the ids' key words, :func:`packed_from_words`, or from the Arrow bytes
    of the distinct ids) instead of the str array.

    Each distinct id of the source, target and declared-node columns gets a code (the
    distinct ids in order of first appearance): for ids of at most 64 UTF-8 bytes
    through integer keys made of their bytes (:func:`_encode_by_words`, which also sorts
    them), otherwise by Arrow's string hash kernel (``dictionary_encode``), whose distinct
    ids are then sorted by Arrow's ``sort_indices``. Both sort by UTF-8 bytes - for valid
    UTF-8 the same as code point order, the order of numpy ``str`` arrays - and the codes
    are mapped through the inverse permutation ``rank[order[i]] = i``. So ``node_ids`` is
    sorted by code point and ``node_ids[u[k]]`` is the source id of record ``k``.

    References
    ----------
    F. Yergeau, RFC 3629, "UTF-8" (2003), section 1: byte-wise sorting of
    UTF-8 strings gives code point order; Apache Arrow compute functions
    ``dictionary_encode``, ``sort_indices`` (Arrow 15, 2024).
    """
    parts = _chunks(source) + _chunks(target) + ([extra] if extra is not None else [])
    parts = [p.cast(pa.string()) if p.type != pa.string() else p for p in parts]
    m_source, m_target = len(source), len(target)
    by_words = _encode_by_words(parts)
    packed_ids = None
    if by_words is not None:
        codes, order, words = by_words
        # the sorted distinct ids straight from their words (no NUL inside an id: each id is its
        # words' bytes before the first zero), not gathered from the columns' strings
        packed_ids = packed_from_words(words, order)
        del words, by_words
    else:
        dictionary, codes = _dictionary_encode(parts)
        if len(dictionary) and pc.any(pc.match_substring(dictionary, "\x00")).as_py():
            raise InputError("a node id contains a NUL character, which is not supported")
        order = pc.sort_indices(dictionary).to_numpy()
        distinct = dictionary.take(pa.array(order))
    # int32 indices whenever the ids fit (always, short of 2**31 distinct ids): half the memory
    # and bandwidth of int64 in every step after this; pair keys are formed in int64
    index_type = np.int32 if order.size < 2 ** 31 else np.int64
    rank = np.empty(order.size, dtype=index_type)
    rank[order] = np.arange(order.size, dtype=index_type)
    all_codes = rank[codes]
    del codes
    u, v = all_codes[:m_source], all_codes[m_source:m_source + m_target]
    if packed_ids is not None:
        if not packed:
            return decode_node_ids(*packed_ids), u, v
        return None, u, v, packed_ids
    distinct = _single(distinct)
    if not packed:
        return _string_array_to_numpy(distinct), u, v
    # the packed form (domain.encode_node_ids) straight from the UTF-8 bytes the ids came from
    # (valid UTF-8 without NUL: encode_node_ids of their decoding gives these bytes back); the
    # str array is left to the caller (decode_node_ids of these), to be made once the id
    # columns are released
    out = (None, u, v)
    if len(distinct) == 0:
        return out + ((np.zeros(1, dtype=np.int64), np.zeros(0, dtype=np.uint8)),)
    if distinct.type != pa.string():
        distinct = distinct.cast(pa.string())
    offsets, data = _string_buffers(distinct)
    base = int(offsets[0])
    return out + ((offsets - base, data[base:int(offsets[-1])]),)


def _group_starts(sorted_keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Boolean mask of group starts and their positions for a sorted key array."""
    start = np.empty(sorted_keys.size, dtype=bool)
    if sorted_keys.size:
        start[0] = True
        np.not_equal(sorted_keys[1:], sorted_keys[:-1], out=start[1:])
    return start, np.flatnonzero(start)


def _stable_order(key: np.ndarray, key_bound: int) -> np.ndarray:
    """Stable argsort of non-negative int64 ``key < key_bound``.

    When ``key_bound * m < 2**63`` the position is packed below the key
    (``key * m + position``) and the packed values are sorted with numpy's
    vectorised sort, several times faster than ``argsort(kind="stable")``;
    ties keep file order because the position breaks them.

    When it does not (pair keys ``lo * n + hi`` from about 2.5M nodes at 7.5 edges per node),
    the key is split in two digits ``key = q * b + r`` with ``b = ceil(sqrt(key_bound))`` and
    sorted least significant digit first, each pass packed the same way (``r * m + i``, then
    ``q[order] * m + i``): a stable sort by ``r`` followed by a stable sort by ``q`` is a
    stable sort by ``key`` (LSD radix sort; Knuth 1998, section 5.2.5). This keeps the fast
    vectorised sort where ``argsort(kind="stable")`` (a merge sort) cost several seconds at
    3M nodes. The order is the same: a stable order of given keys is unique.
    """
    m = key.size
    limit = (2 ** 63 - 1) // max(m, 1)
    if key_bound > 0 and key_bound <= limit:
        packed = key * m
        packed += np.arange(m, dtype=np.int64)
        packed.sort()
        return packed % m
    base = math.isqrt(max(key_bound - 1, 0)) + 1  # base ** 2 >= key_bound
    if base <= limit:
        def pack_positions(values: np.ndarray) -> None:  # values * m + i, in place
            values *= m
            for at in range(0, m, _PAIR_CHUNK):
                values[at:at + _PAIR_CHUNK] += np.arange(at, min(m, at + _PAIR_CHUNK), dtype=np.int64)

        packed = np.remainder(key, base)
        pack_positions(packed)
        packed.sort()
        order = packed % m  # stable by the low digit
        np.take(key, order, out=packed)
        packed //= base
        pack_positions(packed)
        packed.sort()
        packed %= m
        return order[packed]  # stable by the high digit, ties in the low digit's order
    return np.argsort(key, kind="stable")


def merge_duplicates(key: np.ndarray, weight: np.ndarray, record: np.ndarray, rule: str,
                     on_duplicate, key_bound: int = 0, *, keys_only: bool = False
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Merge records with equal ``key`` by ``rule``.

    Returns ``(unique sorted keys, merged weights, record index kept per key
    (None when ``record`` is None), number of records merged away)``;
    ``record`` (original record numbers) may be None unless ``rule`` is
    ``"error"``. ``sum`` adds the weights of a group in
    ascending weight order so the result does not depend on line order;
    ``first`` keeps the earliest record in file order; ``error`` calls
    ``on_duplicate(repeat_record, first_record, key)`` for the earliest repeat.

    ``keys_only``: the caller needs neither the records kept (None is returned for them) nor
    ``key`` afterwards. When every weight is the same (an unweighted file) the order of the
    records then does not matter: ``key`` is sorted in place, with no stable permutation to build
    and apply (see :func:`_uniform_merge`); the results are the same values.
    """
    m = key.size
    if keys_only and m > 1:
        merged_result = _uniform_merge(key, weight, rule)
        if merged_result is not None:
            return merged_result
        record = None if rule != "error" else record
    if m > 1 and not np.all(key[1:] >= key[:-1]):
        order = _stable_order(key, key_bound)
        key = key[order]
        weight = weight[order]
        if record is not None:
            record = record[order]
        del order
    start, starts = _group_starts(key)
    merged = m - starts.size
    if merged == 0:
        return key, weight, record, 0
    if rule == "error":
        repeats = np.flatnonzero(~start)
        p = repeats[np.argmin(record[repeats])]
        first = starts[np.searchsorted(starts, p, side="right") - 1]
        raise on_duplicate(int(record[p]), int(record[first]), int(key[p]))
    if rule == "sum":
        sizes = np.diff(np.append(starts, m))
        in_group = np.flatnonzero(np.repeat(sizes > 1, sizes))
        group_of = np.repeat(np.arange(starts.size), sizes)[in_group]
        weight = weight.copy()
        weight[in_group] = weight[in_group][np.lexsort((weight[in_group], group_of))]
        merged_weight = np.add.reduceat(weight, starts)
    elif rule == "max":
        merged_weight = np.maximum.reduceat(weight, starts)
    elif rule == "first":
        merged_weight = weight[starts]
    else:  # pragma: no cover - policy validated before
        raise ValueError(rule)
    return key[starts], merged_weight, None if record is None else record[starts], merged


def _uniform_merge(key: np.ndarray, weight: np.ndarray, rule: str):
    """:func:`merge_duplicates` for records of one common weight, sorting ``key`` in place (a copy
    under ``"error"``); None, with ``key`` as it was, when the weights differ or when ``rule`` is
    ``"error"`` and a key repeats (the message names the records, which this path does not follow).

    With every weight equal to ``w`` the merged weights do not depend on which record went where:
    ``sum`` is ``np.add.reduceat`` over ``w`` repeated, the additions :func:`merge_duplicates` makes
    on its weights in group order (the same bits), ``max`` and ``first`` are ``w``. One in-place
    sort of the keys then replaces the stable order by key (:func:`_stable_order`: from about 2.5M
    nodes at 7.5 edges per node two sorts of packed pairs and two gathers, since key and position
    no longer fit in 63 bits together) and the gathers of weights and records through it: 75M
    records of 10M nodes, 18.8 s against 5.7 s for one sort of the keys (2 cores, load 1).
    """
    w = weight[0]
    if not np.all(weight == w):
        return None
    m = key.size
    if not np.all(key[1:] >= key[:-1]):
        if rule == "error":
            key = np.sort(key)    # a repeat's message needs the file order: the caller's keys kept
        else:
            key.sort()
    start, starts = _group_starts(key)
    merged = m - starts.size
    if merged == 0:
        return key, weight, None, 0
    if rule == "error":
        return None
    if rule == "sum":
        merged_weight = np.add.reduceat(np.full(m, w, dtype=weight.dtype), starts)
    elif rule in ("max", "first"):
        merged_weight = np.full(starts.size, w, dtype=weight.dtype)
    else:  # pragma: no cover - policy validated before
        raise ValueError(rule)
    return key[starts], merged_weight, None, merged


#: formats whose rows carry no direction of their own: under ``directed="keep"`` a row is an arc
DELIMITED_FORMATS = ("csv", "tsv", "edgelist")


def count_asymmetric(key: np.ndarray, weight: np.ndarray, n: int) -> int:
    """Unordered pairs ``{a, b}`` (a != b) whose two arcs differ: one missing or other weight.

    ``key`` holds unique sorted arc keys ``a * n + b``.
    """
    a, b = key // n, key % n
    proper = a != b
    if not proper.any():
        return 0
    a, b, w = a[proper], b[proper], weight[proper]
    reverse = b * n + a
    pos = np.searchsorted(key, reverse)
    pos_clipped = np.minimum(pos, key.size - 1)
    found = key[pos_clipped] == reverse
    same = np.zeros(a.size, dtype=bool)
    same[found] = weight[pos_clipped[found]] == w[found]
    # a pair with both arcs of different weight is seen twice, a single arc once
    both_differ = int(np.count_nonzero(found & ~same)) // 2
    return int(np.count_nonzero(~found)) + both_differ


def _symmetrise(key: np.ndarray, weight: np.ndarray, record: np.ndarray, n: int, rule: str,
                node_ids: np.ndarray, rec: EdgeRecords):
    """Directed arcs (unique ``a * n + b`` keys) -> undirected pairs by ``rule``.

    With ``W`` the directed weight matrix (missing arc = 0) the undirected
    weight is ``sum: W_ab + W_ba``, ``max: max(W_ab, W_ba)``, ``min:
    min(W_ab, W_ba)``, ``mean: (W_ab + W_ba) / 2`` - entrywise ``A + A^T``,
    ``max(A, A^T)``, ``min(A, A^T)``, ``(A + A^T) / 2``. A loop arc is its own
    reverse (so ``sum`` doubles it, as ``A + A^T`` does on the diagonal).
    ``error`` accepts only symmetric input and keeps the common weight.
    Returns ``(pair keys, weights, records, asymmetric pair count)``.
    """
    a = key // n
    b = key % n
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    forward = a <= b
    pair = lo * n + hi
    order = _stable_order(pair, n * n)
    pair = pair[order]
    forward = forward[order]
    weight = weight[order]
    record = record[order]
    start, starts = _group_starts(pair)
    group = np.cumsum(start) - 1
    w_forward = np.zeros(starts.size)
    w_backward = np.zeros(starts.size)
    w_forward[group[forward]] = weight[forward]
    w_backward[group[~forward]] = weight[~forward]
    loop = (lo[order] == hi[order])[starts]
    w_backward[loop] = w_forward[loop]
    asymmetric = w_forward != w_backward
    n_asymmetric = int(np.count_nonzero(asymmetric))
    if n_asymmetric and rule == "error":
        g = int(np.argmax(asymmetric))
        p = starts[g]
        u_id, v_id = str(node_ids[pair[p] // n]), str(node_ids[pair[p] % n])
        raise rec.error(
            int(record[p]),
            f"directed input has {n_asymmetric} asymmetric pair(s) (an arc whose reverse is "
            f"missing or weighs differently), e.g. {u_id!r}->{v_id!r} weighs "
            f"{w_forward[g]:g} but {v_id!r}->{u_id!r} weighs {w_backward[g]:g}; choose how to "
            "symmetrise with --directed sum|max|min|mean")
    if rule == "sum":
        combined = w_forward + w_backward
    elif rule == "min":
        combined = np.minimum(w_forward, w_backward)
    elif rule == "mean":
        combined = (w_forward + w_backward) / 2.0
    else:  # "max", and "error" on symmetric input (both directions equal)
        combined = np.maximum(w_forward, w_backward)
    return pair[starts], combined, record[starts], n_asymmetric


def canonicalise(rec: EdgeRecords, policy: ImportPolicy,
                 progress: Progress = None, *, on_graph=None,
                 consume: bool = False) -> tuple[GraphData, ImportReport]:
    """Apply the import policy to edge records and build the canonical graph.

    With ids sorted by code point (index ``i`` = position in that order) an
    undirected record ``(a, b, w)`` becomes the key
    ``k = min(i_a, i_b) * n + max(i_a, i_b)``; records with equal keys are
    merged by the duplicates rule and the unique keys, sorted, give
    ``edge_u = k // n``, ``edge_v = k % n`` - the lexicographic order of
    ``(u, v)`` with ``u <= v``. Directed records use ``k = i_a * n + i_b``
    and are then symmetrised (see :func:`_symmetrise`).

    Steps, in this order: numeric ids (if asked) and empty-id check; ids
    sorted and endpoints turned into indices; zero-weight records dropped;
    self-loops dropped / kept / refused; duplicates merged per
    ``policy.duplicates`` (undirected input: ``{u, v}`` and ``{v, u}`` are
    the same pair; directed input: same-direction repeats); directed input
    symmetrised per ``policy.directed``, or (``"keep"``) kept as arcs: the
    key is ``i_a * n + i_b``, same-direction repeats merge, and the graph is
    directed (rows of a delimited file are arcs; an edge of a file that
    declares itself undirected becomes two arcs).

    Parameters
    ----------
    rec : EdgeRecords
        What a reader produced.
    policy : ImportPolicy
        Validated policy.
    progress : callable or None, default None
        Receives ``("canonicalise", step, 4)``.
    on_graph : callable or None, default None
        Called with the graph and its packed node ids (``encode_node_ids``'s int64 offsets
        and UTF-8 bytes, taken from the sorted distinct ids' Arrow buffers) before the
        report is built.
    consume : bool, default False
        The caller is done with ``rec``'s id columns: they are released
        (:meth:`EdgeRecords.release_columns`) once the ids are encoded.

    Returns
    -------
    graph : GraphData
        ``node_ids`` (n,), ``edge_u``/``edge_v`` (m,) int64, ``weight`` (m,) float64.
    report : ImportReport

    Raises
    ------
    InputError
        Empty or non-integer id, refused self-loop, refused duplicate,
        asymmetric directed input under ``directed="error"``, or no edge left.

    Notes
    -----
    Nodes named only by dropped records (zero weight, dropped self-loops)
    stay as isolated nodes: the file mentions them. ``sum`` adds each group
    in ascending weight order, so the float result does not depend on line
    order.

    References
    ----------
    C. R. Harris et al., "Array programming with NumPy", Nature 585 (2020);
    Apache Arrow compute functions ``dictionary_encode``/``sort_indices``
    (Arrow 15, 2024).
    """
    notes = list(rec.notes)
    path = rec.path
    source = rec.source
    target = rec.target
    extra = None if rec.extra_nodes is None else _single(rec.extra_nodes)
    m_read = len(source)

    source, target, extra = _check_ids(rec, source, target, extra, policy.numeric_ids)
    report_progress(progress, "canonicalise", 0, 4)
    try:
        node_ids, u, v, packed_ids = encode_ids(source, target, extra, packed=True)
    except InputError as err:
        raise InputError(err.message, path=path) from None
    del source, target, extra
    if consume:
        # the string columns are done with: free them before the merge and the report (peak
        # memory); the record count stays known
        rec.release_columns()
        # hand the freed pages back before numpy's big steps (Arrow's own allocators keep them
        # for their reuse; for the "system" pool this is glibc's malloc_trim, which returns the
        # free pages inside the heap as well): a lower peak resident size
        pa.default_memory_pool().release_unused()
    # the str array of the ids, decoded from their packed bytes now that the columns are gone
    node_ids = decode_node_ids(*packed_ids)
    n = int(node_ids.size)
    # unweighted records carry no weights until here: the ones are made after the id columns
    # are gone (peak memory)
    weight = (np.ones(m_read, dtype=np.float64) if rec.weight is None
              else np.asarray(rec.weight, dtype=np.float64))
    # original record numbers are carried along only where an error may need a line
    need_record = policy.duplicates == "error" or rec.directed
    record = np.arange(m_read, dtype=np.int64) if need_record else None

    zero = weight == 0
    zero_dropped = int(np.count_nonzero(zero))
    if zero_dropped:
        keep = ~zero
        u, v, weight = u[keep], v[keep], weight[keep]
        if record is not None:
            record = record[keep]
        notes.append(f"{zero_dropped} zero-weight record(s) dropped")

    loop = u == v
    loops_found = int(np.count_nonzero(loop))
    loops_kept = 0
    if loops_found:
        if policy.self_loops == "error":
            i = int(np.argmax(loop))
            original = int(np.flatnonzero(~zero)[i]) if zero_dropped else i
            raise rec.error(original,
                            f"self-loop on node {str(node_ids[u[i]])!r}; choose "
                            "--self-loops drop|keep")
        if policy.self_loops == "drop":
            keep = ~loop
            u, v, weight = u[keep], v[keep], weight[keep]
            if record is not None:
                record = record[keep]
            notes.append(f"{loops_found} self-loop record(s) dropped")
        else:
            loops_kept = loops_found
    report_progress(progress, "canonicalise", 1, 4)

    def on_duplicate(repeat: int, first: int, key: int) -> InputError:
        a, b = str(node_ids[key // n]), str(node_ids[key % n])
        first_line, first_label = rec.locate(first)
        where = f"line {first_line}" if first_line is not None else first_label
        arrow = "->" if rec.directed or policy.directed == "keep" else "-"
        return rec.error(repeat, f"duplicate edge {a!r} {arrow} {b!r} (first at "
                                 f"{where}); choose --duplicates sum|max|first")

    asymmetric = 0
    labels = None  # the report's components, when found beside the merge
    keep_direction = policy.directed == "keep"
    if keep_direction:
        if not rec.directed and rec.format not in DELIMITED_FORMATS:
            # a file that declares itself undirected: each edge is two arcs of its weight
            proper = u != v
            u, v = np.concatenate([u, v[proper]]), np.concatenate([v, u[proper]])
            weight = np.concatenate([weight, weight[proper]])
            if record is not None:
                record = np.concatenate([record, record[proper]])
            notes.append(f"direction kept: the file declares undirected edges; each of the "
                         f"{int(np.count_nonzero(proper))} edge(s) between two nodes read as two arcs")
        key = u.astype(np.int64) * n + v
        key, weight, record, merged = merge_duplicates(key, weight, record, policy.duplicates,
                                                       on_duplicate, n * n, keys_only=True)
        report_progress(progress, "canonicalise", 2, 4)
        asymmetric = count_asymmetric(key, weight, n)
        notes.append(f"direction kept: {key.size} arc(s), {asymmetric} asymmetric pair(s)")
        if loops_kept:
            loops_kept = int(np.count_nonzero(key // n == key % n))
    elif rec.directed:
        key = u.astype(np.int64) * n + v
        key, weight, record, merged = merge_duplicates(key, weight, record, policy.duplicates,
                                                       on_duplicate, n * n)
        report_progress(progress, "canonicalise", 2, 4)
        key, weight, record, asymmetric = _symmetrise(key, weight, record, n, policy.directed,
                                                      node_ids, rec)
        if policy.directed != "error":
            notes.append(f"directed input symmetrised by {policy.directed} "
                         f"({asymmetric} asymmetric pair(s))")
        else:
            notes.append("directed input is symmetric; each pair kept once")
        zero_after = weight == 0
        if zero_after.any():
            count = int(np.count_nonzero(zero_after))
            keep = ~zero_after
            key, weight, record = key[keep], weight[keep], record[keep]
            notes.append(f"{count} pair(s) weigh 0 after symmetrising by {policy.directed} "
                         "and were dropped")
        if loops_kept:
            loops_kept = int(np.count_nonzero(key // n == key % n))
    else:
        # the components of the records' pairs are those of the merged edges (merging only joins
        # records of one pair, and every weight left is positive): from
        # COMPONENTS_BESIDE_MERGE_MIN records they are found on the other core while the pairs merge
        labels_future = _components_beside(n, u, v)
        key = np.minimum(u, v).astype(np.int64)
        key *= n
        key += np.maximum(u, v)
        del u, v
        try:
            key, weight, record, merged = merge_duplicates(key, weight, record, policy.duplicates,
                                                           on_duplicate, n * n, keys_only=True)
        finally:
            if labels_future is not None:
                labels = labels_future.result()  # (waits for the thread, also when the merge failed)
        if loops_kept:
            loops_kept = int(np.count_nonzero(key // n == key % n))
    if merged:
        notes.append(f"{merged} duplicate record(s) merged by {policy.duplicates}")
    report_progress(progress, "canonicalise", 3, 4)

    if key.size == 0:
        raise InputError(
            f"no edge left to import ({m_read} record(s) read, {zero_dropped} zero-weight "
            f"dropped, {loops_found if policy.self_loops == 'drop' else 0} self-loop(s) "
            "dropped)", path=path)
    edge_u = key // n
    edge_v = key - edge_u * n
    graph = GraphData(node_ids=node_ids, edge_u=edge_u.astype(np.int64, copy=False),
                      edge_v=edge_v.astype(np.int64, copy=False),
                      weight=np.ascontiguousarray(weight, dtype=np.float64), directed=keep_direction)
    if on_graph is not None:
        on_graph(graph, packed_ids)
    del packed_ids
    report = build_report(graph, rec, m_read, loops_found, loops_kept, merged, asymmetric,
                          zero_dropped, notes, labels=labels)
    report_progress(progress, "canonicalise", 4, 4)
    return graph, report


#: From this many records (and up to :data:`COMPONENTS_BESIDE_MERGE_MAX`) an undirected import
#: finds the report's components in a second thread while the pairs are merged (numpy runs
#: without the interpreter lock). Above the maximum the components are found after the merge, as
#: below the minimum: running both at once adds the components' arrays to the merge's peak
#: memory, which sets the import's peak on large files (1M nodes, 7.5M records: 0.62 -> 0.72 GB
#: with the components beside the merge).
COMPONENTS_BESIDE_MERGE_MIN = 1 << 19
COMPONENTS_BESIDE_MERGE_MAX = 4_000_000


def _components_beside(n: int, u: np.ndarray, v: np.ndarray):
    """A future of ``component_labels(n, u, v)`` computed on a thread of its own, or None (too few
    or too many records, or one CPU)."""
    if not COMPONENTS_BESIDE_MERGE_MIN <= u.size <= COMPONENTS_BESIDE_MERGE_MAX or available_cpus() < 2:
        return None
    import threading
    from concurrent.futures import Future

    future: Future = Future()

    def work() -> None:
        try:
            future.set_result(component_labels(n, u, v))
        except BaseException as exc:  # noqa: BLE001 - re-raised by result() on the caller's thread
            future.set_exception(exc)

    threading.Thread(target=work, name="cutbook-components", daemon=True).start()
    return future


#: outer rounds of :func:`component_labels` before it hands over to scipy (never reached on the
#: graphs tried, paths in any node order included: see the tests); plus 4 per bit of n
_COMPONENT_ROUNDS = 16


def component_labels(n: int, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Connected components of the undirected graph on ``n`` nodes with edges ``(u[k], v[k])``:
    ``labels[i]`` is the smallest node of ``i``'s component.

    Min-label hooking with pointer jumping, in whole-array steps: with a forest ``p``
    (``p[i] <= i``, roots ``p[r] = r``, at first ``p = 0..n-1``) each round takes the edges whose
    endpoints lie in different trees, with roots ``a < b``, and sets ``p[b] = min(p[b], a)``
    (``numpy.minimum.at``: every root with a smaller-rooted neighbour hooks under one), then
    ``p = p[p]`` until nothing changes (each tree becomes a star). Edges inside one tree are dropped
    for good: trees only merge. Rounds stop when no edge joins two trees. Each pointer-jumping pass
    halves the depth, so at most ``log2 n + 1`` of them follow a round; each round hooks at least
    the largest root met, and after ``_COMPONENT_ROUNDS + 4 * bit_length(n)`` rounds (not reached
    on any graph tried) the result comes from ``scipy.sparse.csgraph.connected_components``
    instead. Loops (``u == v``) are ignored.

    Returns int32 labels (int64 from 2**31 nodes).

    References
    ----------
    Y. Shiloach and U. Vishkin, "An O(log n) parallel connectivity algorithm", J. Algorithms 3
    (1982) 57-67 (hooking and pointer jumping); scipy ``sparse.csgraph.connected_components``.
    """
    index_type = np.int32 if n < 2 ** 31 else np.int64
    parent = np.arange(n, dtype=index_type)
    a, b = _proper_pairs(u, v, index_type)
    max_jumps = n.bit_length() + 1
    for round_ in range(_COMPONENT_ROUNDS + 4 * n.bit_length()):
        if round_ == 0:
            # every node its own root and no pair a loop: the roots are the endpoints and every
            # pair joins two trees (no gather of the whole edge list through ``parent``)
            if a.size == 0:
                return parent
            low = np.minimum(a, b)
            high = np.maximum(a, b)
        else:
            # (each array is replaced as soon as its successor exists: a few edge-length arrays at
            # a time, not two generations of them)
            root_a = parent[a]
            root_b = parent[b]
            cross = root_a != root_b
            if not cross.all():
                a = a[cross]
                b = b[cross]
                root_a = root_a[cross]
                root_b = root_b[cross]
            del cross
            if a.size == 0:
                return parent
            low = np.minimum(root_a, root_b)
            high = np.maximum(root_a, root_b, out=root_b)
            del root_a
        np.minimum.at(parent, high, low)
        del low, high
        for _ in range(max_jumps):
            grand = parent[parent]
            if np.array_equal(grand, parent):
                break
            parent = grand
    from scipy.sparse import coo_array
    from scipy.sparse.csgraph import connected_components

    _, labels = connected_components(coo_array((np.ones(u.size), (u, v)), shape=(n, n)).tocsr(),
                                     directed=False)
    # the smallest node of each component labels it, as above
    first = np.full(int(labels.max()) + 1 if n else 0, n, dtype=np.int64)
    np.minimum.at(first, labels, np.arange(n))
    return first[labels].astype(index_type)


_PAIR_CHUNK = 1 << 22


def _proper_pairs(u: np.ndarray, v: np.ndarray, index_type) -> tuple[np.ndarray, np.ndarray]:
    """``u[u != v]``, ``v[u != v]`` as ``index_type``, made in chunks (no full-length temporaries
    of the input's wider type)."""
    count = 0
    for at in range(0, u.size, _PAIR_CHUNK):
        count += int(np.count_nonzero(u[at:at + _PAIR_CHUNK] != v[at:at + _PAIR_CHUNK]))
    a = np.empty(count, dtype=index_type)
    b = np.empty(count, dtype=index_type)
    filled = 0
    for at in range(0, u.size, _PAIR_CHUNK):
        cu, cv = u[at:at + _PAIR_CHUNK], v[at:at + _PAIR_CHUNK]
        proper = cu != cv
        k = int(np.count_nonzero(proper))
        a[filled:filled + k] = cu[proper]
        b[filled:filled + k] = cv[proper]
        filled += k
    return a, b


def _median(w: np.ndarray) -> float:
    """``numpy.median(w)``; without its sorted copy of ``w`` when every value is the same
    (unweighted graphs): then the middle values are any one or two of them, averaged by
    ``numpy.median`` itself as it would average the middle pair."""
    if w.size and w.min() == w.max():
        return float(np.median(w[:2] if w.size % 2 == 0 else w[:1]))
    return float(np.median(w))


def build_report(graph: GraphData, rec: EdgeRecords, records_read: int, loops_found: int,
                 loops_kept: int, merged: int, asymmetric: int, zero_dropped: int,
                 notes: list[str], labels: np.ndarray | None = None) -> ImportReport:
    """The validation report of a canonical graph.

    Components (undirected, also for a directed graph) come from :func:`component_labels`
    (``labels``: already found, on pairs with the same components).
    A node is isolated when no edge joins it to another node (a node with only a self-loop
    counts as isolated).
    """
    n, m = graph.n_nodes, graph.n_edges
    u, v, w = graph.edge_u, graph.edge_v, graph.weight
    if labels is None:
        labels = component_labels(n, u, v)
    sizes = np.bincount(labels, minlength=n)
    sizes = np.sort(sizes[sizes > 0])[::-1]
    n_components = sizes.size
    # a node is isolated when no edge between two nodes touches it (chunks: no full-length copies)
    touched = np.zeros(n, dtype=bool)
    for at in range(0, m, _PAIR_CHUNK):
        cu, cv = u[at:at + _PAIR_CHUNK], v[at:at + _PAIR_CHUNK]
        proper = cu != cv
        touched[cu[proper]] = True
        touched[cv[proper]] = True
    summary = {
        "min": float(w.min()), "max": float(w.max()), "mean": float(w.mean()),
        "median": _median(w), "total": float(w.sum()),
    }
    return ImportReport(
        source=rec.path, format=rec.format, records_read=int(records_read), nodes=n, edges=m,
        components=int(n_components),
        component_sizes=[int(s) for s in sizes[:COMPONENT_SIZES_LISTED]],
        isolated_nodes=int(n - np.count_nonzero(touched)), self_loops_found=int(loops_found),
        self_loops_kept=int(loops_kept), duplicates_merged=int(merged),
        asymmetric_pairs=int(asymmetric), zero_weight_dropped=int(zero_dropped),
        weighted=bool(rec.weighted), weight_summary=summary, notes=notes)
