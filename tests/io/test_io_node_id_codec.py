"""The node-id codec (``encode_node_ids`` / ``decode_node_ids``) against Python's own UTF-8 codec.

Reference: Python's ``str.encode("utf-8")`` / ``bytes.decode("utf-8")`` (the codecs of the
standard library, RFC 3629) applied id by id: the packed bytes must be exactly their
concatenation, the offsets their running lengths, and decoding must give back the same strings
as ``numpy.array(list_of_str)`` (the per-id loop the decoder used before chunking), for ids of
every length from 0 to 4096 bytes, ASCII and not, and whatever the chunk size.
"""

from __future__ import annotations

import numpy as np
import pytest

from workspace import domain
from workspace.domain import decode_node_ids, encode_node_ids


def _reference(ids: list[str]) -> tuple[np.ndarray, bytes]:
    # Python's UTF-8 codec, one id at a time (standard library; RFC 3629, 2003)
    encoded = [s.encode("utf-8") for s in ids]
    offsets = np.zeros(len(ids) + 1, dtype=np.int64)
    np.cumsum([len(e) for e in encoded], out=offsets[1:])
    return offsets, b"".join(encoded)


def _ids_of_every_length() -> list[str]:
    rng = np.random.default_rng(7)
    alphabet = list("abcXYZ019-_.:") + ["é", "ß", "Ω", "ж", "中", "文", "€", "😀", "𝔘", " "]
    out = [""]
    for length in list(range(1, 80)) + [127, 128, 255, 256, 511, 1000, 1023, 1024, 2047, 4095]:
        out.append("".join(rng.choice(alphabet[:13], size=length)))  # ASCII
        out.append("".join(rng.choice(alphabet, size=length)))  # mixed, up to 4 bytes a character
    out.append("a" * 4096)  # the longest id an import accepts: 4096 bytes
    out.append("é" * 2048)  # 4096 bytes, 2048 characters
    out.append("😀" * 1024)  # 4096 bytes, 1024 characters
    out.append("x\x00y")  # an interior NUL survives both directions
    return out


@pytest.mark.parametrize("chunk_points", [1, 7, 4096, 1 << 22])
def test_codec_matches_python_utf8_for_every_length(monkeypatch, chunk_points):
    monkeypatch.setattr(domain, "_CHUNK_POINTS", chunk_points)
    ids = _ids_of_every_length()
    ref_offsets, ref_data = _reference(ids)
    as_numpy = np.array(ids)  # what a GraphData holds
    offsets, data = encode_node_ids(as_numpy)
    assert offsets.dtype == np.int64 and data.dtype == np.uint8
    np.testing.assert_array_equal(offsets, ref_offsets)
    assert data.tobytes() == ref_data
    decoded = decode_node_ids(ref_offsets, np.frombuffer(ref_data, dtype=np.uint8))
    # the loop the decoder used before: numpy.array of Python-decoded strings
    before = np.array([ref_data[ref_offsets[i]:ref_offsets[i + 1]].decode("utf-8")
                       for i in range(len(ids))], dtype=np.str_)
    assert decoded.dtype == before.dtype
    np.testing.assert_array_equal(decoded, before)
    assert decoded.tolist() == ids


@pytest.mark.parametrize("ids", [["n1", "n22", "n333"], ["", ""], ["é"], ["", "ab", ""], ["😀", "a", "中文"]])
def test_small_cases_round_trip(ids):
    offsets, data = encode_node_ids(np.array(ids))
    ref_offsets, ref_data = _reference(ids)
    np.testing.assert_array_equal(offsets, ref_offsets)
    assert data.tobytes() == ref_data
    assert decode_node_ids(offsets, data).tolist() == ids


def test_object_arrays_and_empty_input():
    offsets, data = encode_node_ids(np.array(["a", "é"], dtype=object))
    assert data.tobytes() == "aé".encode("utf-8") and offsets.tolist() == [0, 1, 3]
    offsets, data = encode_node_ids(np.array([], dtype=np.str_))
    assert offsets.tolist() == [0] and data.size == 0
    assert decode_node_ids(np.zeros(1, dtype=np.int64), np.zeros(0, dtype=np.uint8)).size == 0


def test_many_ids_cross_chunk_boundaries(monkeypatch):
    # more rows than one chunk holds, ASCII and non-ASCII chunks mixed
    monkeypatch.setattr(domain, "_CHUNK_POINTS", 64)
    ids = [f"n{i}" if i % 5 else f"ñode-{i}" for i in range(3000)]
    offsets, data = encode_node_ids(np.array(ids))
    ref_offsets, ref_data = _reference(ids)
    np.testing.assert_array_equal(offsets, ref_offsets)
    assert data.tobytes() == ref_data
    assert decode_node_ids(offsets, data).tolist() == ids


def test_invalid_utf8_is_refused_as_python_does():
    with pytest.raises(UnicodeDecodeError):
        decode_node_ids(np.array([0, 2], dtype=np.int64), np.array([0xC3, 0x28], dtype=np.uint8))


class _StepReader:
    """Hands out each step in one reused buffer, as the store's reader does."""

    def __init__(self, data: bytes) -> None:
        self.data = np.frombuffer(data, dtype=np.uint8)
        self.at = 0
        self.buf = np.empty(0, dtype=np.uint8)

    def read(self, n: int) -> np.ndarray:
        if n > self.buf.size:
            self.buf = np.empty(n, dtype=np.uint8)
        self.buf[:n] = self.data[self.at:self.at + n]
        self.at += n
        return self.buf[:n]


@pytest.mark.parametrize("take_bytes", [1, 100, 1 << 20])
@pytest.mark.parametrize("streamed", [False, True])
def test_packed_ids_take_gives_pythons_strings(monkeypatch, take_bytes, streamed):
    # PackedNodeIds.take decodes only the ids asked for; reference: bytes.decode("utf-8") of the
    # same slices (standard library, RFC 3629), for ids of every length, any order, repeats and
    # negative positions as numpy indexing has them
    from workspace.domain import PackedNodeIds

    monkeypatch.setattr(domain, "_TAKE_BYTES", take_bytes)
    ids = _ids_of_every_length()
    ref_offsets, ref_data = _reference(ids)
    packed = (PackedNodeIds(ref_offsets, open_data=lambda: _StepReader(ref_data)) if streamed
              else PackedNodeIds(ref_offsets, np.frombuffer(ref_data, dtype=np.uint8)))
    assert len(packed) == len(ids)
    rng = np.random.default_rng(3)
    for positions in ([], [0], [len(ids) - 1], [-1, 0, -2], rng.integers(0, len(ids), 40),
                      np.arange(len(ids))[::-1]):
        positions = np.asarray(positions, dtype=np.int64)
        expected = [ref_data[ref_offsets[i]:ref_offsets[i + 1]].decode("utf-8")
                    for i in (positions % len(ids)).tolist()]
        assert packed.take(positions).tolist() == expected
    with pytest.raises(IndexError):
        packed.take([len(ids)])
    assert packed.decode().tolist() == ids
    assert packed.take([2, 1]).tolist() == ids[2:0:-1]  # from the decoded array now


@pytest.mark.parametrize("streamed", [False, True])
def test_packed_ids_position_is_pythons_sorted_lookup(streamed):
    # PackedNodeIds.position: a binary search over the stored UTF-8 bytes; reference: the index of
    # the id in Python's sorted() list of the strings (code point order), None for any id not
    # there (prefixes, extensions, other cases, the empty string when absent)
    import bisect

    from workspace.domain import PackedNodeIds

    ids = sorted(set(_ids_of_every_length()))
    ref_offsets, ref_data = _reference(ids)
    packed = (PackedNodeIds(ref_offsets, open_data=lambda: _StepReader(ref_data)) if streamed
              else PackedNodeIds(ref_offsets, np.frombuffer(ref_data, dtype=np.uint8)))
    for i, x in enumerate(ids):
        assert packed.position(x) == i
    present = set(ids)
    probes = [x + "a" for x in ids[:40]] + [x[:-1] for x in ids[2:40]] + [x.upper() for x in ids[:40]]
    probes += ["\U0010ffff", "zz" * 3000, "é" * 2049]
    for x in probes:
        assert packed.position(x) == (bisect.bisect_left(ids, x) if x in present else None)
    without_empty = ids[1:]
    offsets, data = _reference(without_empty)
    assert PackedNodeIds(offsets, np.frombuffer(data, dtype=np.uint8)).position("") is None
    assert PackedNodeIds(np.zeros(1, dtype=np.int64), np.zeros(0, dtype=np.uint8)).position("a") is None
