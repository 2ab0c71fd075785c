"""Membership files: write -> read round trip, renumbering, and outside readers
(Python's csv module, json, networkx.read_graphml) on the files written.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from workspace.domain import GraphData
from workspace.errors import InputError, ParameterError
from workspace.io import read_membership, write_membership

IDS = np.array(sorted(["007", "7", " padded ", "with,comma", 'say "hi"', "Ärger", "日本", "z"]))


def canonical(labels: np.ndarray) -> np.ndarray:
    """Renumber by first appearance in node order (-1 kept): written independently of the
    code under test, by a plain loop."""
    mapping: dict[int, int] = {}
    out = []
    for x in labels.tolist():
        if x < 0:
            out.append(-1)
            continue
        mapping.setdefault(x, len(mapping))
        out.append(mapping[x])
    return np.array(out, dtype=np.int64)


@pytest.mark.parametrize("fmt", ["csv", "json", "graphml"])
def test_round_trip(tmp_path, fmt):
    labels = canonical(np.array([0, 0, 1, -1, 2, 1, 0, 3]))
    path = tmp_path / f"m.{fmt}"
    written = write_membership(path, IDS, labels, format=fmt)
    assert written == 7
    read_back, info = read_membership(path, IDS)
    assert np.array_equal(read_back, labels)
    assert read_back.dtype == np.int64
    assert info["missing"] == 1
    assert info["communities"] == {0: "0", 1: "1", 2: "2", 3: "3"}


def test_names_become_labels_by_first_appearance(tmp_path):
    path = tmp_path / "m.csv"
    rows = [("z", "blue"), ("007", "red"), ("7", "green"), ("Ärger", "red"), (" padded ", "blue")]
    with open(path, "w", newline="", encoding="utf-8") as out:
        writer = csv.writer(out)
        writer.writerow(["community", "extra", "node"])
        writer.writerows((c, "x", n) for n, c in rows)
    labels, info = read_membership(path, IDS)
    name_of = dict(rows)
    expected_names = [name_of.get(x) for x in IDS.tolist()]
    codes = {}
    expected = [-1 if n is None else codes.setdefault(n, len(codes)) for n in expected_names]
    assert labels.tolist() == expected
    assert info["communities"] == {v: k for k, v in codes.items()}
    assert info["missing"] == len(IDS) - len(rows)


def test_csv_is_plain_rfc4180(tmp_path):
    labels = canonical(np.arange(len(IDS)) % 3)
    write_membership(tmp_path / "m.csv", IDS, labels)
    with open(tmp_path / "m.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))  # Python's csv module as the outside reader
    assert rows[0] == ["node", "community"]
    assert rows[1:] == [[i, str(c)] for i, c in zip(IDS.tolist(), labels.tolist())]


def test_json_layout(tmp_path):
    labels = canonical(np.array([0, 1, 0, 1, 0, 1, 0, -1]))
    write_membership(tmp_path / "m.json", IDS, labels, format="json")
    document = json.loads((tmp_path / "m.json").read_text(encoding="utf-8"))
    assert document == {"nodes": [{"id": i, "community": c} for i, c in
                                   zip(IDS.tolist(), labels.tolist()) if c >= 0]}


def test_graphml_with_graph_reads_in_networkx(tmp_path):
    graph = GraphData(node_ids=np.array(["a", "b", "c", "d"]), edge_u=np.array([0, 1, 2]),
                      edge_v=np.array([1, 2, 3]), weight=np.array([1.5, 2.0, 0.25]))
    labels = np.array([0, 0, 1, 1])
    write_membership(tmp_path / "m.graphml", graph.node_ids, labels, format="graphml",
                     graph=graph)
    G = nx.read_graphml(tmp_path / "m.graphml")  # networkx.read_graphml as reference reader
    assert nx.get_node_attributes(G, "community") == {"a": 0, "b": 0, "c": 1, "d": 1}
    assert {frozenset((u, v)): d["weight"] for u, v, d in G.edges(data=True)} == {
        frozenset(("a", "b")): 1.5, frozenset(("b", "c")): 2.0, frozenset(("c", "d")): 0.25}
    assert np.array_equal(read_membership(tmp_path / "m.graphml", graph.node_ids)[0], labels)


def test_write_errors(tmp_path):
    with pytest.raises(ParameterError):
        write_membership(tmp_path / "m.csv", IDS, np.zeros(3, dtype=int))
    with pytest.raises(ParameterError):
        write_membership(tmp_path / "m.txt", IDS, np.zeros(len(IDS), dtype=int), format="txt")
    with pytest.raises(InputError, match="line break"):
        write_membership(tmp_path / "m.csv", np.array(["a\nb"]), np.array([0]))


def test_read_errors(tmp_path):
    path = tmp_path / "m.csv"
    path.write_text("node,community\n007,a\n7,\n")
    with pytest.raises(InputError) as err:
        read_membership(path, IDS)
    assert err.value.line == 3 and "empty community" in str(err.value)
    path.write_text("node,community\n007,a\n7,b,extra\n")
    with pytest.raises(InputError) as err:
        read_membership(path, IDS)
    assert err.value.line == 3 and "expected 2 fields" in str(err.value)
    with pytest.raises(InputError, match="membership format"):
        read_membership(tmp_path / "m.parquet", IDS)


BAD = Path(__file__).resolve().parents[1] / "data" / "bad"


@pytest.mark.parametrize("name,line,message", [
    # the network reader's cases of tests/io/test_io_bad_inputs.py (lines counted by hand in the files)
    ("entity_bomb.graphml", 3, "refused: the file declares the XML entity 'lol'"),
    ("external_entity.graphml", 2, "refused: the file declares the XML external entity 'secret'"),
    ("malformed.graphml", 5, "not well-formed XML: mismatched tag"),
])
def test_graphml_membership_and_node_table_refusals_name_the_line(name, line, message):
    # a membership or node-table GraphML is read by the same guarded parser as a network: the same
    # refusal, with its file and line (defusedxml refuses entity declarations and external references)
    from workspace.io.node_data import read_node_table

    path = BAD / name
    for read in (lambda: read_membership(path, IDS, format="graphml"),
                 lambda: read_node_table(path, format="graphml")):
        with pytest.raises(InputError) as info:
            read()
        err = info.value
        assert message in err.message and err.line == line and str(path) in str(err), str(err)


@pytest.mark.parametrize("fmt", ["csv", "json", "graphml"])
def test_packed_ids_read_as_the_decoded_ones(tmp_path, fmt):
    """``attach`` matches a file against the version's ids as stored (``PackedNodeIds``, UTF-8
    bytes and offsets, never decoded): the labels must be those of the decoded ids, and those of a
    plain Python reading of the file (csv module, first-appearance numbering by a loop)."""
    from workspace.domain import PackedNodeIds, encode_node_ids

    ids = np.array(sorted(list(IDS) + ["x" * 4096, "ü" * 1500]))
    labels = canonical(np.array([0, 1, 1, -1, 2, 0, 3, 2, 1, -1]))
    path = tmp_path / f"m.{fmt}"
    write_membership(path, ids, labels, format=fmt)
    offsets, data = encode_node_ids(ids)
    packed = PackedNodeIds(offsets, data)
    got, info = read_membership(path, packed)
    want, want_info = read_membership(path, ids)
    assert np.array_equal(got, want) and info == want_info
    assert np.array_equal(got, labels)
    if fmt == "csv":
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        by_id = {r["node"]: r["community"] for r in rows}
        names = [by_id.get(i) for i in ids.tolist()]
        first: dict[str, int] = {}
        expect = [-1 if c is None else first.setdefault(c, len(first)) for c in names]
        assert got.tolist() == expect


def test_packed_ids_report_an_unknown_node_at_its_line(tmp_path):
    from workspace.domain import PackedNodeIds, encode_node_ids

    path = tmp_path / "m.csv"
    path.write_text("node,community\n7,a\nnot-there,b\n", encoding="utf-8")
    offsets, data = encode_node_ids(IDS)
    with pytest.raises(InputError) as err:
        read_membership(path, PackedNodeIds(offsets, data))
    assert err.value.line == 3 and "not-there" in str(err.value)


@pytest.mark.parametrize("packed", [False, True])
def test_every_node_in_canonical_order_reads_as_the_same_records_shuffled(tmp_path, packed):
    """A file listing every node in the network's own order (what ``cutbook export`` writes) is
    read without a lookup; the labels must be those of the same records in another order (read by
    lookup) and of a plain Python reading (csv module, first-appearance numbering by a loop). A
    file of n records that is not the node list (one node twice) still takes the lookup and names
    the repeat's line."""
    import random

    from workspace.domain import PackedNodeIds, encode_node_ids

    ids = np.array(sorted(list(IDS) + ["x" * 4096, "ü" * 1500]))
    names = ["north", "south", "north", "east", "south", "west", "east", "north", "west", "south"]
    rows = list(zip(ids.tolist(), names))
    known = PackedNodeIds(*encode_node_ids(ids)) if packed else ids

    def write(path, records):
        with open(path, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["node", "community"])
            w.writerows(records)
        return path

    in_order, _ = read_membership(write(tmp_path / "ordered.csv", rows), known)
    shuffled = rows[:]
    random.Random(3).shuffle(shuffled)
    by_lookup, _ = read_membership(write(tmp_path / "shuffled.csv", shuffled), known)
    first: dict[str, int] = {}
    expect = [first.setdefault(c, len(first)) for c in names]
    assert in_order.tolist() == by_lookup.tolist() == expect
    twice = rows[:]
    twice[5] = rows[2]
    with pytest.raises(InputError) as err:
        read_membership(write(tmp_path / "twice.csv", twice), known)
    assert err.value.line == 7 and "listed twice (first at line 4)" in str(err.value)
