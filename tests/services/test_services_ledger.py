"""The ledger listing (services.browse.ledger_runs) and `cutbook runs --sort/--filter/--json`.

Quality values are checked against networkx's own modularity of each stored
membership; filters against the plain runs listing filtered in Python.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from workspace.services.store import open_workspace


@pytest.fixture(scope="module")
def demo_store_path(tmp_path_factory) -> Path:
    from workspace.demo.build import build_demo

    path = tmp_path_factory.mktemp("ledger") / "demo.sqlite"
    store = open_workspace(path)
    try:
        build_demo(store)
    finally:
        store.dispose()
    return path


@pytest.fixture
def demo(demo_store_path):
    store = open_workspace(demo_store_path)
    yield store
    store.dispose()


def _graph(store, ref):
    from workspace.services.networks import load_graph

    _, g = load_graph(store, ref)
    G = nx.Graph()
    G.add_nodes_from(g.node_ids.tolist())
    for u, v, w in zip(g.edge_u.tolist(), g.edge_v.tolist(), g.weight.tolist()):
        G.add_edge(g.node_ids[u], g.node_ids[v], weight=w)
    return G


def test_ledger_rows_carry_quality_and_parameter_set(demo):
    from workspace.services.browse import ledger_runs
    from workspace.services.runs import list_runs, load_membership, show_run

    rows = ledger_runs(demo)
    plain = list_runs(demo)
    assert [r["run"] for r in rows] == [r["run"] for r in plain]  # same default order: newest first
    for row, base in zip(rows, plain):
        assert {k: row[k] for k in base} == base  # every key of the plain listing, unchanged
        assert row["param_set"] == show_run(demo, row["run"])["param_set"]
    graphs = {}
    for row in rows:
        if row["status"] != "done":
            continue
        ids, labels, _ = load_membership(demo, row["run"])
        G = graphs.setdefault(row["ref"], _graph(demo, row["ref"]))
        # networkx.algorithms.community.modularity (weighted) of the stored membership
        q = nx.community.modularity(G, [set(ids[labels == c]) for c in np.unique(labels) if c >= 0],
                                    weight="weight")
        assert row["quality"]["modularity"] == pytest.approx(q, abs=1e-9)


def test_ledger_sorts_by_a_measure_and_the_direction(demo):
    from workspace.services.browse import count_ledger_runs, ledger_runs

    by_q = ledger_runs(demo, sort="modularity")
    values = [r["quality"].get("modularity") for r in by_q]
    present = [v for v in values if v is not None]
    assert present == sorted(present, reverse=True)  # larger modularity first
    assert values[:len(present)] == present  # runs without it come last
    up = ledger_runs(demo, sort="conductance")
    cond = [r["quality"]["conductance"] for r in up if "conductance" in r["quality"]]
    assert cond == sorted(cond)  # smaller conductance is better: ascending by default
    down = ledger_runs(demo, sort="conductance", descending=True)
    assert [r["quality"]["conductance"] for r in down if "conductance" in r["quality"]] == sorted(cond,
                                                                                                   reverse=True)
    page = ledger_runs(demo, sort="k", limit=3, offset=2)
    assert [r["run"] for r in page] == [r["run"] for r in ledger_runs(demo, sort="k")][2:5]
    assert count_ledger_runs(demo) == len(by_q)


@pytest.mark.parametrize("words", ["njw", "NJW stations@4", "districts", "co-working@2", "done"])
def test_ledger_text_filter_matches_the_fields(demo, words):
    from workspace.services.browse import count_ledger_runs, ledger_runs
    from workspace.services.runs import list_runs, show_run

    def haystack(r):
        ps = show_run(demo, r["run"])["param_set"] or ""
        return " ".join([r["method"], r["label"] or "", r["ref"], r["status"], ps.split("/", 1)[-1].split("@")[0],
                         r["kind"]]).lower()

    expected = [r["run"] for r in list_runs(demo) if all(w in haystack(r) for w in words.lower().split())]
    got = [r["run"] for r in ledger_runs(demo, text=words)]
    assert got == expected and expected
    assert count_ledger_runs(demo, text=words) == len(expected)
    assert ledger_runs(demo, text="nothing-like-this") == []


def test_ledger_refuses_an_unknown_sort(demo):
    from workspace.errors import UsageError
    from workspace.services.browse import ledger_runs

    with pytest.raises(UsageError, match="cannot sort runs by 'size'"):
        ledger_runs(demo, sort="size")


def test_cli_runs_sort_filter_json(demo_store_path, tmp_path, capsys):
    from workspace.cli import main

    path = tmp_path / "demo.sqlite"
    shutil.copy(demo_store_path, path)

    def run(*argv):
        capsys.readouterr()
        code = main(["--store", str(path), *argv])
        out = capsys.readouterr()
        return code, out.out, out.err

    code, out, _ = run("runs", "--sort", "modularity", "--filter", "stations@4", "--json")
    assert code == 0
    rows = json.loads(out)
    assert rows and all(r["ref"] == "velmora-bikes/stations@4" for r in rows)
    assert {"param_set", "quality"} <= set(rows[0]) and "modularity" in rows[0]["quality"]
    q = [r["quality"]["modularity"] for r in rows]
    assert q == sorted(q, reverse=True)
    code, out, _ = run("runs", "--sort", "modularity", "--asc", "--json")
    q = [r["quality"]["modularity"] for r in json.loads(out) if "modularity" in r["quality"]]
    assert q == sorted(q)
    code, out, _ = run("runs", "velmora-bikes")
    assert code == 0 and "parameter set" in out and "modularity" in out and "districts@1" in out
    code, out, _ = run("runs", "--filter", "zzz-no-such")
    assert code == 0 and "no runs matching 'zzz-no-such'" in out
    code, _, err = run("runs", "--sort", "bogus")
    assert code == 2 and "cannot sort runs by 'bogus'" in err
