"""CLI contract of ``cutbook diff`` for fine partitions: sparse JSON cells, moved nodes as rows,
the dense table only on request for small tables, and a text output cut to the largest rows.

References: sklearn.metrics.cluster.contingency_matrix (sparse and dense) for the table,
scipy.optimize.linear_sum_assignment for the matching that decides moved nodes.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.metrics.cluster import contingency_matrix


def _ring(tmp_path, n):
    path = tmp_path / "ring.csv"
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("source,target\n")
        fh.writelines(f"v{i:04d},v{(i + 1) % n:04d}\n" for i in range(n))
    return path


def _membership(tmp_path, name, labels):
    path = tmp_path / f"{name}.csv"
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("node,community\n")
        fh.writelines(f"v{i:04d},{c}\n" for i, c in enumerate(labels))
    return path


def _stored(cli, tmp_path, run):
    """The run's membership as stored (labels renumbered by first appearance)."""
    out = tmp_path / f"run{run}.csv"
    assert cli("export", run, "--format", "csv", "-o", out).code == 0
    with open(out, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    rows.sort(key=lambda r: r["node"])
    return [r["node"] for r in rows], np.array([int(r["community"]) for r in rows])


@pytest.fixture
def fine_runs(cli, tmp_path):
    n, k = 1200, 150
    assert cli("import", _ring(tmp_path, n), "--project", "p", "--network", "ring").code == 0
    rng = np.random.default_rng(7)
    a = rng.integers(0, k, n)
    b = rng.permutation(k)[a]
    moved = rng.random(n) < 0.15
    b[moved] = rng.integers(0, k, int(moved.sum()))
    runs = []
    for name, lab in (("a", a), ("b", b)):
        r = cli("attach", _membership(tmp_path, name, lab), "--to", "p/ring", "--label", name, "--json")
        assert r.code == 0, r.err
        runs.append(r.json["run"])
    return runs


def test_diff_json_is_sparse_and_moved_nodes_are_rows(cli, tmp_path, fine_runs):
    ra, rb = fine_runs
    res = cli("diff", ra, rb, "--json")
    assert res.code == 0, res.err
    d = json.loads(res.out)
    ids, a = _stored(cli, tmp_path, ra)
    _, b = _stored(cli, tmp_path, rb)
    c = d["contingency"]
    # cells [a, b, count] by label == sklearn's sparse contingency matrix
    ref = contingency_matrix(a, b, sparse=True).todok()
    rows, cols = np.unique(a).tolist(), np.unique(b).tolist()
    assert {(x, y): n for x, y, n in c["cells"]} == \
        {(rows[i], cols[j]): int(v) for (i, j), v in ref.items()}
    assert c["nnz"] == ref.nnz and c["shape"] == list(ref.shape) and "counts" not in c
    # moved nodes: [node, from, to, from_match] rows; a node moved when its B community is
    # not the one matched to its A community (matching by scipy's linear_sum_assignment; this
    # table has no ties at the optimum, so the pairs are unique)
    dense = contingency_matrix(a, b)
    ri, ci = linear_sum_assignment(dense, maximize=True)
    match = {rows[i]: cols[j] for i, j in zip(ri, ci) if dense[i, j] > 0}
    assert {m["a"]: m["b"] for m in d["matches"]} == match
    expected = [[v, int(x), int(y), match.get(int(x))] for v, x, y in zip(ids, a, b)
                if match.get(int(x)) != int(y)]
    assert d["moved_nodes"] == expected and d["moved"] == len(expected)


def test_dense_table_only_on_request_and_only_when_small(cli, tmp_path, fine_runs):
    ra, rb = fine_runs
    # 150 x 150 = 22,500 cells: over the dense limit -> a one-line usage error, no JSON
    big = cli("diff", ra, rb, "--json", "--dense-table")
    assert big.code == 2 and big.out == ""
    assert "dense form" in big.err and len(big.err.strip().splitlines()) == 1
    # a coarse pair of runs: the dense counts equal sklearn's dense contingency matrix
    rng = np.random.default_rng(8)
    a = rng.integers(0, 4, 1200)
    b = np.where(rng.random(1200) < 0.3, rng.integers(0, 3, 1200), a % 3)
    runs = [cli("attach", _membership(tmp_path, f"c{i}", lab), "--to", "p/ring", "--label", f"c{i}",
                "--json").json["run"] for i, lab in enumerate((a, b))]
    d = cli("diff", *runs, "--json", "--dense-table").json
    _, sa = _stored(cli, tmp_path, runs[0])
    _, sb = _stored(cli, tmp_path, runs[1])
    assert d["contingency"]["counts"] == contingency_matrix(sa, sb).tolist()


def test_diff_text_totals_first_then_largest_rows_and_the_rest_counted(cli, fine_runs):
    ra, rb = fine_runs
    d = cli("diff", ra, rb, "--json").json
    res = cli("diff", ra, rb, "--limit", "5")
    assert res.code == 0, res.err
    lines = res.out.splitlines()
    head = "\n".join(lines[:10])
    for needle in ("ARI", "moved nodes:", "matched communities:", "events:", "contingency:"):
        assert needle in head
    assert f"and {len(d['matches']) - 5:,} more matched pairs" in res.out
    assert f"and {d['contingency']['nnz'] - 5:,} more non-zero cells" in res.out
    assert f"and {d['moved'] - 5:,} more moved nodes" in res.out
    # the matched pairs shown are the five largest overlaps
    top = sorted((m["overlap"] for m in d["matches"]), reverse=True)[:5]
    start = next(i for i, x in enumerate(lines) if x.startswith("matched communities, largest"))
    shown = [int(x.split()[2]) for x in lines[start + 1:] if x.strip() and x.split()[0].isdigit()][:5]
    assert shown == top
    # largest cells: the top count is the largest cell of the table
    assert str(max(n for _, _, n in d["contingency"]["cells"])) in res.out


def test_diff_of_similar_memberships_loads_no_solver(cli, store_path, tmp_path):
    # Two stored memberships that mostly agree: the command imports neither scipy (no
    # assignment solver is needed: the exchange bound settles every pair) nor the spectral
    # engine, rich or textual. Checked in a fresh interpreter.
    import os
    import subprocess
    import sys

    n, k = 1200, 40
    assert cli("import", _ring(tmp_path, n), "--project", "p", "--network", "ring").code == 0
    rng = np.random.default_rng(9)
    a = rng.integers(0, k, n)
    b = rng.permutation(k)[a]
    moved = rng.random(n) < 0.03
    b[moved] = rng.integers(0, k, int(moved.sum()))
    runs = [cli("attach", _membership(tmp_path, f"s{i}", lab), "--to", "p/ring", "--label", f"s{i}",
                "--json").json["run"] for i, lab in enumerate((a, b))]
    code = (
        "import contextlib, io, sys\n"
        "from workspace.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()) as buf:\n"
        f"    rc = main(['--store', {str(store_path)!r}, 'diff', '{runs[0]}', '{runs[1]}', '--json'])\n"
        "heavy = sorted(m for m in sys.modules if m.split('.')[0] in ('scipy', 'rich', 'textual', 'sklearn')"
        " or m.startswith('workspace.spectral'))\n"
        "print(rc, len(buf.getvalue()) > 0, heavy)\n"
    )
    repo = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                         env={**os.environ, "PYTHONPATH": repo})
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "0 True []"


def test_diff_json_layout_round_trips_awkward_values():
    # The compact row layout must stay valid JSON for any node id: quotes, brackets, commas,
    # newlines, tabs, non-ASCII. Reference: the standard library's json.loads gives back the
    # document (common practice: a writer is checked by an independent reader).
    from workspace.cli.diffs import _as_json_doc, _render

    ids = ['a"b', "c],[d", "e\nf", "g\th", "ñø✓", "", "x,y", "\\"]
    doc = {
        "ari": 0.5, "nmi": float("nan"), "matches": [{"a": 0, "b": 1, "overlap": 3}],
        "events": [{"kind": "split", "a": [0], "b": [1, 2], "parts": [{"b": 1}, {"b": 2}]}],
        "moved_nodes": [[v, i, "unassigned" if i % 2 else i + 1, None if i % 3 else 0]
                        for i, v in enumerate(ids)],
        "contingency": {"rows": ["absent", 0], "cols": [0, 1], "cells": [["absent", 0, 2], [0, 1, 5]],
                        "row_sizes": [2, 5], "col_sizes": [2, 5]},
        "only_in_a_nodes": ids, "steps_like": [],
    }
    text = _render(_as_json_doc(doc), "")
    back = json.loads(text)
    expected = dict(doc, nmi=None)  # non-finite floats become null
    assert back == expected
    assert len(text.splitlines()) > len(ids)  # one row per line, not one value per line
