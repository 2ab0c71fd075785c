"""Services behind the housekeeping commands: annotation replay, run deletion checks, members of
runs with unassigned nodes, the comparison matrix's symmetry, and 'did you mean' suggestions."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score

from graphs import import_adjacency
from workspace.errors import ConflictError, NotFoundError, UsageError


@pytest.fixture
def ring(store, tmp_path):
    """A ring of 12 nodes (v000000 … v000011), unit weights."""
    import scipy.sparse as sp

    n = 12
    i = np.arange(n)
    A = sp.csr_array((np.ones(n), (i, (i + 1) % n)), shape=(n, n))
    import_adjacency(store, A + A.T, tmp_path, project="p", network="ring")
    return store


def _run(store, k=2, method="njw"):
    from workspace.services import runs

    spec = runs.prepare_run(store, "p/ring", method=method, k=k)
    return runs.launch(store, spec)["run"]


def test_tag_replay_follows_event_order(ring):
    from workspace.services import annotations as ann

    run = _run(ring)
    ann.tag(ring, run, ["a", "b"])
    ann.untag(ring, run, ["a"])
    ann.tag(ring, run, ["a"])
    ann.untag(ring, run, ["b"])
    doc = ann.annotations_of(ring, str(run))
    # replay by hand: +a +b -a +a -b  ->  {a}
    assert doc["tags"] == ["a"]
    assert [(e["action"], e["text"]) for e in doc["history"]] == [
        ("tag", "a"), ("tag", "b"), ("untag", "a"), ("tag", "a"), ("untag", "b")]
    with ring.read() as s:
        assert ann.current_for(s, "run", [run, 999]) == {run: {"tags": ["a"], "notes": []}}
    with pytest.raises(UsageError):
        ann.tag(ring, run, [])
    with pytest.raises(UsageError):
        ann.tag(ring, "ring", ["x"])  # neither a run id nor P/N


def test_version_target_defaults_to_latest_and_params_need_the_flag(ring, tmp_path):
    from workspace.services import annotations as ann
    from workspace.services.params import save_params

    assert ann.tag(ring, "p/ring", ["t"])["target"] == "p/ring@1"
    save_params(ring, "p/two", method="njw", k=2)
    with pytest.raises(NotFoundError, match="add --params"):
        ann.tag(ring, "p/two", ["x"])
    assert ann.add_note(ring, "p/two", "n", params=True)["target"] == "p/two@1"


def test_delete_runs_refuses_running_runs(ring):
    from sqlalchemy import update

    from workspace.services.delete import delete_runs
    from workspace.store.schema import Run

    run = _run(ring)
    with ring.write() as s:  # as if another process were still computing it
        s.execute(update(Run).where(Run.id == run).values(status="running"))
    with pytest.raises(ConflictError, match="still running"):
        delete_runs(ring, [run])
    with ring.read() as s:
        assert s.get(Run, run) is not None


def test_members_list_unassigned_nodes_of_an_attached_file(ring, tmp_path):
    from workspace.services.members import run_members
    from workspace.services.runs import attach

    f = tmp_path / "part.csv"
    f.write_text("node,community\n" + "".join(f"v{i:06d},{'x' if i < 5 else 'y'}\n" for i in range(10)),
                 encoding="utf-8")
    run = attach(ring, f, "p/ring", label="partial")["run"]
    doc = run_members(ring, run)
    assert [c["nodes"] for c in doc["communities"]] == [[f"v{i:06d}" for i in range(5)],
                                                        [f"v{i:06d}" for i in range(5, 10)]]
    assert doc["unassigned"] == ["v000010", "v000011"]
    assert run_members(ring, run, limit=0)["communities"][0] == {
        "community": 0, "shown": 0, "size": 5, "offset": 0, "nodes": [], "truncated": True}  # no update: shown = stored


def test_compare_matrix_is_symmetric_and_agrees_with_pairwise(ring):
    from workspace.services.members import compare_matrix
    from workspace.services.runs import load_membership

    runs = [_run(ring, k=2), _run(ring, k=3), _run(ring, k=4)]
    doc = compare_matrix(ring, runs + [runs[0]])  # repeats are dropped
    assert [r["run"] for r in doc["runs"]] == runs
    ari = np.array(doc["ari"])
    assert np.allclose(ari, ari.T)
    labels = [load_membership(ring, r)[1] for r in runs]
    for i in range(3):
        for j in range(3):
            # reference: sklearn.metrics.adjusted_rand_score
            assert ari[i, j] == pytest.approx(adjusted_rand_score(labels[i], labels[j]), abs=1e-12)


def test_suggestions():
    from workspace.services.suggest import close_names, close_node_ids, hint

    ids = np.array(["Alpha", "alpine", "beta", "gamma"])
    assert close_node_ids("ALPHA", ids) == ["Alpha"]
    assert close_node_ids("alp", ids) == ["Alpha", "alpine"]
    assert close_node_ids("delta", ids) == []
    # difflib.get_close_matches (standard library) supplies near spellings for short name lists
    assert close_names("velmora/staions", ["velmora/stations", "orrin/lab"]) == ["velmora/stations"]
    assert hint([]) == "" and hint(["a", "b"]) == "; did you mean a or b?"


def test_delete_runs_refuses_a_run_another_record_points_at(ring, store_path):
    # a table this module does not know (say, a later feature's) referring to a run: the delete is refused
    # as a conflict and nothing changes, rather than leaving a reference to nothing
    import sqlite3

    from tests_support import dump_store
    from workspace.services.delete import delete_runs

    run = _run(ring)
    con = sqlite3.connect(store_path)
    con.execute("CREATE TABLE later_feature (id INTEGER PRIMARY KEY, run_id INTEGER REFERENCES runs(id))")
    con.execute("INSERT INTO later_feature (run_id) VALUES (?)", (run,))
    con.commit()
    con.close()
    before = dump_store(store_path)
    with pytest.raises(ConflictError, match="referred to by other records"):
        delete_runs(ring, [run])
    assert dump_store(store_path) == before
