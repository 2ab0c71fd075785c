"""Bad inputs: each gives one InputError line naming the file and, where it applies,
the 1-based line (header, blank and comment lines counted).

The files live in tests/data/bad/ (written by tests/data/make_samples.py);
each expected line number is read off the file by hand.
"""

from __future__ import annotations

import gzip
import os
from pathlib import Path

import pytest

from workspace.domain import ImportPolicy
from workspace.errors import InputError
from workspace.io import read_membership, read_network

BAD = Path(__file__).resolve().parents[1] / "data" / "bad"

CASES = [
    # file, policy, expected line (None: no line applies), message fragment
    ("nonnumeric_weight.csv", ImportPolicy(weight="weight"), 5, "weight 'heavy' is not a number"),
    ("nan_weight.csv", ImportPolicy(weight=2), 2, "weight 'NaN' is NaN"),
    ("infinite_weight.tsv", ImportPolicy(weight=2), 5, "weight 'inf' is infinite"),
    ("negative_weight.txt", ImportPolicy(weight=2), 3, "weight '-2' is negative"),
    ("wrong_columns.csv", ImportPolicy(weight=2), 3, "expected 3 fields (as on line 1), found 2"),
    ("invalid_utf8.csv", ImportPolicy(weight=2), 3, "invalid UTF-8 byte 0xff"),
    ("all_zero_weights.csv", ImportPolicy(weight=2), None,
     "no edge left to import (2 record(s) read, 2 zero-weight dropped"),
    ("empty.csv", ImportPolicy(), None, "the file holds no records"),
    ("header_only.csv", ImportPolicy(weight="weight"), 1, "a header but no edge records"),
    ("empty_id.csv", ImportPolicy(), 2, "empty node id"),
    ("entity_bomb.graphml", ImportPolicy(), 3, "refused: the file declares the XML entity 'lol'"),
    ("external_entity.graphml", ImportPolicy(), 2,
     "refused: the file declares the XML external entity 'secret' (file:///etc/hostname)"),
    ("malformed.graphml", ImportPolicy(), 5, "not well-formed XML: mismatched tag"),
    ("asymmetric.graphml", ImportPolicy(weight="weight"), 9,
     "directed input has 2 asymmetric pair(s)"),
    ("negative_weight.graphml", ImportPolicy(weight="weight"), 6, "weight '-4' is negative"),
    ("negative.mtx", ImportPolicy(weight="value"), 5, "matrix entry -2.5 is negative"),
    ("not_square.mtx", ImportPolicy(), None, "the matrix is 2 x 3; an adjacency matrix must be"),
    ("string_weight.json", ImportPolicy(weight="weight"), None,
     "weight '2' (attribute 'weight') is not a number (links[1])"),
    ("invalid.json", ImportPolicy(), 4, "not valid JSON: Expecting ',' delimiter"),
    ("self_loop.csv", ImportPolicy(self_loops="error"), 2,
     "self-loop on node 'b'; choose --self-loops drop|keep"),
    ("duplicate.csv", ImportPolicy(duplicates="error"), 4,
     "duplicate edge 'a' - 'b' (first at line 1)"),
    ("edges.unknown", ImportPolicy(), None, "cannot tell the format from the extension '.unknown'"),
]


@pytest.mark.parametrize("name, policy, line, fragment", CASES, ids=[c[0] for c in CASES])
def test_bad_network_file(name, policy, line, fragment):
    path = BAD / name
    with pytest.raises(InputError) as err:
        read_network(path, policy=policy)
    error = err.value
    assert error.line == line
    assert error.path == str(path)
    prefix = f"{path}:{line}: " if line is not None else f"{path}: "
    assert str(error).startswith(prefix)
    assert fragment in str(error)
    assert "\n" not in str(error)


def test_unknown_extension_lists_formats():
    with pytest.raises(InputError) as err:
        read_network(BAD / "edges.unknown")
    for name in ("csv", "tsv", "edgelist", "graphml", "mtx", "json"):
        assert name in str(err.value)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_network(tmp_path / "absent.csv")
    (tmp_path / "folder.csv").mkdir()
    with pytest.raises(InputError, match="is a directory"):
        read_network(tmp_path / "folder.csv")


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="permission bits do not stop root")
def test_unreadable_file(tmp_path):
    path = tmp_path / "locked.csv"
    path.write_text("a,b\n")
    path.chmod(0)
    with pytest.raises(InputError, match="permission denied"):
        read_network(path)


def test_damaged_gzip(tmp_path):
    data = gzip.compress(b"a,b\nb,c\n" * 100)
    (tmp_path / "cut.csv.gz").write_bytes(data[: len(data) // 2])
    with pytest.raises(InputError, match="damaged gzip data"):
        read_network(tmp_path / "cut.csv.gz")


def test_quoted_line_break_is_refused(tmp_path):
    (tmp_path / "q.csv").write_text('a,b\n"c\nd",e\n')
    with pytest.raises(InputError, match="spans a line break"):
        read_network(tmp_path / "q.csv")


def test_graphml_errors_with_lines(tmp_path):
    head = ('<?xml version="1.0"?>\n<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
            '<key id="w" for="edge" attr.name="weight"/>\n<graph edgedefault="undirected">\n')
    cases = {
        "missing weight": (head + '<edge source="a" target="b"/>\n</graph></graphml>\n', 5,
                           "edge has no 'weight' value"),
        "hyperedge": (head + '<hyperedge><endpoint node="a"/></hyperedge>\n</graph></graphml>\n',
                      5, "hyperedges are not supported"),
        "nested": (head + '<node id="a">\n<graph/></node>\n</graph></graphml>\n', 6,
                   "nested graphs"),
        "no endpoints": (head + '<edge source="a"/>\n</graph></graphml>\n', 5,
                         "<edge> without source and target"),
        "not graphml": ('<?xml version="1.0"?>\n<svg/>\n', 2, "not GraphML"),
        "unknown attribute": (head + '<edge source="a" target="b"/>\n</graph></graphml>\n', None,
                              "no edge attribute named 'mass'"),
    }
    for label, (text, line, fragment) in cases.items():
        path = tmp_path / "g.graphml"
        path.write_text(text)
        weight = "mass" if label == "unknown attribute" else "weight"
        with pytest.raises(InputError) as err:
            read_network(path, policy=ImportPolicy(weight=weight))
        assert fragment in str(err.value), label
        assert err.value.line == line, label


def test_membership_bad_files():
    ids = __import__("numpy").array(["1", "2", "3"])
    with pytest.raises(InputError) as err:
        read_membership(BAD / "membership_unknown_node.csv", ids)
    assert err.value.line == 4 and "node '99' is not in the network" in str(err.value)
    with pytest.raises(InputError) as err:
        read_membership(BAD / "membership_duplicate_node.csv", ids)
    assert err.value.line == 4 and "node '1' is listed twice (first at line 2)" in str(err.value)
    with pytest.raises(InputError) as err:
        read_membership(BAD / "membership_no_header.csv", ids)
    assert err.value.line == 1 and "needs the header line node,community" in str(err.value)


@pytest.mark.parametrize("name, text, policy, line, fragment", [
    ("one.csv", "\n\nalone\nb\n", ImportPolicy(), 3, "expected at least 2 fields"),
    ("garbage.mtx", "%%MatrixMarket matrix coordinate real general\n3 3 2\n1 2 1\n2 x 1\n",
     ImportPolicy(weight="value"), 4, "not a readable Matrix Market file"),
    ("complex.mtx", "%%MatrixMarket matrix coordinate complex general\n2 2 1\n1 2 1 1\n",
     ImportPolicy(), None, "complex matrices are not supported"),
    ("list.json", "[1, 2]", ImportPolicy(), None, "expected a node-link JSON object"),
    ("both.json", '{"nodes": [], "links": [], "edges": []}', ImportPolicy(), None,
     'exactly one of "links" or "edges"'),
    ("float_id.json", '{"nodes": [{"id": 1.5}], "links": []}', ImportPolicy(), None,
     "(nodes[0])"),
    ("no_edges.json", '{"nodes": [{"id": "a"}], "links": []}', ImportPolicy(), None,
     "no edge left to import"),
    ("missing_weight.json",
     '{"nodes": [], "links": [{"source": "a", "target": "b"}]}',
     ImportPolicy(weight="w"), None, "weight attribute 'w' missing (links[0])"),
    ("nul.csv", "a\x00,b\n", ImportPolicy(), None, "NUL character"),
])
def test_more_bad_inputs(tmp_path, name, text, policy, line, fragment):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_network(path, policy=policy)
    assert fragment in str(err.value)
    assert err.value.line == line
    assert str(err.value).startswith(f"{path}:")


def test_column_index_weight_is_refused_for_graphml_and_json():
    from workspace.errors import ParameterError

    data = BAD.parent
    for name in ("karate.graphml", "karate.json"):
        with pytest.raises(ParameterError, match="names an? (edge|link) attribute"):
            read_network(data / name, policy=ImportPolicy(weight=2))
