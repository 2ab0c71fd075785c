"""Arrays stored in chunks (revision 0006) on both back ends: the same content hash chunked or not,
exact round trips, every chunk checked by verify, stores written before chunks still read, and a read
that does not hold the array twice.

Outside references: hashes recomputed with hashlib.sha256 (FIPS 180-4, 2015) over the layout
documented in workspace/store/blobs.py; the network is networkx.karate_club_graph (Zachary 1977);
memory measured with the standard library's tracemalloc (numpy reports its buffers to it).
"""

from __future__ import annotations

import hashlib
import tracemalloc
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from sqlalchemy import create_engine, func, select, text

from workspace.domain import ImportPolicy

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"


def _by_hand(arr: np.ndarray) -> str:
    a = np.ascontiguousarray(arr, dtype=arr.dtype.newbyteorder("<"))
    return hashlib.sha256(f"{a.dtype.str}:{len(a)}\0".encode() + a.tobytes()).hexdigest()


def _url(target) -> str:
    return str(target) if "://" in str(target) else f"sqlite:///{target}"


def _count_chunks(store) -> int:
    from workspace.store.schema import BlobChunk

    with store.read() as s:
        return s.scalar(select(func.count()).select_from(BlobChunk))


def test_a_network_hashes_the_same_stored_chunked_or_not(store, tmp_path, monkeypatch):
    from workspace.services.networks import import_network, load_graph
    from workspace.services.store import open_workspace
    from workspace.store.schema import NetworkVersion

    plain = open_workspace(str(tmp_path / "plain.sqlite"))
    out_plain = import_network(plain, KARATE, project="p", network="k", policy=ImportPolicy(weight="weight"))
    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "40")  # a few edges per chunk
    out_chunked = import_network(store, KARATE, project="p", network="k", policy=ImportPolicy(weight="weight"))
    assert _count_chunks(store) > 10 and _count_chunks(plain) == 0
    assert out_plain.content_hash == out_chunked.content_hash

    def blob_hashes(st):
        with st.read() as s:
            v = s.scalars(select(NetworkVersion)).one()
            return [v.node_offsets_blob, v.node_bytes_blob, v.edge_u_blob, v.edge_v_blob, v.weight_blob]

    assert blob_hashes(plain) == blob_hashes(store)
    _, g = load_graph(store, "p/k")
    _, g0 = load_graph(plain, "p/k")
    plain.dispose()
    for name in ("edge_u", "edge_v", "weight"):
        assert np.array_equal(getattr(g, name), getattr(g0, name))
    assert blob_hashes(store)[2] == _by_hand(g.edge_u)
    ids = [str(x) for x in g.node_ids]
    # networkx.karate_club_graph: Zachary (1977), 78 ties among 34 members (numbered from 0 there)
    assert {frozenset((ids[u], ids[v])) for u, v in zip(g.edge_u, g.edge_v)} == \
        {frozenset((str(u + 1), str(v + 1))) for u, v in nx.karate_club_graph().edges()}


@pytest.mark.parametrize("dtype", ["<i4", "<f8", "|u1", "|b1", "<i8"])
def test_round_trip_in_chunks_that_do_not_divide_the_array(store, monkeypatch, dtype):
    from workspace.store import repo

    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "100")  # 100 bytes: 12 eight-byte items, 25 four-byte items
    rng = np.random.default_rng(7)
    arr = (rng.random(1001) * 1000).astype(dtype) if dtype != "|b1" else rng.random(1001) < 0.3
    with store.write() as s:
        h = repo.put_array(s, arr)
        repo.put_array(s, arr)  # stored once (content-addressed)
    assert h == _by_hand(arr)
    with store.read() as s:
        back = repo.get_array(s, h)
        assert repo.get_values(s, h) == arr.tolist()
    assert back.dtype == arr.dtype and np.array_equal(back, arr)
    itemsize = np.dtype(dtype).itemsize
    assert _count_chunks(store) == -(-arr.nbytes // (100 // itemsize * itemsize))


def test_verify_checks_every_chunk(store, store_target, monkeypatch):
    from workspace.services.verify import verify_store
    from workspace.store import repo

    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "256")
    arr = np.arange(5000, dtype=np.int64)
    with store.write() as s:
        h = repo.put_array(s, arr)
    res = verify_store(store)
    assert res["ok"] and res["blobs_checked"] == 1 and res["chunks_checked"] == -(-arr.nbytes // 256)
    engine = create_engine(_url(store_target))
    try:
        with engine.begin() as con:  # one flipped byte in chunk 7's stored data
            data = bytearray(con.execute(text("SELECT data FROM blob_chunks WHERE seq = 7")).scalar_one())
            data[len(data) // 2] ^= 0x01
            con.execute(text("UPDATE blob_chunks SET data = :d WHERE seq = 7"), {"d": bytes(data)})
    finally:
        engine.dispose()
    res = verify_store(store)
    assert not res["ok"]
    assert [f["blob"] for f in res["findings"]] == [h]
    assert "chunk 7" in res["findings"][0]["detail"]


@pytest.mark.sqlite_only
def test_a_store_written_before_chunks_still_reads(tmp_path):
    """Rows of revision 0005 (one value each) read unchanged after the upgrade to 0006."""
    from workspace.services.store import open_workspace
    from workspace.services.verify import verify_store
    from workspace.store import repo
    from workspace.store.blobs import encode_array
    from workspace.store.db import migrate

    path = tmp_path / "old.sqlite"
    migrate(f"sqlite:///{path}", target="0005", backup=False)
    arr = np.linspace(0.0, 1.0, 777)
    enc = encode_array(arr)
    engine = create_engine(f"sqlite:///{path}")
    try:
        with engine.begin() as con:  # what revision-0005 code wrote: no chunks column yet
            con.execute(text("INSERT INTO blobs (hash, codec, dtype, length, raw_size, data) "
                             "VALUES (:h, :c, :d, :n, :r, :b)"),
                        {"h": enc.hash, "c": enc.codec, "d": enc.dtype, "n": enc.length, "r": enc.raw_size,
                         "b": enc.data})
    finally:
        engine.dispose()
    with open_workspace(str(path)) as st:
        with st.read() as s:
            assert np.array_equal(repo.get_array(s, enc.hash), arr)
        assert verify_store(st)["ok"]


def test_reading_a_chunked_array_does_not_hold_it_twice(store, monkeypatch):
    """Peak memory of the read: the array plus about one chunk (a read through one value would hold the
    compressed value, the decompressed bytes and the array)."""
    from workspace.store import repo

    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", str(256 << 10))
    arr = np.random.default_rng(3).random(1 << 20)  # 8 MiB of doubles (barely compressible)
    with store.write() as s:
        h = repo.put_array(s, arr)
    with store.read() as s:
        tracemalloc.start()
        try:
            back = repo.get_array(s, h)
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
    assert np.array_equal(back, arr)
    assert peak < arr.nbytes * 1.25, peak / arr.nbytes


@pytest.mark.parametrize("chunk_bytes", [None, "100", "4096"])
@pytest.mark.parametrize("size", [1001, 3 << 20])
def test_array_bytes_read_through_in_steps(store, monkeypatch, chunk_bytes, size):
    # repo.open_array_bytes: the raw little-endian bytes of a stored array (one .npy+zstd value, or
    # chunks), read in steps of any size through one reused buffer, are the array's own bytes
    # (reference: numpy's tobytes of the array put in); past the end is an error
    from workspace.store import repo

    if chunk_bytes:
        monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", chunk_bytes)
    rng = np.random.default_rng(size)
    arr = rng.integers(0, 256, size).astype(np.uint8)
    with store.write() as s:
        h = repo.put_array(s, arr)
    with store.read() as s:
        open_bytes, total = repo.open_array_bytes(s, h)
        back = repo.get_array(s, h)
    assert total == arr.nbytes and back.flags.writeable and np.array_equal(back, arr)
    for steps in ([total], [1, 2, 3, 4096, 99_999], [7] * 5):
        reader = open_bytes()
        got, at = [], 0
        while at < total:
            for n in steps:
                n = min(n, total - at)
                got.append(reader.read(n).tobytes())
                at += n
        assert b"".join(got) == arr.tobytes()
        with pytest.raises(ValueError):
            reader.read(1)


def test_large_single_value_decodes_in_place_as_numpy_loads_it():
    # blobs.decode_array on a large .npy+zstd value: the same array as numpy.load of the stream
    # (numpy.lib.format, NEP 1), writable, for several dtypes
    import io

    import zstandard

    from workspace.store.blobs import decode_array, encode_array

    for arr in (np.arange(300_000, dtype="<i8"), np.linspace(0, 1, 200_001), np.arange(2 << 20, dtype=np.uint8)):
        enc = encode_array(arr)
        assert enc.raw_size > 1 << 20 and not enc.chunks
        back = decode_array(enc.codec, enc.data, enc.raw_size)
        ref = np.load(io.BytesIO(zstandard.ZstdDecompressor().decompress(enc.data, max_output_size=enc.raw_size)))
        assert back.dtype == ref.dtype and np.array_equal(back, ref) and back.flags.writeable


def test_several_arrays_at_once_read_as_one_by_one(store, monkeypatch):
    from workspace.store import repo

    rng = np.random.default_rng(11)
    small = np.arange(7, dtype=np.int64)
    large = [rng.integers(0, 1 << 40, 300_000), rng.random(300_000), np.arange(300_000, dtype=np.int32)]
    with store.write() as s:
        single = [repo.put_array(s, a) for a in [small, *large]]
    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "4096")
    chunked_arr = rng.random(5000)
    with store.write() as s:
        chunked = repo.put_array(s, chunked_arr)
    assert _count_chunks(store) > 1
    wanted = [single[1], chunked, single[0], single[2], single[1], single[3]]
    with store.read() as s:
        together = repo.get_arrays(s, wanted)
        one_by_one = [repo.get_array(s, h) for h in wanted]
        for a, b, h in zip(together, one_by_one, wanted):
            assert a.dtype == b.dtype and np.array_equal(a, b)
            assert _by_hand(a) == h                      # the bytes hash to the stored address
        with pytest.raises(LookupError, match="not in the store"):
            repo.get_arrays(s, [single[0], "0" * 64])
    # the .npy headers are parsed in the calling thread only (numpy uses ast.literal_eval, and
    # CPython 3.11's compiler failed when two threads ran it at once)
    import threading

    parsed_in = []
    real = repo.array_from_npy
    monkeypatch.setattr(repo, "array_from_npy", lambda stream: (parsed_in.append(threading.current_thread()),
                                                                  real(stream))[1])
    with store.read() as s:
        again = repo.get_arrays(s, wanted)
    assert all(np.array_equal(a, b) for a, b in zip(again, one_by_one))
    assert parsed_in and set(parsed_in) == {threading.current_thread()}
