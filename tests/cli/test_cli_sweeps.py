"""CLI contract for sweeps: --json keys, list/show/extend/diff/delete, embeddings report and prune,
bad input, progress on stderr, Ctrl-C keeps finished runs and marks the sweep cancelled.
Outside references: networkx (karate club, modularity), scikit-learn (adjusted_rand_score)."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import networkx as nx
import pytest

from cli_processes import ctrl_c_as_at_a_terminal
from graphs import adjacency_to_csv

REPO = Path(__file__).resolve().parents[2]

SWEEP_KEYS = {"sweep", "ref", "method", "params", "ks", "vary", "seed", "seeds", "perturb", "status", "error",
              "created", "by", "finished", "tasks", "points", "recommendations", "recommended_k", "splits", "stable_ari"}
POINT_KEYS = {"k", "value", "run", "runs", "k_found", "modularity", "normalized_cut", "conductance", "coverage",
              "eigengap", "repeats", "ari_mean", "ari_sd", "vi_mean", "vi_sd", "stable", "embedding"}


@pytest.fixture
def karate(cli, tmp_path):
    # Zachary (1977) karate club as shipped by networkx
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    f = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    assert cli("import", f, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    return G


def test_sweep_json_contract_and_modularity_against_networkx(cli, karate, tmp_path):
    res = cli("sweep", "club/karate", "--method", "njw", "--k", "2..5", "--seeds", "2", "--json")
    assert res.code == 0, res.err
    doc = res.json
    assert set(doc) == SWEEP_KEYS and doc["tasks"]["done"] == 8
    assert all(set(p) == POINT_KEYS for p in doc["points"])
    assert set(doc["recommendations"][0]) == {"value", "recommended", "candidates", "stable", "stability_measured",
                                              "notes"}
    assert set(doc["splits"][0]) == {"value", "from_k", "to_k", "communities"}
    assert "tasks" in res.err and "8/8" in res.err           # progress on stderr, JSON alone on stdout
    for p in doc["points"]:
        assert cli("show", str(p["run"]), "--json").json["quality"]["modularity"] == p["modularity"]
        path = tmp_path / f"m{p['run']}.csv"
        assert cli("export", str(p["run"]), "-o", str(path)).code == 0
        rows = [line.split(",") for line in path.read_text().splitlines()[1:]]
        comms: dict[str, set] = {}
        for node, c in rows:
            comms.setdefault(c, set()).add(int(node[1:]))
        # networkx.community.modularity (Newman & Girvan 2004) of the stored membership
        assert p["modularity"] == pytest.approx(nx.community.modularity(karate, list(comms.values()),
                                                                        weight="weight"), abs=1e-12)


def test_a_sweep_names_who_started_it(cli, karate):
    """A sweep records its user (revision 0009) as runs do: `--user`, shown by list and show."""
    assert cli("sweep", "club/karate", "--method", "njw", "--k", "2,3", "--user", "ana", "--json").code == 0
    (row,) = cli("sweeps", "--json").json
    assert row["by"] == "ana"
    assert cli("sweeps", "show", str(row["sweep"]), "--json").json["by"] == "ana"
    assert "by ana" in cli("sweeps", "show", str(row["sweep"])).out
    runs = cli("runs", "club/karate", "--json").json
    assert runs and {r["by"] for r in runs} == {"ana"}   # the same user as its runs


def test_list_show_extend_diff_delete_and_embeddings(cli, karate):
    assert cli("sweep", "club/karate", "--method", "njw", "--k", "2,3", "--json").code == 0
    listed = cli("sweeps", "list", "club/karate", "--json").json
    assert [r["sweep"] for r in listed] == [1] and listed[0]["tasks"] == {
        "total": 2, "done": 2, "failed": 0, "cancelled": 0, "running": 0, "interrupted": 0}
    ext = cli("sweeps", "extend", "1", "--k", "4..5", "--seeds", "2", "--json")
    assert ext.code == 0, ext.err
    assert ext.json["ks"] == [2, 3, 4, 5] and ext.json["tasks"]["done"] == 8
    old_runs = {p["k"]: p["run"] for p in cli("sweeps", "show", "1", "--json").json["points"]}
    assert old_runs[2] == 1 and old_runs[3] == 2                   # the first runs were not recomputed
    split = cli("sweeps", "show", "1", "--split", "2:4", "--json").json
    assert split["from_k"] == 2 and split["to_k"] == 4 and split["communities"]
    text = cli("sweeps", "show", "1")
    assert text.code == 0 and "recommended k=" in text.out and "k=2 -> k=3" in text.out
    assert cli("sweep", "club/karate", "--method", "shi-malik", "--k", "3..4", "--json").code == 0
    diff = cli("sweeps", "diff", "1", "2", "--json").json
    assert [r["k"] for r in diff["points"]] == [3, 4] and diff["only_in_a"] == [{"k": 2, "value": None},
                                                                                  {"k": 5, "value": None}]
    emb = cli("embeddings", "--json").json
    assert emb["count"] == 2 and {e["n_vectors"] for e in emb["embeddings"]} == {3, 5}
    assert cli("embeddings", "club/karate@1", "--prune", "--json").json["removed"] == 2
    assert cli("embeddings", "--json").json["count"] == 0
    assert cli("rerun", "1", "--json").json["identical"] is True     # solved again after the prune
    assert cli("verify").code == 0
    gone = cli("sweeps", "delete", "2", "--json").json
    assert gone == {"sweep": 2, "deleted": True, "runs_kept": 2}
    assert [r["sweep"] for r in cli("sweeps", "list", "--json").json] == [1]
    assert cli("sweeps", "--json").json == cli("sweeps", "list", "--json").json  # no action: the list


def test_bad_input_one_line_errors_and_nothing_recorded(cli, karate, store_path):
    cases = [(("--method", "njw"), 2), (("--method", "njw", "--k", "1..3"), 2), (("--method", "njw", "--k", "x"), 2),
             (("--method", "louvain", "--k", "2..3"), 2), (("--method", "njw", "--k", "2..3", "--vary", "zz=1"), 2),
             (("--method", "nope", "--k", "2..3"), 2)]
    for argv, code in cases:
        res = cli("sweep", "club/karate", *argv)
        assert res.code == code, (argv, res.err)
        assert res.err.count("\n") == 1 and res.err.startswith("cutbook: error:"), res.err
    assert cli("sweep", "club/none", "--method", "njw", "--k", "2..3").code == 3
    assert cli("sweeps", "show", "9").code == 3
    con = sqlite3.connect(store_path)
    assert con.execute("SELECT count(*) FROM sweeps").fetchone()[0] == 0
    assert con.execute("SELECT count(*) FROM runs").fetchone()[0] == 0


@pytest.mark.slow
def test_ctrl_c_keeps_finished_runs_and_marks_the_sweep_cancelled(tmp_path):
    from workspace.spectral.generators import planted_partition

    A, _ = planted_partition(6000, 4, c_in=24.0, c_out=3.0, seed=1)
    f = adjacency_to_csv(A, tmp_path / "g.csv")
    store = tmp_path / "s.sqlite"
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    base = [sys.executable, "-m", "workspace.cli", "--store", str(store)]
    subprocess.run(base + ["import", str(f), "--project", "p", "--network", "g"], check=True, env=env,
                   capture_output=True)
    proc = subprocess.Popen(base + ["sweep", "p/g", "--method", "njw", "--k", "2..20", "--seeds", "3",
                                    "--set", "n_init=30"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env, start_new_session=True, preexec_fn=ctrl_c_as_at_a_terminal)
    deadline = time.monotonic() + 120
    done = 0
    while time.monotonic() < deadline and done < 2:
        assert proc.poll() is None, proc.communicate()
        time.sleep(0.2)
        try:
            con = sqlite3.connect(store, timeout=5)
            done = con.execute("SELECT count(*) FROM runs WHERE status = 'done'").fetchone()[0]
            con.close()
        except sqlite3.OperationalError:
            pass
    assert done >= 2, "the sweep never finished two tasks"
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    con = sqlite3.connect(store)
    status, error = con.execute("SELECT status, error FROM sweeps").fetchone()
    assert status == "cancelled" and "cancelled after" in error
    statuses = [r[0] for r in con.execute("SELECT status FROM runs ORDER BY id")]
    assert statuses.count("done") >= 2 and "running" not in statuses, statuses
    assert set(statuses) <= {"done", "cancelled"}, statuses
    linked = con.execute("SELECT count(*) FROM sweep_runs").fetchone()[0]
    assert linked == len(statuses)
