"""Id factorisation: node order, indices and content hash on ids that are easy to get wrong.

References, all outside the code under test:
- node order is Python's ``sorted`` on ``str`` (code point order, Python language reference,
  "Value comparisons"); UTF-8 byte order equals code point order (RFC 3629, 2003, section 1),
  which the Arrow-side sort relies on - ids from the astral plane (4-byte UTF-8, surrogate pairs
  in UTF-16) are where a UTF-16 order would differ;
- the edges are those ``networkx.parse_edgelist`` reads from the same lines;
- the content hash is recomputed here with ``hashlib.sha256`` from the layout documented in
  ``GraphData.content_hash`` (tag, n and m, offsets, UTF-8 bytes, u, v, weights).
"""

from __future__ import annotations

import hashlib
import struct

import networkx as nx
import numpy as np
import pytest

from workspace.domain import ImportPolicy
from workspace.io import read_network
from workspace.io.canonical import encode_ids


@pytest.fixture(autouse=True, params=["serial", "two threads"])
def encode_threads(request, monkeypatch):
    """Every test here runs twice: as small inputs run (one thread), and with the integer-key
    encoding's two-thread path forced on (its threshold lowered to one record), which must
    give the same arrays."""
    from workspace.io import _common, canonical

    if request.param == "two threads":
        monkeypatch.setattr(canonical, "PARALLEL_ENCODE_MIN_RECORDS", 1)
        monkeypatch.setattr(_common.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    return request.param


TRICKY = [
    "007", "7", "10", "9", "-1", "1e3", "+5", "0x1F", "1.0",         # look numeric, are strings
    "B", "a", "a b", "ab", "a-b", "Z", "_",                          # case, blanks, punctuation
    "é", "e\u0301", "Ærø", "ß", "ss", "中文", "日本", "Ω",            # non-ASCII, combining mark
    "\U0001F600", "\uFF5E", "\uE000", "𝔘",                           # astral plane vs BMP
    "L" * 4000, "L" * 3999 + "M", "k" + "é" * 1000,                  # long ids
]


def _edges(ids: list[str]) -> list[tuple[str, str, float]]:
    rng = np.random.default_rng(7)
    out = []
    for i, a in enumerate(ids):  # a ring plus random chords: every id is used
        out.append((a, ids[(i + 1) % len(ids)], float(i % 5 + 1)))
    for a, b in rng.integers(0, len(ids), size=(40, 2)).tolist():
        if a != b:
            out.append((ids[a], ids[b], 2.5))
    return out


def _expected_hash(nodes: list[str], edges: dict[tuple[int, int], float]) -> str:
    """sha256 over the documented canonical layout, built without the code under test."""
    h = hashlib.sha256(b"cutbook-graph-1\0")
    h.update(struct.pack("<qq", len(nodes), len(edges)))
    encoded = [n.encode("utf-8") for n in nodes]
    offsets = [0]
    for e in encoded:
        offsets.append(offsets[-1] + len(e))
    h.update(struct.pack(f"<{len(offsets)}q", *offsets))
    h.update(b"".join(encoded))
    keys = sorted(edges)
    h.update(struct.pack(f"<{len(keys)}q", *[u for u, _ in keys]))
    h.update(struct.pack(f"<{len(keys)}q", *[v for _, v in keys]))
    h.update(struct.pack(f"<{len(keys)}d", *[edges[k] for k in keys]))
    return h.hexdigest()


@pytest.mark.parametrize("delimiter, ext", [(",", "csv"), ("\t", "tsv")])
def test_tricky_ids_order_indices_and_hash(tmp_path, delimiter, ext):
    rows = _edges(TRICKY)
    lines = [f'"{a}"{delimiter}"{b}"{delimiter}{w}' if delimiter == "," else f"{a}\t{b}\t{w}"
             for a, b, w in rows]
    path = tmp_path / f"tricky.{ext}"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    graph, _ = read_network(path, policy=ImportPolicy(weight=2, duplicates="max", header="no"))

    reference = nx.Graph()  # networkx.parse_edgelist on the same records, max rule by hand
    for a, b, w in rows:
        if reference.has_edge(a, b):
            w = max(w, reference[a][b]["weight"])
        reference.add_edge(a, b, weight=w)
    nodes = sorted(reference.nodes)  # code point order
    assert [str(x) for x in graph.node_ids] == nodes
    index = {n: i for i, n in enumerate(nodes)}
    got = {(int(u), int(v)): float(w) for u, v, w in zip(graph.edge_u, graph.edge_v, graph.weight)}
    want = {tuple(sorted((index[a], index[b]))): d["weight"] for a, b, d in reference.edges(data=True)}
    assert got == want
    assert graph.content_hash() == _expected_hash(nodes, want)


def test_encode_ids_maps_every_record_to_its_own_id():
    import pyarrow as pa

    rng = np.random.default_rng(11)
    pool = TRICKY + [f"n{i}" for i in range(200)]
    src = [pool[i] for i in rng.integers(0, len(pool), 500)]
    dst = [pool[i] for i in rng.integers(0, len(pool), 500)]
    extra = pa.array(["zz-only-declared", "007"], pa.string())
    # several chunks, as the CSV reader produces them
    source = pa.chunked_array([pa.array(src[:200]), pa.array(src[200:])])
    target = pa.chunked_array([pa.array(dst[:1]), pa.array(dst[1:350]), pa.array(dst[350:])])
    node_ids, u, v = encode_ids(source, target, extra)
    expected = sorted(set(src) | set(dst) | {"zz-only-declared", "007"})
    assert [str(x) for x in node_ids] == expected
    assert [str(node_ids[i]) for i in u] == src and [str(node_ids[i]) for i in v] == dst
    assert u.dtype == np.int32 and v.dtype == np.int32  # int32 while the ids fit (< 2**31 of them)


def test_ascii_and_non_ascii_paths_give_the_same_array_type():
    import pyarrow as pa

    ascii_ids, _, _ = encode_ids(pa.array(["b", "abc"]), pa.array(["a", "b"]), None)
    wide_ids, _, _ = encode_ids(pa.array(["b", "abé"]), pa.array(["a", "b"]), None)
    assert ascii_ids.dtype == np.dtype("<U3") and wide_ids.dtype == np.dtype("<U3")
    assert ascii_ids.tolist() == ["a", "abc", "b"] and wide_ids.tolist() == ["a", "abé", "b"]
    sliced = pa.array(["x", "yy", "b", "a"]).slice(2)  # an array with a non-zero offset
    ids, u, v = encode_ids(sliced, pa.array(["c", "a"]), None)
    assert ids.tolist() == ["a", "b", "c"] and u.tolist() == [1, 0] and v.tolist() == [2, 0]


def test_a_line_longer_than_the_parser_block_is_read(tmp_path):
    # a 5 MiB third column: longer than the 4 MiB blocks the CSV reader starts with
    path = tmp_path / "long.csv"
    path.write_text("a,b," + "x" * (5 << 20) + "\nb,c,y\n", encoding="utf-8")
    graph, _ = read_network(path, policy=ImportPolicy(header="no"))
    assert graph.node_ids.tolist() == ["a", "b", "c"] and graph.n_edges == 2


#: ids of at most 32 UTF-8 bytes (the integer-key path): prefixes of one another, bytes above
#: 0x7f (which sort after ASCII as unsigned bytes), 1- to 4-byte UTF-8, lengths around the
#: 8-byte word boundaries
SHORT = [
    "a", "ab", "abc", "ab c", "ab\x01", "b", "B", "z", "~", "\x7f", "é", "ée", "e\u0301",
    "中", "中文", "\U0001F600", "\U0001F600x", "\uFF5E", "\uE000",
    "1234567", "12345678", "123456789", "1234567\u00e9", "abcdefgh", "abcdefghi",
    "abcdefgh" * 2, "abcdefgh" * 2 + "a", "abcdefgh" * 3 + "abcdefg", "abcdefgh" * 4,
    "abcdefgh" * 3 + "abcdef" + "é",  # 32 bytes ending in a 2-byte character
    "station-3f9a1c07", "station-3f9a1c08", "depot-0b7e55d1",
]
assert max(len(x.encode()) for x in SHORT) == 32


def _random_short_ids(rng, count: int) -> list[str]:
    alphabet = list("abcxyzABC019-_ ") + ["é", "ß", "中", "\U0001F600"]
    out = set()
    while len(out) < count:
        word = "".join(rng.choice(alphabet, size=int(rng.integers(1, 12))))
        if len(word.encode()) <= 32:
            out.add(word)
    return sorted(out)


def _check_encoding(src, dst, extra_ids, source, target, extra):
    node_ids, u, v = encode_ids(source, target, extra)
    # reference: Python's sorted(set()) on str (code point order)
    assert [str(x) for x in node_ids] == sorted(set(src) | set(dst) | set(extra_ids))
    assert [str(node_ids[i]) for i in u] == src and [str(node_ids[i]) for i in v] == dst
    return node_ids, u, v


def _spy_on_word_path(monkeypatch) -> list:
    """What each call of ``canonical._encode_by_words`` (the integer-key path) returned, in order."""
    from workspace.io import canonical

    taken = []
    original = canonical._encode_by_words
    monkeypatch.setattr(canonical, "_encode_by_words",
                        lambda parts: taken.append(original(parts)) or taken[-1])
    return taken


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_short_ids_take_the_integer_key_path_and_sort_by_code_point(monkeypatch, seed):
    import pyarrow as pa

    from workspace.io import canonical

    taken = _spy_on_word_path(monkeypatch)
    rng = np.random.default_rng(seed)
    pool = SHORT + _random_short_ids(rng, 300)
    src = [pool[i] for i in rng.integers(0, len(pool), 900)]
    dst = [pool[i] for i in rng.integers(0, len(pool) // 2, 700)]
    extra_ids = ["zz-only-declared", "é"]
    # several chunks, one of them a slice (non-zero offset), as the CSV reader produces them
    lead = pa.array(["header-a"] + src[:300])
    source = pa.chunked_array([lead.slice(1), pa.array(src[300:])])
    target = pa.chunked_array([pa.array(dst[:1]), pa.array(dst[1:500]), pa.array(dst[500:])])
    encoded = _check_encoding(src, dst, extra_ids, source, target, pa.array(extra_ids))
    assert taken and taken[0] is not None  # the integer keys were used
    # the string hash path (Arrow's dictionary_encode + sort_indices) gives the same arrays
    monkeypatch.setattr(canonical, "_MAX_KEY_WORDS", 0)
    by_strings = encode_ids(source, target, pa.array(extra_ids))
    assert taken[-1] is None
    assert all(np.array_equal(a, b) for a, b in zip(encoded, by_strings))


def test_ids_at_the_end_of_short_buffers():
    import pyarrow as pa

    # data buffers shorter than one 8-byte word, and ids that end the buffer
    _check_encoding(["a"], ["b"], [], pa.array(["a"]), pa.array(["b"]), None)
    _check_encoding(["ab", "c"], ["c", "abcdefgh"], [], pa.array(["ab", "c"]),
                    pa.array(["c", "abcdefgh"]), None)
    tail = ["x" * k for k in range(1, 17)]
    _check_encoding(tail, tail[::-1], [], pa.array(tail), pa.array(tail[::-1]), None)
    sliced = pa.array(["first-long-id", "é", "ab"]).slice(1)
    _check_encoding(["é", "ab"], ["ab", "ab"], [], sliced, pa.array(["ab", "ab"]), None)


def _colliding_pair(rng) -> tuple[str, str]:
    """Two different 16-byte ASCII ids with the same real ``_fold_key`` key: for the fold
    ``h = ((w0 K) xor w1) K`` any second first word ``v0`` collides with ``v1 = (w0 K) xor w1
    xor (v0 K)`` (arithmetic modulo 2**64); drawn until ``v1``'s bytes are printable ASCII."""
    from workspace.io.canonical import _MIX

    mix = int(_MIX)
    mask = (1 << 64) - 1
    w = rng.integers(0x21, 0x7F, 16, dtype=np.uint8).tobytes()
    w0, w1 = int.from_bytes(w[:8], "little"), int.from_bytes(w[8:], "little")
    for _ in range(1_000_000):
        v = rng.integers(0x21, 0x7F, 8, dtype=np.uint8).tobytes()
        v0 = int.from_bytes(v, "little")
        v1 = ((w0 * mix) & mask) ^ w1 ^ ((v0 * mix) & mask)
        tail = v1.to_bytes(8, "little")
        if all(0x21 <= b < 0x7F for b in tail):
            return w.decode(), (v + tail).decode()
    raise AssertionError("no colliding pair found")


def test_a_real_key_collision_falls_back_to_hashing_the_strings(monkeypatch):
    # a genuine collision of the fold (constructed from its formula, not assumed): the check of
    # the first word must see it, and the string path then gives Python's sorted(set())
    import pyarrow as pa

    from workspace.io.canonical import _IdWords, _fold_key

    a, b = _colliding_pair(np.random.default_rng(1))
    words = _IdWords(pa.array([a, b])).words(2)
    keys = _fold_key(_fold_key(None, words[:, 0]), words[:, 1])
    assert a != b and keys[0] == keys[1]
    taken = _spy_on_word_path(monkeypatch)
    src, dst = [a, "zz", b, a], [b, "q", "zz", b]
    _check_encoding(src, dst, [], pa.array(src), pa.array(dst), None)
    assert taken == [None]


def test_a_key_collision_in_an_earlier_word_falls_back(monkeypatch):
    import pyarrow as pa

    from workspace.io import canonical

    taken = _spy_on_word_path(monkeypatch)
    # every id gets the same key (a fold that is no bijection): ids that differ before their
    # last word are told apart by the check against each group's representative
    monkeypatch.setattr(canonical, "_fold_key", lambda key, word: np.zeros(word.size, np.uint64))
    src = ["abcdefghij", "bbcdefghij", "zz", "abcdefghij"]
    dst = ["zz", "yy-longer-than-8", "bbcdefghij", "q"]
    _check_encoding(src, dst, [], pa.array(src), pa.array(dst), None)
    assert taken == [None]


def test_a_nul_byte_takes_the_string_path_and_is_refused():
    import pyarrow as pa

    from workspace.errors import InputError

    with pytest.raises(InputError, match="NUL character"):
        encode_ids(pa.array(["a", "b\x00"]), pa.array(["b", "a"]), None)
    with pytest.raises(InputError, match="NUL character"):  # "a" and "a\0" would share words
        encode_ids(pa.array(["a"]), pa.array(["a\x00"]), None)


@pytest.mark.parametrize("longest", [33, 40, 64])
def test_ids_up_to_64_bytes_take_the_integer_key_path(monkeypatch, longest):
    # ids of 33 to 64 UTF-8 bytes (station names, gene identifiers): reference Python's
    # sorted(set()) on str, and the string hash path gives the same arrays
    import pyarrow as pa

    from workspace.io import canonical

    taken = _spy_on_word_path(monkeypatch)
    rng = np.random.default_rng(longest)
    alphabet = list("abcXYZ019-_é漢")
    pool = set()
    while len(pool) < 400:
        word = "".join(rng.choice(alphabet, size=int(rng.integers(1, longest))))
        if len(word.encode()) <= longest:
            pool.add(word)
    pool = sorted(pool) + ["s" * longest, "s" * (longest - 1), "s" * (longest - 8)]
    src = [pool[i] for i in rng.integers(0, len(pool), 1500)]
    dst = [pool[i] for i in rng.integers(0, len(pool), 1500)]
    source = pa.chunked_array([pa.array(src[:700]), pa.array(["x"] + src[700:]).slice(1)])
    target = pa.chunked_array([pa.array(dst)])
    encoded = _check_encoding(src, dst, [], source, target, None)
    assert taken and taken[0] is not None
    monkeypatch.setattr(canonical, "_MAX_KEY_WORDS", 0)
    by_strings = encode_ids(source, target, None)
    assert taken[-1] is None
    assert all(np.array_equal(a, b) for a, b in zip(encoded, by_strings))


def test_byte_order_of_words_is_the_byte_order_of_the_ids(encode_threads):
    # reference: Python's sorted() on bytes (lexicographic by byte), ids of one to three words
    import pyarrow as pa

    from workspace.io.canonical import _byte_order, _IdWords

    rng = np.random.default_rng(11)
    for longest in (8, 16, 24):
        ids = sorted({bytes(rng.integers(1, 256, int(rng.integers(1, longest + 1))).astype(np.uint8))
                      for _ in range(3000)})
        shuffled = [ids[i] for i in rng.permutation(len(ids))]
        values = pa.array(shuffled, type=pa.binary()).cast(pa.string(), safe=False)
        words = _IdWords(values).words(-(-longest // 8))
        order = _byte_order(words)
        assert [shuffled[i] for i in order] == ids


def test_large_inputs_take_the_two_thread_path(monkeypatch, encode_threads):
    import pyarrow as pa

    from workspace.io import canonical

    pools = []
    original = canonical._thread_pool
    monkeypatch.setattr(canonical, "_thread_pool", lambda m: pools.append(original(m)) or pools[-1])
    src = [f"node-{i % 997}" for i in range(3000)]
    dst = [f"node-{(7 * i) % 1009}" for i in range(3000)]
    _check_encoding(src, dst, [], pa.array(src), pa.array(dst), None)
    assert (pools[0] is not None) == (encode_threads == "two threads")


@pytest.mark.parametrize("length", [1, 3, 7, 8, 9, 15, 16, 17, 40, 64])
def test_ids_of_one_length_read_as_words_and_encoded(length):
    # ids that all have the same byte length are read through a strided view, not a gather;
    # reference: the zero-padded UTF-8 bytes themselves (Python bytes.ljust) read as
    # little-endian words, and Python's sorted(set()) for the encoding
    import pyarrow as pa

    from workspace.io.canonical import _IdWords

    rng = np.random.default_rng(length)
    pool = {"é" * (length // 2) + "q" * (length % 2)}
    while len(pool) < min(300, 8 ** length):  # (one byte: at most the 10 letters and "q")
        pool.add("".join(rng.choice(list("abcxyz019-"), length)))
    pool = sorted(pool)
    for count in (1, 2, 5, 1000):
        ids = [pool[i] for i in rng.integers(0, len(pool), count)]
        values = pa.array(["lead"] + ids).slice(1)  # a non-zero offset, as Arrow's chunks have
        n_words = -(-length // 8)
        expected = np.frombuffer(b"".join(x.encode().ljust(8 * n_words, b"\0") for x in ids),
                                 dtype="<u8").reshape(count, n_words)
        reader = _IdWords(values)
        assert np.array_equal(reader.words(n_words), expected)
        assert np.array_equal(reader.words(n_words, np.arange(count)), expected)  # the gather
        wider = reader.words(n_words + 1)
        assert np.array_equal(wider[:, :n_words], expected) and not wider[:, n_words].any()
    src = [pool[i] for i in rng.integers(0, len(pool), 2000)]
    dst = [pool[i] for i in rng.integers(0, len(pool), 2000)]
    _check_encoding(src, dst, [], pa.chunked_array([pa.array(src[:900]), pa.array(src[900:])]),
                    pa.array(dst), None)


@pytest.mark.parametrize("step", [1, 3, 1 << 20])
def test_packed_from_words_is_the_utf8_of_the_ids_in_order(monkeypatch, step):
    # the packed ids made from the key words equal Python's own UTF-8 encoding of the same ids in
    # the same order (str.encode), whatever the id length (1 to 64 bytes) and the step size
    import random

    import pyarrow as pa

    from workspace.io import canonical

    monkeypatch.setattr(canonical, "PACK_ROWS", step)
    rng = random.Random(7)
    ids = sorted({"".join(rng.choice("ab9-é漢") for _ in range(rng.randint(1, 21))) for _ in range(300)})
    ids = [x for x in ids if len(x.encode()) <= 64] + ["x" * 64, "y" * 8, "z" * 9, "w"]
    words = canonical._IdWords(pa.array(ids)).words(8)
    order = np.array(rng.sample(range(len(ids)), len(ids)))
    offsets, data = canonical.packed_from_words(words, order)
    wanted = [ids[i].encode() for i in order]
    assert offsets.tolist() == np.concatenate([[0], np.cumsum([len(b) for b in wanted])]).tolist()
    assert data.tobytes() == b"".join(wanted)
