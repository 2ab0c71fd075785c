"""The import command's order of work: read, canonicalise, hash and compress before the store.

Checks against outside facts: ``networkx.parse_edgelist`` (networkx 3.x) for the graph read,
``hashlib.sha256`` over the documented blob layout (``np.save`` stream, zstd-compressed, decoded
with ``zstandard``) for the stored arrays.
"""

from __future__ import annotations

import hashlib
import io

import networkx as nx
import numpy as np
import zstandard

from workspace.domain import ImportPolicy
from workspace.io import read_network
from workspace.services.networks import prepare_import
from workspace.store.blobs import GRAPH_ARRAYS


def _write(tmp_path, text: str, name: str = "g.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_prepared_hash_and_arrays_match_the_graph(tmp_path):
    lines = ["source,target,weight", "b,a,2.5", "c,b,1", "a,c,4", "d,c,0.5", "é,d,3"]
    path = _write(tmp_path, "\n".join(lines) + "\n")
    prepared = prepare_import(path, policy=ImportPolicy(weight="weight"))
    graph, _ = read_network(path, policy=ImportPolicy(weight="weight"))
    assert prepared.content_hash == graph.content_hash()
    reference = nx.parse_edgelist(lines[1:], delimiter=",", nodetype=str, data=(("weight", float),))
    assert sorted(map(str, prepared.graph.node_ids)) == sorted(reference.nodes)
    assert set(prepared.arrays) == set(GRAPH_ARRAYS)
    # each blob decodes (zstd, then the .npy stream) to the graph's own array
    expected = {"edge_u_blob": graph.edge_u, "edge_v_blob": graph.edge_v, "weight_blob": graph.weight}
    for column, array in expected.items():
        blob = prepared.arrays[column]
        raw = zstandard.ZstdDecompressor().decompress(blob.data, max_output_size=blob.raw_size)
        assert np.array_equal(np.load(io.BytesIO(raw), allow_pickle=False), array)
        buf = io.BytesIO()
        np.save(buf, np.ascontiguousarray(array), allow_pickle=False)
        assert raw == buf.getvalue()
        h = hashlib.sha256(f"{blob.dtype}:{blob.length}\0".encode())
        h.update(np.ascontiguousarray(array).tobytes())
        assert blob.hash == h.hexdigest()


def test_large_arrays_are_stored_as_the_same_npy_stream(tmp_path):
    # above the 4 MiB line where arrays are compressed from their own memory
    from workspace.store.blobs import decode_array, encode_array

    rng = np.random.default_rng(3)
    for array in (np.arange(1_000_000, dtype=np.int64) * 7, rng.random(700_000)):
        blob = encode_array(array)
        buf = io.BytesIO()
        np.save(buf, array, allow_pickle=False)
        assert blob.raw_size == len(buf.getvalue())
        raw = zstandard.ZstdDecompressor().decompress(blob.data, max_output_size=blob.raw_size)
        assert raw == buf.getvalue()
        assert np.array_equal(decode_array(blob.codec, blob.data, blob.raw_size), array)


def test_a_bad_file_leaves_no_store_behind(tmp_path, capsys):
    from workspace.cli import main

    fresh = tmp_path / "fresh" / "store.sqlite"
    fresh.parent.mkdir()
    bad = _write(tmp_path, "a,b,1\nb,c,not-a-number\n")
    code = main(["--store", str(fresh), "import", str(bad), "--project", "p", "--network", "n", "--weight", "2"])
    err = capsys.readouterr().err
    assert code != 0 and f"{bad}:2:" in err and "not a number" in err
    assert not fresh.exists()  # the file is read before the store is opened or created


def test_a_bad_name_is_refused_before_the_file_is_read(cli, tmp_path, store_path):
    missing = tmp_path / "nowhere.csv"
    r = cli("import", missing, "--project", "p q", "--network", "n")
    assert r.code == 2 and "project name" in r.err and "no such file" not in r.err


def test_decode_values_reads_blobs_without_numpy_as_numpy_does():
    # the .npy stream read with struct equals numpy's own reading (numpy.load(...).tolist())
    from workspace.store.blobs import decode_array, decode_values, encode_array

    rng = np.random.default_rng(5)
    arrays = [rng.random(9), np.arange(-3, 4, dtype=np.int64), np.zeros(0), np.array([1, -2], np.int8),
              rng.random(4).astype(np.float32), np.array([True, False]), np.arange(600_000)]
    for array in arrays:
        blob = encode_array(array)
        values = decode_values(blob.codec, blob.data, blob.raw_size)
        assert values == decode_array(blob.codec, blob.data, blob.raw_size).tolist()
        assert values == array.tolist()
