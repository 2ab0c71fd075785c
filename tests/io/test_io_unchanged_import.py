"""An import whose content equals the latest version reports the file just read.

The second file below holds the same triangle-plus-pendant graph as the first, but in another
format (tab-separated, other column names, other line and endpoint order, one repeated pair):
the store makes no new version, and the report shown is the second file's own - its name,
format, record count, duplicate count and column notes - with the matched version named.
"""

from __future__ import annotations

import json

import networkx as nx

from tests_support import dump_store, write_edges  # noqa: E402  (tests/support via conftest)


def _files(tmp_path):
    first = write_edges(tmp_path / "ferries.csv",
                        [("x", "y", 2.0), ("y", "z", 1.0), ("z", "x", 3.0), ("z", "w", 1.0)],
                        header="source,target,weight")
    second = write_edges(tmp_path / "crossings.tsv",
                         [("w", "z", 1.0), ("x", "z", 3.0), ("y", "x", 2.0), ("z", "y", 1.0),
                          ("y", "z", 1.0)],
                         header="from,to,minutes", sep="\t")
    return first, second


def test_unchanged_import_reports_the_file_just_read(cli, tmp_path, store_path):
    first, second = _files(tmp_path)
    r1 = cli("import", first, "--project", "harbour", "--network", "ferries", "--weight", "weight",
             "--json")
    assert r1.code == 0, r1.err
    assert r1.json["new_version"] is True
    before = dump_store(store_path)
    r2 = cli("import", second, "--project", "harbour", "--network", "ferries", "--weight", "minutes",
             "--json")
    assert r2.code == 0, r2.err
    doc = r2.json
    assert doc["new_version"] is False and doc["version"] == 1 and doc["ref"] == "harbour/ferries@1"
    assert doc["content_hash"] == r1.json["content_hash"]
    assert dump_store(store_path) == before  # nothing written
    report = doc["report"]
    # the second file's own facts, not version 1's (ferries.csv, csv, 4 records)
    assert report["source"] == str(second)
    assert report["format"] == "tsv" and report["records_read"] == 5
    assert report["duplicates_merged"] == 1
    assert any("minutes" in note for note in report["notes"])
    assert not any("'weight'" in note for note in report["notes"])
    assert doc["policy"]["weight"] == "minutes"
    # the graph counts agree with networkx reading the second file (networkx.read_edgelist)
    lines = second.read_text().splitlines()[1:]
    g = nx.parse_edgelist(lines, delimiter="\t", nodetype=str, data=(("minutes", float),))
    assert (doc["nodes"], doc["edges"]) == (g.number_of_nodes(), g.number_of_edges())


def test_unchanged_import_human_text_names_file_and_matched_version(cli, tmp_path):
    first, second = _files(tmp_path)
    assert cli("import", first, "--project", "harbour", "--network", "ferries", "--weight",
               "weight").code == 0
    r = cli("import", second, "--project", "harbour", "--network", "ferries", "--weight", "minutes")
    assert r.code == 0, r.err
    head = r.out.splitlines()[0]
    assert "unchanged" in head and str(second) in head
    assert "matched version 1" in head and "no new version" in head
    assert "crossings.tsv (tsv, 5 records)" in r.out
    assert "ferries.csv" not in r.out
    assert "column 'minutes'" in r.out
    # the stored version still carries the first file's report
    shown = cli("show", "harbour/ferries@1", "--json").json
    assert shown["report"]["source"] == str(first) and shown["source"] == "ferries.csv"
    assert json.dumps(shown["report"]).count("crossings") == 0
