"""``export_run`` to CSV: the bytes laid out from the stored ids equal Python's ``csv`` writer's.

Reference: the standard library's ``csv.writer(f, lineterminator="\\n")`` (minimal quoting, RFC
4180, 2005) over the node ids and labels read back with ``load_membership`` (ids decoded to
``str``), written row by row: the file, standard output (``-o -``) and ``--align-to`` must give
those bytes, for ids with commas, quotes, non-ASCII characters and 4096 bytes, in a store whose
arrays are in one value or in chunks. Network: the karate club as shipped by networkx (Zachary
1977), its members renamed.
"""

from __future__ import annotations

import csv
import io

import networkx as nx
import numpy as np
import pytest

from workspace.domain import ImportPolicy
from workspace.services import runs


def _python_csv(ids, labels) -> bytes:
    # the standard library's writer, one row at a time (Python csv module; RFC 4180)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["node", "community"])
    for node, label in zip(list(ids), np.asarray(labels).tolist()):
        if label >= 0:
            writer.writerow([node, label])
    return buf.getvalue().encode("utf-8")


NAMES = (["with,comma", 'say "hi"', '"quoted"', "Ärger", "日本語", "😀 face", "a" * 4096, "é" * 2048,
          "station-" + "0" * 31 + "7", " padded ", "semi;colon", "tab\there"]
         + [f"m{i:02d}" for i in range(22)])


@pytest.fixture(params=["one value", "chunks"])
def club(request, store, tmp_path, monkeypatch):
    if request.param == "chunks":
        monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "64")  # a few ids per chunk
    from workspace.services.networks import import_network

    G = nx.karate_club_graph()
    path = tmp_path / "club.csv"
    with open(path, "w", encoding="utf-8", newline="") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["source", "target"])
        writer.writerows((NAMES[u], NAMES[v]) for u, v in G.edges())
    import_network(store, path, project="club", network="karate", policy=ImportPolicy())

    def attach(labels, label):
        f = tmp_path / f"{label}.csv"
        with open(f, "w", encoding="utf-8", newline="") as fh:
            writer = csv.writer(fh, lineterminator="\n")
            writer.writerow(["node", "community"])
            writer.writerows((n, int(c)) for n, c in zip(NAMES, labels) if c >= 0)
        return runs.attach(store, f, "club/karate", label=label)["run"]

    faction = np.array([G.nodes[i]["club"] == "Mr. Hi" for i in range(34)], dtype=int)
    thirds = np.arange(34) % 3
    thirds[[3, 9]] = -1  # two nodes not in the file: left out of the export
    return attach(faction, "clubs"), attach(thirds, "thirds")


def test_export_file_and_stdout_match_python_csv(store, club, tmp_path):
    run_a, run_b = club
    for run in (run_a, run_b):
        ids, labels, summary = runs.load_membership(store, run)
        expected = _python_csv(ids.tolist(), labels)
        out = tmp_path / f"run{run}.csv"
        res = runs.export_run(store, run, out)
        assert out.read_bytes() == expected
        assert res["with_community"] == int(np.count_nonzero(labels >= 0)) and res["nodes"] == 34
        assert res["membership_hash"] == summary["membership_hash"] and res["edges"] is None
        # -o -: a text stream with a byte buffer (standard output) and one without
        raw = io.BytesIO()
        wrapper = io.TextIOWrapper(raw, encoding="utf-8", newline="")
        runs.export_run(store, run, "-", stream=wrapper)
        wrapper.flush()
        assert raw.getvalue() == expected
        text = io.StringIO()
        runs.export_run(store, run, "-", stream=text)
        assert text.getvalue().encode("utf-8") == expected
    assert not list(tmp_path.glob(".*partial*"))  # the atomic write left no temporary file


def test_export_aligned_matches_python_csv(store, club, tmp_path):
    from workspace.services.tracking import aligned_labels

    run_a, run_b = club
    ids, _, _ = runs.load_membership(store, run_b)
    expected = _python_csv(ids.tolist(), aligned_labels(store, run_b, run_a))
    out = tmp_path / "aligned.csv"
    res = runs.export_run(store, run_b, out, align_to=run_a)
    assert out.read_bytes() == expected and res["aligned_to"] == run_a


def test_export_json_and_graphml_unchanged(store, club, tmp_path):
    # the other formats still carry every node id as decoded (reference: json module)
    import json

    run_a, _ = club
    ids, labels, _ = runs.load_membership(store, run_a)
    runs.export_run(store, run_a, tmp_path / "m.json", format="json")
    doc = json.loads((tmp_path / "m.json").read_text(encoding="utf-8"))
    assert [n["id"] for n in doc["nodes"]] == ids.tolist()
    assert [n["community"] for n in doc["nodes"]] == labels.tolist()


def test_an_id_with_a_line_break_is_refused_and_leaves_no_file(store, tmp_path):
    # GraphML carries a line break in an id (the character reference &#10;, XML 1.0 section 4.1);
    # a membership CSV cannot: the export names the file and leaves nothing behind, and -o -
    # writes nothing to the stream
    from workspace.errors import InputError
    from workspace.services.networks import import_network

    path = tmp_path / "nl.graphml"
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n'
                    '<graphml xmlns="http://graphml.graphdrawing.org/xmlns"><graph edgedefault="undirected">'
                    '<node id="a&#10;b"/><node id="c"/><node id="d"/>'
                    '<edge source="a&#10;b" target="c"/><edge source="c" target="d"/></graph></graphml>\n')
    import_network(store, path, project="p", network="n", policy=ImportPolicy())
    f = tmp_path / "labels.csv"
    f.write_text('node,community\n"a\nb",x\nc,x\nd,y\n')
    run = runs.attach(store, f, "p/n", label="two")["run"]
    out = tmp_path / "out.csv"
    with pytest.raises(InputError, match="line break") as err:
        runs.export_run(store, run, out)
    assert str(out) in str(err.value)
    assert not out.exists() and not list(tmp_path.glob(".out.csv.partial*"))
    text = io.StringIO()
    with pytest.raises(InputError, match="line break"):
        runs.export_run(store, run, "-", stream=text)
    assert text.getvalue() == ""
