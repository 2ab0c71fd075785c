"""Daily-use CLI paths: `diff --track RUN RUN …`, `where` across networks with suggestions, the
delimiter hint, attach help, and the housekeeping commands (delete-run, note/tag/untag/annotations,
members, compare) with their --json contracts, exit codes and untouched store on errors."""

from __future__ import annotations

import csv
import math
import sqlite3
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score, mutual_info_score, normalized_mutual_info_score

from graphs import adjacency_to_csv
from tests_support import dump_store, write_edges

REPO = Path(__file__).resolve().parents[2]
NAMES = [f"m{i:02d}" for i in range(34)]


@pytest.fixture
def club(cli, tmp_path):
    """Zachary's karate club (as shipped by networkx) with three runs of different methods and k."""
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    f = adjacency_to_csv(A, tmp_path / "karate.csv", NAMES)
    assert cli("import", f, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    runs = {}
    for key, argv in (("njw2", ("--method", "njw", "--k", "2")), ("njw4", ("--method", "njw", "--k", "4")),
                      ("fiedler", ("--method", "fiedler"))):
        r = cli("run", "club/karate", *argv, "--json")
        assert r.code == 0, r.err
        runs[key] = r.json["run"]
    return runs


def _labels(cli, tmp_path, run_id) -> dict[str, str]:
    """A run's membership as written by `export`, read back with Python's csv module."""
    out = tmp_path / f"run{run_id}.csv"
    assert cli("export", run_id, "-o", out).code == 0
    with open(out, newline="", encoding="utf-8") as fh:
        return {row["node"]: row["community"] for row in csv.DictReader(fh)}


def _one_line_error(r, code):
    assert r.code == code, (r.code, r.err)
    assert r.err.startswith("cutbook: error: ") and r.err.count("\n") == 1, r.err
    assert r.out == ""


# --- 12: diff --track RUN RUN … --------------------------------------------------------------------

def test_diff_track_accepts_the_readme_form(cli, club, tmp_path):
    a, b, c = club["njw2"], club["njw4"], club["fiedler"]
    r = cli("diff", "--track", a, b, c, "--json")
    assert r.code == 0, r.err
    doc = r.json
    assert [d["run"] for d in doc["run_details"]] == [a, b, c]
    assert len(doc["steps"]) == 2
    la, lb, lc = (_labels(cli, tmp_path, x) for x in (a, b, c))
    for step, (x, y) in zip(doc["steps"], ((la, lb), (lb, lc))):
        # reference: scikit-learn adjusted_rand_score on the exported memberships
        expected = adjusted_rand_score([x[n] for n in NAMES], [y[n] for n in NAMES])
        assert step["ari"] == pytest.approx(expected, abs=1e-12)
    # the other spellings give the same chain
    assert cli("diff", a, b, c, "--track", "--json").json["steps"] == doc["steps"]
    text = cli("diff", "--track", a, b, c)
    assert text.code == 0 and text.out.startswith(f"chain: run {a} ")
    _one_line_error(cli("diff", "--track", a), 2)  # a chain needs two runs
    _one_line_error(cli("diff", "--track", a, 999), 3)


# --- 13: where, suggestions, attach help, delimiter hint -----------------------------------------------

def test_where_searches_every_network_and_suggests_near_ids(cli, club, tmp_path, store_target):
    write_edges(tmp_path / "other.csv", [("m00", "x1"), ("x1", "x2"), ("x2", "m00")], header=None)
    assert cli("import", tmp_path / "other.csv", "--project", "side", "--network", "tri").code == 0
    r = cli("where", "m00", "--json")
    assert r.code == 0, r.err
    doc = r.json
    assert doc["network"] is None
    assert {x["network"]: x["versions"] for x in doc["networks_with_node"]} == {"club/karate": [1], "side/tri": [1]}
    assert {x["run"] for x in doc["runs"]} == set(club.values())
    assert all(x["network"] == "club/karate" for x in doc["runs"])
    # with --network the old contract holds
    one = cli("where", "m00", "--network", "club/karate", "--json").json
    assert one["versions_with_node"] == [1] and one["network"] == "club/karate"
    assert "network" in cli("where", "x1").out  # text names each network

    before = dump_store(store_target)
    r = cli("where", "M00")
    _one_line_error(r, 3)
    assert "did you mean m00?" in r.err  # same id in another letter case
    r = cli("where", "m3")
    _one_line_error(r, 3)
    assert "did you mean m30, m31, m32 or m33?" in r.err  # prefix matches, in id order
    r = cli("where", "zz")
    _one_line_error(r, 3)
    assert "did you mean" not in r.err
    r = cli("where", "x1", "--network", "club/karate")
    _one_line_error(r, 3)
    assert "but is in side/tri" in r.err
    r = cli("where", "m00", "--network", "club/karat")
    _one_line_error(r, 3)
    assert "did you mean club/karate?" in r.err
    r = cli("versions", "club/Karate")  # other commands naming a network get the hint too
    _one_line_error(r, 3)
    assert "did you mean club/karate?" in r.err
    assert dump_store(store_target) == before


def test_where_takes_a_node_by_its_name_in_the_node_table(cli, club, tmp_path, store_target):
    """A node can be named as people know it: the one node whose text attribute reads the text
    (ignoring case) is looked up; a name several nodes share lists them; the club attribute is
    Zachary's (1977) recorded split as shipped by networkx (``club``)."""
    G = nx.karate_club_graph()
    table = tmp_path / "members.csv"
    table.write_text("node,name,club\n" + "".join(f"{NAMES[i]},Member {i},{G.nodes[i]['club']}\n"
                                                    for i in range(34)), encoding="utf-8")
    assert cli("nodes", "add", "club/karate", table).code == 0
    by_name = cli("where", "member 7", "--json")
    assert by_name.code == 0, by_name.err
    assert by_name.json["node"] == "m07"
    assert by_name.json["found_by"] == {"attribute": "name", "value": "Member 7", "typed": "member 7"}
    assert by_name.json["runs"] == cli("where", "m07", "--json").json["runs"]
    assert "node m07 has name 'Member 7'" in cli("where", "Member 7", "--network", "club/karate").out
    before = dump_store(store_target)
    r = cli("where", "Officer")   # 17 members of the recorded split share this value
    _one_line_error(r, 3)
    assert "several are named so" in r.err and "(club 'Officer')" in r.err
    r = cli("where", "Member 99")
    _one_line_error(r, 3)
    assert "several" not in r.err
    assert dump_store(store_target) == before


def test_attach_help_names_every_membership_format(cli, capsys):
    from workspace.cli import main

    with pytest.raises(SystemExit):
        main(["attach", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "JSON" in text and "GraphML" in text and "node,community" in text


def test_attach_reads_json_and_graphml_as_the_help_says(cli, club, tmp_path):
    base = _labels(cli, tmp_path, club["njw4"])
    for fmt in ("json", "graphml"):
        out = tmp_path / f"m.{fmt}"
        assert cli("export", club["njw4"], "--format", fmt, "-o", out).code == 0
        r = cli("attach", out, "--to", "club/karate", "--label", f"from-{fmt}", "--json")
        assert r.code == 0, r.err
        assert _labels(cli, tmp_path, r.json["run"]) == base


def test_attach_reads_other_separators_and_names_delimiter(cli, club, tmp_path, store_target):
    base = _labels(cli, tmp_path, club["njw4"])
    rows = "".join(f"{n};{c}\n" for n, c in base.items())
    semi = tmp_path / "m.csv"
    semi.write_text("node;community\n" + rows, encoding="utf-8")
    before = dump_store(store_target)
    r = cli("attach", semi, "--to", "club/karate", "--label", "semi")
    _one_line_error(r, 1)
    assert f"{semi}:1: " in r.err and "--delimiter ';'" in r.err
    assert dump_store(store_target) == before
    r = cli("attach", semi, "--to", "club/karate", "--label", "semi", "--delimiter", ";", "--json")
    assert r.code == 0, r.err
    assert _labels(cli, tmp_path, r.json["run"]) == base
    tsv = tmp_path / "m.tsv"
    tsv.write_text("node\tcommunity\n" + rows.replace(";", "\t"), encoding="utf-8")
    assert _labels(cli, tmp_path, cli("attach", tsv, "--to", "club/karate", "--label", "tsv", "--json")
                   .json["run"]) == base
    other = tmp_path / "m.groups"
    other.write_text("node,community\n" + rows.replace(";", ","), encoding="utf-8")
    _one_line_error(cli("attach", other, "--to", "club/karate", "--label", "x"), 1)  # unknown extension
    assert cli("attach", other, "--to", "club/karate", "--label", "x", "--format", "csv").code == 0


@pytest.mark.parametrize("sep, hint", [(";", "--delimiter ';'"), ("|", "--delimiter '|'"), ("\t", "--delimiter tab"),
                                       (" ", "--delimiter whitespace")])
def test_wrongly_delimited_file_suggests_delimiter(cli, tmp_path, store_target, sep, hint):
    f = write_edges(tmp_path / "semi.csv", [("a", "b", 1), ("b", "c", 2), ("c", "a", 3)],
                    header="source,target,weight", sep=sep)
    cli("projects")  # create the store so the comparison below sees its tables
    before = dump_store(store_target)
    r = cli("import", f, "--project", "p", "--network", "n")
    _one_line_error(r, 1)
    assert r.err.startswith(f"cutbook: error: {f}:1: ") and hint in r.err
    assert dump_store(store_target) == before
    # following the hint imports the file; networkx's reader is the reference for its content
    given = hint.split()[1].strip("'")
    r = cli("import", f, "--project", "p", "--network", "n", "--delimiter", given, "--weight", "weight", "--json")
    assert r.code == 0, r.err
    G = nx.read_weighted_edgelist(f, delimiter=None if sep == " " else sep, comments="source")
    assert r.json["nodes"] == G.number_of_nodes() and r.json["edges"] == G.number_of_edges()


def test_readme_documents_delimiter_and_new_commands():
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    for text in ("--delimiter", "delete-run", "`note ", "`tag ", "`members ", "`compare ", "where NODE [--network"):
        assert text in readme, text


# --- 14: delete a run ------------------------------------------------------------------------------------

def test_delete_run_removes_it_and_its_unused_arrays(cli, club, tmp_path, store_path):
    three = tmp_path / "three.csv"  # three components, so k=2 fails in the computation
    three.write_text("a,b\nb,c\nc,a\nd,e\ne,f\nf,d\ng,h\n", encoding="utf-8")
    assert cli("import", three, "--project", "club", "--network", "three", "--header", "no").code == 0
    failed = cli("run", "club/three", "--method", "njw", "--k", "2", "--json")
    assert failed.code == 1 and failed.json["status"] == "failed"
    att = cli("attach", _export(cli, club["njw2"], tmp_path), "--to", "club/karate", "--label", "copy",
              "--json").json["run"]
    before = dump_store(store_path)
    _one_line_error(cli("delete-run", failed.json["run"]), 2)  # not a terminal and no --yes
    _one_line_error(cli("delete-run", 999, "--yes"), 3)
    assert dump_store(store_path) == before

    r = cli("delete-run", failed.json["run"], att, "--yes", "--json")
    assert r.code == 0, r.err
    assert [x["run"] for x in r.json["runs"]] == [failed.json["run"], att] and r.json["deleted"] is True
    # the attached copy shares its membership array with run njw2, so that array stays
    assert cli("show", club["njw2"], "--json").json["membership_hash"]
    assert cli("diff", club["njw2"], club["njw4"]).code == 0
    left = [x["run"] for x in cli("runs", "--json").json]
    assert failed.json["run"] not in left and att not in left
    assert cli("show", att).code == 3
    assert cli("verify", "--json").json["ok"] is True

    # deleting the only run holding an array removes that array, and nothing else
    odd = tmp_path / "odd.csv"
    odd.write_text("node,community\n" + "".join(f"{n},{i % 5}\n" for i, n in enumerate(NAMES)), encoding="utf-8")
    only = cli("attach", odd, "--to", "club/karate", "--label", "odd", "--json").json
    con = sqlite3.connect(store_path)
    blob = con.execute("SELECT membership_blob FROM runs WHERE id = ?", (only["run"],)).fetchone()[0]
    blobs_before = {h for (h,) in con.execute("SELECT hash FROM blobs")}
    con.close()
    r = cli("delete-run", only["run"], "--yes", "--json")
    assert r.code == 0 and r.json["arrays_removed"] == 1
    con = sqlite3.connect(store_path)
    assert {h for (h,) in con.execute("SELECT hash FROM blobs")} == blobs_before - {blob}
    con.close()
    assert cli("verify", "--json").json["ok"] is True


def _export(cli, run_id, tmp_path) -> Path:
    out = tmp_path / f"export{run_id}.csv"
    assert cli("export", run_id, "-o", out).code == 0
    return out


def test_delete_run_refuses_a_run_that_a_rerun_repeats(cli, club, store_target):
    rr = cli("rerun", club["njw2"], "--json").json["run"]
    before = dump_store(store_target)
    r = cli("delete-run", club["njw2"], "--yes")
    _one_line_error(r, 4)
    assert f"run {rr} repeats run {club['njw2']}" in r.err and f"delete-run {club['njw2']} {rr}" in r.err
    assert dump_store(store_target) == before
    assert cli("delete-run", club["njw2"], rr, "--yes").code == 0
    assert cli("verify", "--json").json["ok"] is True


# --- 14: annotations ----------------------------------------------------------------------------------------

def test_tags_and_notes_are_insert_only_events(cli, club, store_target):
    run = club["njw4"]
    runs_before = dump_store(store_target)["runs"]
    r = cli("tag", run, "baseline", "reviewed", "--json")
    assert r.code == 0, r.err
    assert r.json["tags"] == ["baseline", "reviewed"] and [e["action"] for e in r.json["added"]] == ["tag", "tag"]
    again = cli("tag", run, "baseline", "--json").json
    assert again["added"] == [] and len(again["history"]) == 2  # already there: no row
    assert cli("note", run, "looks right at k=4", "--json").json["notes"][0]["note"] == "looks right at k=4"
    doc = cli("untag", run, "reviewed", "--json").json
    assert doc["tags"] == ["baseline"]
    assert [e["action"] for e in doc["history"]] == ["tag", "tag", "note", "untag"]
    assert [e["text"] for e in doc["history"]] == ["baseline", "reviewed", "looks right at k=4", "reviewed"]
    # the run record itself is untouched; listings and show carry the current state
    assert dump_store(store_target)["runs"] == runs_before
    shown = cli("show", run, "--json").json
    assert shown["tags"] == ["baseline"] and [n["note"] for n in shown["notes"]] == ["looks right at k=4"]
    assert "tags   baseline" in cli("show", run).out
    assert {x["run"]: x["tags"] for x in cli("runs", "--json").json}[run] == ["baseline"]
    assert cli("annotations", run, "--json").json["history"] == doc["history"]
    # re-tagging after removal is a new event; the history keeps all of it
    assert len(cli("tag", run, "reviewed", "--json").json["history"]) == 5

    # versions and parameter sets
    assert cli("tag", "club/karate@1", "clean").code == 0
    assert cli("versions", "club/karate", "--json").json[0]["tags"] == ["clean"]
    assert "clean" in cli("versions", "club/karate").out
    assert cli("show", "club/karate", "--json").json["tags"] == ["clean"]
    assert cli("params", "save", "club/two", "--method", "njw", "--k", "2").code == 0
    assert cli("note", "club/two", "for the report", "--params").code == 0
    assert cli("params", "show", "club/two", "--json").json["notes"][0]["note"] == "for the report"
    assert cli("tag", "club/two@1", "baseline", "--params").code == 0
    assert cli("params", "list", "--json").json[0]["tags"] == ["baseline"]
    tagged = cli("tagged", "baseline", "--json").json
    assert [(t["kind"], t["target"]) for t in tagged] == [("run", f"run {run}"), ("params", "club/two@1")]


def test_annotation_errors_leave_the_store_unchanged(cli, club, store_target):
    run = club["njw2"]
    cli("tag", run, "keep")
    before = dump_store(store_target)
    r = cli("untag", run, "keep", "absent")
    _one_line_error(r, 3)
    assert "no tag absent" in r.err  # and 'keep' was not removed either
    _one_line_error(cli("note", run, "   "), 2)
    _one_line_error(cli("tag", run, "two words"), 2)
    _one_line_error(cli("tag", 999, "x"), 3)
    r = cli("tag", "club/two", "x")  # a parameter set named without --params
    _one_line_error(r, 3)
    _one_line_error(cli("tag", "club/karate@7", "x"), 3)
    assert dump_store(store_target) == before


def test_annotations_go_with_their_network(cli, club, store_path):
    cli("tag", club["njw2"], "x")
    cli("note", "club/karate", "y")
    assert cli("delete", "club/karate", "--yes").code == 0
    con = sqlite3.connect(store_path)
    assert con.execute("SELECT count(*) FROM annotations").fetchone()[0] == 0
    con.close()


# --- 14: members -------------------------------------------------------------------------------------------

def test_members_lists_each_community_like_the_export(cli, club, tmp_path):
    run = club["njw4"]
    labels = _labels(cli, tmp_path, run)
    doc = cli("members", run, "--json").json
    assert doc["k"] == 4 and doc["nodes"] == 34
    got = {n: str(c["community"]) for c in doc["communities"] for n in c["nodes"]}
    assert got == labels  # every node exactly once, in the community the export gives it
    # every node of the karate club (networkx) appears
    assert sorted(got) == sorted(NAMES[i] for i in nx.karate_club_graph().nodes)
    one = cli("members", run, "1", "--json").json
    assert [c["community"] for c in one["communities"]] == [1]
    full = one["communities"][0]["nodes"]
    assert full == sorted(n for n, c in labels.items() if c == "1")
    # paging: pieces of 3 put back together give the whole list
    pieces = []
    for offset in range(0, len(full), 3):
        page = cli("members", run, "1", "--limit", "3", "--offset", offset, "--json").json["communities"][0]
        assert page["size"] == len(full) and page["truncated"] == (len(full) > 3)
        pieces += page["nodes"]
    assert pieces == full
    text = cli("members", run, "--limit", "2")
    assert text.code == 0 and "--limit/--offset for more" in text.out
    _one_line_error(cli("members", run, "9"), 3)
    _one_line_error(cli("members", 999), 3)


def test_members_text_folds_ids_into_lines_of_at_most_100_columns(cli, tmp_path):
    """Piped `members` put a community's 50 ids on one line (2,000+ characters with 40-character
    ids); they are now folded, every id whole and in the JSON's order."""
    ids = [f"station-{i:032d}" for i in range(60)]
    rows = [(ids[i], ids[(i + 1) % 60], 1) for i in range(60)]
    f = write_edges(tmp_path / "ring.csv", rows, header="u,v,w")
    assert cli("import", f, "--project", "p", "--network", "ring").code == 0
    run = cli("run", "p/ring", "--method", "njw", "--k", "2", "--json").json["run"]
    text = cli("members", run).out.splitlines()
    assert max(len(line) for line in text if line.startswith("  ")) <= 100
    listed = []
    for line in text:
        if line.startswith("community"):
            listed.append([])
        elif line.startswith("  "):
            listed[-1] += line.split()
    assert listed == [c["nodes"] for c in cli("members", run, "--json", "--limit", "50").json["communities"]]
    assert sum(len(c) for c in listed) == 60


def test_members_carry_stability_of_repeated_runs(cli, club):
    r = cli("run", "club/karate", "--method", "njw", "--k", "2", "--repeats", "4", "--json").json
    doc = cli("members", r["run"], "--json").json
    share = [s for c in doc["communities"] for s in c["stability"]]
    assert len(share) == 34 and all(x in (0.0, 0.25, 0.5, 0.75, 1.0) for x in share)  # k/4 of 4 repeats


# --- 14: comparison matrix -------------------------------------------------------------------------------------

def _entropy(labels) -> float:
    _, counts = np.unique(labels, return_counts=True)
    p = counts / counts.sum()
    return float(-(p * np.log(p)).sum())


def test_compare_matrix_matches_scikit_learn(cli, club, tmp_path):
    ids = [club["njw2"], club["njw4"], club["fiedler"]]
    doc = cli("compare", *ids, "--json").json
    assert [r["run"] for r in doc["runs"]] == ids
    lab = {i: [(_labels(cli, tmp_path, i))[n] for n in NAMES] for i in ids}
    for i, a in enumerate(ids):
        assert doc["ari"][i][i] == 1.0 and doc["nmi"][i][i] == 1.0 and doc["vi_nats"][i][i] == 0.0
        for j, b in enumerate(ids):
            if i == j:
                continue
            # references: sklearn.metrics.adjusted_rand_score, normalized_mutual_info_score (arithmetic
            # mean); VI = H(U) + H(V) - 2 I(U;V) (Meilă 2007) with I from sklearn.metrics.mutual_info_score
            assert doc["ari"][i][j] == pytest.approx(adjusted_rand_score(lab[a], lab[b]), abs=1e-12)
            assert doc["nmi"][i][j] == pytest.approx(
                normalized_mutual_info_score(lab[a], lab[b], average_method="arithmetic"), abs=1e-12)
            vi = _entropy(lab[a]) + _entropy(lab[b]) - 2 * mutual_info_score(lab[a], lab[b])
            assert doc["vi_nats"][i][j] == pytest.approx(vi, abs=1e-12)
            assert doc["vi_bits"][i][j] == pytest.approx(vi / math.log(2), abs=1e-12)
            assert doc["n_scored"][i][j] == 34
    geo = cli("compare", *ids, "--nmi", "geometric", "--json").json
    assert geo["nmi"][0][1] == pytest.approx(
        normalized_mutual_info_score(lab[ids[0]], lab[ids[1]], average_method="geometric"), abs=1e-12)
    text = cli("compare", *ids)
    assert text.code == 0 and "ARI" in text.out and "VI in nats" in text.out
    _one_line_error(cli("compare", ids[0]), 2)
    _one_line_error(cli("compare", ids[0], 999), 3)


def test_compare_matrix_hand_worked_vi_and_versions(cli, tmp_path):
    # a 4-cycle a-b-c-d; U = {a,b}{c,d}, V = one group: VI = H(U|V) + H(V|U) = ln 2 + 0 (hand computed),
    # ARI = 0 and NMI = 0 (V carries no information; scikit-learn gives 0 for a single cluster too)
    write_edges(tmp_path / "c4.csv", [("a", "b"), ("b", "c"), ("c", "d"), ("d", "a")], header=None)
    assert cli("import", tmp_path / "c4.csv", "--project", "p", "--network", "c4").code == 0
    (tmp_path / "u.csv").write_text("node,community\na,x\nb,x\nc,y\nd,y\n", encoding="utf-8")
    (tmp_path / "v.csv").write_text("node,community\na,z\nb,z\nc,z\nd,z\n", encoding="utf-8")
    u = cli("attach", tmp_path / "u.csv", "--to", "p/c4", "--label", "u", "--json").json["run"]
    v = cli("attach", tmp_path / "v.csv", "--to", "p/c4", "--label", "v", "--json").json["run"]
    doc = cli("compare", u, v, "--json").json
    assert doc["vi_nats"][0][1] == pytest.approx(math.log(2), abs=1e-12)
    assert doc["vi_bits"][0][1] == pytest.approx(1.0, abs=1e-12)
    assert doc["ari"][0][1] == pytest.approx(0.0, abs=1e-12)
    assert doc["nmi"][0][1] == pytest.approx(normalized_mutual_info_score([0, 0, 1, 1], [0, 0, 0, 0]), abs=1e-12)

    # a second version with node e added: common nodes score as before; --nodes all puts e in "absent" of A
    write_edges(tmp_path / "c5.csv", [("a", "b"), ("b", "c"), ("c", "d"), ("d", "a"), ("d", "e")], header=None)
    assert cli("import", tmp_path / "c5.csv", "--project", "p", "--network", "c4").code == 0
    (tmp_path / "w.csv").write_text("node,community\na,x\nb,x\nc,y\nd,y\ne,y\n", encoding="utf-8")
    w = cli("attach", tmp_path / "w.csv", "--to", "p/c4@2", "--label", "w", "--json").json["run"]
    common = cli("compare", u, w, "--json").json
    assert common["ari"][0][1] == 1.0 and common["n_scored"][0][1] == 4
    every = cli("compare", u, w, "--nodes", "all", "--json").json
    assert every["n_scored"][0][1] == 5
    # reference: scikit-learn on the union, e in an "absent" group of its own on the A side
    assert every["ari"][0][1] == pytest.approx(adjusted_rand_score([0, 0, 1, 1, 2], [0, 0, 1, 1, 1]), abs=1e-12)


def test_read_only_commands_leave_the_store_as_it_was(cli, club, store_target):
    cli("tag", club["njw2"], "keep")
    before = dump_store(store_target)
    for argv in (("members", club["njw2"]), ("members", club["njw2"], "0", "--json"),
                 ("compare", club["njw2"], club["njw4"], "--json"), ("annotations", club["njw2"]),
                 ("tagged", "keep"), ("where", "m01"), ("diff", "--track", club["njw2"], club["njw4"])):
        assert cli(*argv).code == 0, argv
    assert dump_store(store_target) == before


def test_unknown_names_get_did_you_mean(cli, club, store_target):
    cli("params", "save", "club/two", "--method", "njw", "--k", "2")
    before = dump_store(store_target)
    for argv, expected in ((("networks", "--project", "Club"), "did you mean club?"),
                           (("params", "list", "clu"), "did you mean club?"),
                           (("params", "show", "club/tw"), "did you mean club/two?"),
                           (("run", "club/Karate", "--method", "njw"), "did you mean club/karate?"),
                           (("delete", "CLUB", "--yes"), "did you mean club?"),
                           (("show", "club/karate@5"), "its versions are 1 to 1"),
                           (("params", "show", "club/two@4"), "its versions are 1 to 1")):
        r = cli(*argv)
        _one_line_error(r, 3)
        assert expected in r.err, (argv, r.err)
    assert dump_store(store_target) == before


def test_semicolon_file_with_decimal_commas_is_not_read_as_phantom_ids(cli, tmp_path, store_target):
    # `a;b;1,5` split at the comma gives ids "a;b;1" and "5" that exist nowhere: refuse, name --delimiter
    f = tmp_path / "eu.csv"
    f.write_text("a;b;1,5\nb;c;2,5\nc;a;3,5\n", encoding="utf-8")
    cli("projects")
    before = dump_store(store_target)
    r = cli("import", f, "--project", "p", "--network", "eu")
    _one_line_error(r, 1)
    assert f"{f}:1: " in r.err and "--delimiter ';'" in r.err
    assert dump_store(store_target) == before
    r = cli("import", f, "--project", "p", "--network", "eu", "--delimiter", ";", "--json")
    assert r.code == 0, r.err
    # reference: networkx.read_edgelist with the same separator, weights left aside
    G = nx.read_edgelist(f, delimiter=";", data=False)
    assert (r.json["nodes"], r.json["edges"]) == (G.number_of_nodes(), G.number_of_edges())
    # an explicit --delimiter ',' reads the file as it is (the user asked for it)
    assert cli("import", f, "--project", "p", "--network", "as-is", "--delimiter", ",").code == 0


@pytest.mark.slow
def test_delete_run_in_a_terminal_asks_for_the_ids(cli, club, store_path):
    import os
    import pty
    import subprocess
    import sys

    env = {**os.environ, "PYTHONPATH": str(REPO)}
    run = club["fiedler"]
    for typed, code in ((b"yes\n", 1), (f"{run}\n".encode(), 0)):
        before = dump_store(store_path)
        master, slave = pty.openpty()
        try:
            os.write(master, typed)
            proc = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store_path), "delete-run",
                                   str(run)], stdin=slave, capture_output=True, text=True, env=env, timeout=120)
        finally:
            os.close(slave)
            os.close(master)
        assert proc.returncode == code, proc.stderr
        assert f"type {run} and press Enter to delete" in proc.stderr
        if code == 1:
            assert "nothing deleted" in proc.stderr and dump_store(store_path) == before
    assert cli("show", run).code == 3


# --- 9 (sibling): a listing of a scope that does not exist ------------------------------------------


def test_runs_of_a_mistyped_scope_is_not_found_not_empty(cli, club):
    """`runs P`, `runs P/N` and `runs P/N@V` naming nothing in the store exit 3 with a suggestion,
    instead of printing "no runs" with exit 0; an existing scope without matches still lists nothing."""
    for scope, hint in (("clb", "club"), ("club/karat", "club/karate"), ("club/karate@9", "versions are 1")):
        r = cli("runs", scope)
        _one_line_error(r, 3)
        assert hint in r.err, r.err
    r = cli("runs", "club/karate", "--status", "cancelled")
    assert r.code == 0 and "no runs" in r.out
    assert cli("runs", "club", "--json").json  # the runs of an existing project are listed


def test_help_and_mistyped_commands(capsys, tmp_path):
    """`cutbook help COMMAND` prints that command's help; a mistyped command names the nearest ones
    (difflib close matches; "did you mean" is common practice) and exits 2 without touching a store."""
    from workspace.cli import main

    store = tmp_path / "never.sqlite"
    assert main(["help", "run"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: cutbook run") and "--method" in out
    assert main(["help"]) == 0 and "commands:" in capsys.readouterr().out
    assert main(["--store", str(store), "rnu", "club/karate"]) == 2
    assert "no command 'rnu'; did you mean run?" in capsys.readouterr().err
    assert main(["--store", str(store), "sweps"]) == 2
    err = capsys.readouterr().err
    assert "did you mean" in err and "sweeps" in err
    assert main(["xyzzy"]) == 2 and "cutbook --help lists them" in capsys.readouterr().err
    assert main(["help", "rnu"]) == 2 and "did you mean run?" in capsys.readouterr().err
    assert not store.exists()
