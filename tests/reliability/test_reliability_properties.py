"""Property tests (hypothesis) for import canonicalisation and store-level diffs.

Import: the content hash of a network depends on the graph only, under the recorded
import policy — not on line order, endpoint order, exact duplicate lines (under the
idempotent duplicate rules ``max`` and ``first``) or the file format. ``sum`` is not
idempotent: a line given twice must count twice. The neutral writers are networkx
(``write_edgelist``, ``write_graphml``, ``node_link_data``) and scipy
(``scipy.io.mmwrite``), not cutbook's own code.

Diff: ARI (Hubert & Arabie 1985), NMI with the arithmetic mean and AMI (Vinh, Epps &
Bailey 2010) and VI (Meilă 2007) are symmetric in their two partitions by their
definitions; ``cutbook diff A B`` and ``diff B A`` on stored runs must agree, and agree
with scikit-learn (sklearn.metrics) on the same label vectors. Score-level properties
live in tests/compare/test_compare_properties.py and are not repeated here.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import networkx as nx
import pytest
import scipy.io
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.metrics import adjusted_mutual_info_score, adjusted_rand_score, normalized_mutual_info_score

from workspace.domain import ImportPolicy
from workspace.errors import InputError
from workspace.io import read_network

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"

# ids: letters, digits, a few non-ASCII letters and punctuation that no format quotes
_ID_ALPHABET = "abcdefghijklmnopqrstuvwxyzABCXYZ0123456789_-.éßøŁ東京"
ids = st.text(alphabet=_ID_ALPHABET, min_size=1, max_size=6)
weights = st.one_of(
    st.floats(min_value=1e-3, max_value=1e6, allow_nan=False, allow_infinity=False),
    st.integers(1, 1000).map(float),
)


@st.composite
def weighted_graphs(draw, max_nodes: int = 9):
    """A small simple undirected graph with positive weights and no isolated node."""
    n = draw(st.integers(2, max_nodes))
    names = draw(st.lists(ids, min_size=n, max_size=n, unique=True))
    pairs = list(itertools.combinations(range(n), 2))
    chosen = draw(st.lists(st.sampled_from(pairs), min_size=1, max_size=min(len(pairs), 20), unique=True))
    ws = draw(st.lists(weights, min_size=len(chosen), max_size=len(chosen)))
    return [(names[i], names[j], w) for (i, j), w in zip(chosen, ws)]


def _write_csv(path: Path, edges) -> Path:
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write("source,target,weight\n")
        fh.writelines(f"{u},{v},{w!r}\n" for u, v, w in edges)
    return path


def _hash(path: Path, policy: ImportPolicy) -> str:
    graph, _ = read_network(path, policy=policy)
    return graph.content_hash()


SETTINGS = settings(deadline=None, max_examples=40, suppress_health_check=[HealthCheck.function_scoped_fixture])


@SETTINGS
@given(edges=weighted_graphs(), data=st.data())
def test_line_order_endpoint_order_and_exact_duplicates_do_not_change_the_hash(tmp_path, edges, data):
    m = len(edges)
    order = data.draw(st.permutations(range(m)), label="line order")
    flip = data.draw(st.lists(st.booleans(), min_size=m, max_size=m), label="reversed endpoints")
    twice = data.draw(st.lists(st.booleans(), min_size=m, max_size=m), label="duplicated lines")
    lines = []
    for k in order:
        u, v, w = edges[k]
        line = (v, u, w) if flip[k] else (u, v, w)
        lines.append(line)
        if twice[k]:
            lines.append(line)
    lines = data.draw(st.permutations(lines), label="final order")  # duplicates need not be adjacent
    original = _write_csv(tmp_path / "original.csv", edges)
    shuffled = _write_csv(tmp_path / "shuffled.csv", lines)

    for rule in ("max", "first"):  # idempotent for exact duplicates
        policy = ImportPolicy(weight="weight", duplicates=rule)
        assert _hash(shuffled, policy) == _hash(original, policy), rule

    # sum is not idempotent: a line given twice counts twice (weights doubled exactly)
    doubled = _write_csv(tmp_path / "doubled.csv",
                         [(u, v, 2 * w if twice[k] else w) for k, (u, v, w) in enumerate(edges)])
    policy = ImportPolicy(weight="weight", duplicates="sum")
    assert _hash(shuffled, policy) == _hash(doubled, policy)
    if any(twice):
        assert _hash(shuffled, policy) != _hash(original, policy)
        with pytest.raises(InputError, match="duplicate edge"):
            read_network(shuffled, policy=ImportPolicy(weight="weight", duplicates="error"))
    else:
        assert _hash(shuffled, ImportPolicy(weight="weight", duplicates="error")) == _hash(original, policy)


def _nx_graph(edges) -> nx.Graph:
    G = nx.Graph()
    G.add_weighted_edges_from(edges)
    return G


@SETTINGS
@given(edges=weighted_graphs())
def test_hash_is_the_same_across_formats_written_by_networkx(tmp_path, edges):
    G = _nx_graph(edges)
    files = {}
    for name, sep in (("g.csv", ","), ("g.tsv", "\t"), ("g.txt", " ")):
        nx.write_edgelist(G, tmp_path / name, delimiter=sep, data=["weight"])  # u<sep>v<sep>w
        files[name] = ImportPolicy(weight=2)
    nx.write_graphml(G, tmp_path / "g.graphml")
    files["g.graphml"] = ImportPolicy(weight="weight")
    with open(tmp_path / "g.json", "w", encoding="utf-8") as fh:
        json.dump(nx.node_link_data(G, edges="links"), fh)
    files["g.json"] = ImportPolicy(weight="weight")
    hashes = {name: _hash(tmp_path / name, policy) for name, policy in files.items()}
    assert len(set(hashes.values())) == 1, hashes

    # Matrix Market holds ids 1..n: compare against the same graph relabelled, written as CSV
    order = sorted(G.nodes)
    relabel = {node: str(i + 1) for i, node in enumerate(order)}
    H = nx.relabel_nodes(G, relabel)
    A = nx.to_scipy_sparse_array(H, nodelist=[str(i + 1) for i in range(len(order))], weight="weight")
    scipy.io.mmwrite(tmp_path / "h.mtx", sp.tril(A).tocoo(), symmetry="symmetric", precision=17)
    nx.write_edgelist(H, tmp_path / "h.csv", delimiter=",", data=["weight"])
    assert _hash(tmp_path / "h.mtx", ImportPolicy(weight="value")) == _hash(tmp_path / "h.csv",
                                                                              ImportPolicy(weight=2))


def test_reimport_of_a_reordered_file_makes_no_new_version(cli, tmp_path):
    """Through the CLI: the same graph written differently is recognised as unchanged,
    under the policy recorded on the version."""
    edges = [("a", "b", 1.5), ("b", "c", 2.0), ("c", "d", 0.25), ("a", "d", 3.0)]
    first = _write_csv(tmp_path / "first.csv", edges)
    again = _write_csv(tmp_path / "again.csv", [(v, u, w) for u, v, w in reversed(edges)] + [("b", "a", 1.5)])
    r1 = cli("import", first, "--project", "p", "--network", "g", "--weight", "weight", "--json")
    assert r1.code == 0, r1.err
    r2 = cli("import", again, "--project", "p", "--network", "g", "--weight", "weight", "--json")
    assert r2.code == 0, r2.err
    assert r2.json["new_version"] is False and r2.json["content_hash"] == r1.json["content_hash"]
    assert r2.json["policy"]["duplicates"] == "max"  # the recorded policy it was compared under
    r3 = cli("import", again, "--project", "p", "--network", "g", "--weight", "weight", "--duplicates", "sum",
             "--json")
    assert r3.code == 0 and r3.json["new_version"] is True and r3.json["version"] == 2
    assert r3.json["policy"]["duplicates"] == "sum"
    assert [v["version"] for v in cli("versions", "p/g", "--json").json] == [1, 2]


# --- store-level diff symmetry ------------------------------------------------------------------

KARATE_IDS = [str(i) for i in range(1, 35)]


@pytest.fixture
def karate_store(cli):
    r = cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight")
    assert r.code == 0, r.err
    return cli


def _attach(cli, tmp_path: Path, labels, name: str, order=None) -> dict:
    path = tmp_path / f"{name}.csv"
    idx = range(len(KARATE_IDS)) if order is None else order
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("node,community\n")
        fh.writelines(f"{KARATE_IDS[i]},group-{labels[i]}\n" for i in idx)
    r = cli("attach", path, "--to", "club/karate", "--label", name, "--json")
    assert r.code == 0, r.err
    return r.json


partitions = st.integers(1, 6).flatmap(lambda k: st.lists(st.integers(0, k - 1), min_size=34, max_size=34))


@settings(deadline=None, max_examples=15, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(a=partitions, b=partitions)
def test_store_diff_is_symmetric_and_matches_sklearn(karate_store, tmp_path, a, b):
    cli = karate_store
    ra = _attach(cli, tmp_path, a, "a")["run"]
    rb = _attach(cli, tmp_path, b, "b")["run"]
    ab = cli("diff", ra, rb, "--json")
    ba = cli("diff", rb, ra, "--json")
    assert ab.code == 0 and ba.code == 0, (ab.err, ba.err)
    ab, ba = ab.json, ba.json
    for key in ("ari", "nmi", "ami", "vi_nats", "vi_bits"):
        assert ab[key] == pytest.approx(ba[key], abs=1e-12), key
    assert (ab["k_a"], ab["k_b"]) == (ba["k_b"], ba["k_a"])
    assert ab["moved"] == ba["moved"]
    # outside reference: scikit-learn on the same node-aligned label vectors
    assert ab["ari"] == pytest.approx(adjusted_rand_score(a, b), abs=1e-9)
    if len(set(a)) > 1 or len(set(b)) > 1:  # sklearn's convention for two single-cluster partitions differs
        assert ab["nmi"] == pytest.approx(normalized_mutual_info_score(a, b, average_method="arithmetic"),
                                          abs=1e-9)
        assert ab["ami"] == pytest.approx(adjusted_mutual_info_score(a, b, average_method="arithmetic"),
                                          abs=1e-9)


@settings(deadline=None, max_examples=10, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(a=partitions, data=st.data())
def test_renamed_and_reordered_membership_is_the_same_partition(karate_store, tmp_path, a, data):
    """Renaming the communities and reordering the file's lines changes nothing stored:
    same membership hash, and the diff scores identity (ARI = NMI = 1, VI = 0)."""
    cli = karate_store
    k = max(a) + 1
    rename = data.draw(st.permutations(range(k)), label="renaming")
    order = data.draw(st.permutations(range(34)), label="line order")
    first = _attach(cli, tmp_path, a, "original")
    second = _attach(cli, tmp_path, [rename[x] + 10 for x in a], "renamed", order=order)
    assert first["membership_hash"] == second["membership_hash"]
    d = cli("diff", first["run"], second["run"], "--json").json
    assert d["ari"] == pytest.approx(1.0) and d["moved"] == 0 and d["vi_nats"] == pytest.approx(0.0, abs=1e-12)
    if k > 1:
        assert d["nmi"] == pytest.approx(1.0)
