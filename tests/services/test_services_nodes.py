"""Node attribute tables stored with a network version (SQLite and PostgreSQL through the ``store`` fixture)."""

from __future__ import annotations

import json

import networkx as nx
import pytest
from sqlalchemy import func, select

from tests_support import dump_store
from workspace.errors import InputError, NotFoundError
from workspace.services import networks, nodes


def _club():
    # Zachary's karate club as shipped by networkx (its "club" attribute), with numbers, booleans and positions
    G = nx.karate_club_graph()
    G = nx.relabel_nodes(G, {i: f"m{i:02d}" for i in range(34)})
    for i, node in enumerate(sorted(G.nodes)):
        G.nodes[node]["leader"] = node in ("m00", "m33")
        G.nodes[node]["x"] = float(i % 6)
        G.nodes[node]["y"] = float(i // 6) / 3
    return G


def _stored(store, ref, name):
    return dict(nodes.node_values(store, ref, name)["nodes"])


def test_graphml_node_data_stored_equal_networkx_reading(store, tmp_path):
    G = _club()
    path = tmp_path / "club.graphml"
    nx.write_graphml(G, path)
    ref = nx.read_graphml(path)  # networkx.read_graphml: the reference reading of the same file
    out = networks.import_network(store, path, project="p", network="club")
    assert {c["name"]: c["type"] for c in out.node_table["columns"]} == \
        {"club": "text", "leader": "boolean", "x": "number", "y": "number"}
    for name in ("club", "leader", "x", "y"):
        assert _stored(store, "p/club", name) == {n: ref.nodes[n][name] for n in ref.nodes}, name


def test_node_link_fields_stored_equal_networkx_reading(store, tmp_path):
    G = _club()
    path = tmp_path / "club.json"
    path.write_text(json.dumps(nx.node_link_data(G, edges="links")), encoding="utf-8")
    # networkx.node_link_graph on the same document is the reference reading
    ref = nx.node_link_graph(json.loads(path.read_text(encoding="utf-8")), edges="links")
    networks.import_network(store, path, project="p", network="club")
    for name in ("club", "leader", "x", "y"):
        assert _stored(store, "p/club", name) == {str(n): ref.nodes[n][name] for n in ref.nodes}, name


def _csv(path, rows, header="node,district,score"):
    path.write_text(header + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_attribute_only_change_keeps_content_hash_and_shares_graph_arrays(store, tmp_path):
    from workspace.store.schema import Blob, NetworkVersion

    G = _club()
    edges = tmp_path / "club.csv"
    edges.write_text("source,target\n" + "\n".join(f"{u},{v}" for u, v in G.edges) + "\n", encoding="utf-8")
    first = networks.import_network(store, edges, project="p", network="club")
    assert first.node_table is None
    with store.read() as s:
        blobs_before = s.scalar(select(func.count()).select_from(Blob))
    table = _csv(tmp_path / "a.csv", [f"{n},{'north' if i < 17 else 'south'},{i}" for i, n in enumerate(sorted(G))])
    added = nodes.add_node_table(store, "p/club", table)
    assert added["new_version"] and added["version"] == 2
    other = _csv(tmp_path / "b.csv", [f"{n},{'east' if i < 10 else 'west'},{i}" for i, n in enumerate(sorted(G))])
    again = nodes.add_node_table(store, "p/club", other)
    assert again["version"] == 3
    with store.read() as s:
        v1, v2, v3 = s.scalars(select(NetworkVersion).order_by(NetworkVersion.number)).all()
        # the graph content hash covers the graph only (common practice: content addressing of the arrays)
        assert v1.content_hash == v2.content_hash == v3.content_hash == first.content_hash
        for col in ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob"):
            assert getattr(v1, col) == getattr(v2, col) == getattr(v3, col)
        t2, t3 = nodes.table_row(s, v2.id), nodes.table_row(s, v3.id)
        assert t2.attributes_hash != t3.attributes_hash
        # no edge array was stored again: only the columns' own arrays were added
        # table a: district codes, the all-present mask, dictionary offsets and bytes, score values (5);
        # table b: district codes, dictionary offsets and bytes (3) - its score values and mask equal a's
        assert s.scalar(select(func.count()).select_from(Blob)) == blobs_before + 5 + 3
    # the same table again: nothing new
    assert nodes.add_node_table(store, "p/club", other)["new_version"] is False
    assert _stored(store, "p/club@2", "district")["m00"] == "north"
    assert _stored(store, "p/club", "district")["m00"] == "east"
    assert _stored(store, "p/club", "score")["m05"] == 5.0


def test_reimport_with_other_attributes_makes_a_version_with_the_same_hash(store, tmp_path):
    G = _club()
    path = tmp_path / "club.graphml"
    nx.write_graphml(G, path)
    a = networks.import_network(store, path, project="p", network="club")
    assert networks.import_network(store, path, project="p", network="club").new_version is False
    G.nodes["m03"]["club"] = "Officer"  # one attribute changes, not the graph
    nx.write_graphml(G, path)
    b = networks.import_network(store, path, project="p", network="club")
    assert b.new_version and b.version == 2 and b.content_hash == a.content_hash
    assert _stored(store, "p/club@1", "club")["m03"] == "Mr. Hi"  # karate club data in networkx
    assert _stored(store, "p/club@2", "club")["m03"] == "Officer"


def test_new_graph_without_a_table_keeps_the_parents_attributes(store, tmp_path):
    edges = tmp_path / "e.csv"
    edges.write_text("source,target\na,b\nb,c\n", encoding="utf-8")
    networks.import_network(store, edges, project="p", network="n",
                            prepared=networks.prepare_import(edges, nodes=_csv(tmp_path / "t.csv", ["a,x,1", "c,y,3"])))
    edges.write_text("source,target\na,b\nb,d\n", encoding="utf-8")  # c leaves, d arrives
    out = networks.import_network(store, edges, project="p", network="n")
    assert out.version == 2 and out.node_table is not None
    assert _stored(store, "p/n", "district") == {"a": "x", "b": None, "d": None}


def test_bad_node_tables_leave_the_store_as_it_was(store, store_target, tmp_path):
    edges = tmp_path / "e.csv"
    edges.write_text("source,target\na,b\nb,c\n", encoding="utf-8")
    networks.import_network(store, edges, project="p", network="n")
    before = dump_store(store_target)
    bad = [(_csv(tmp_path / "ghost.csv", ["a,x,1", "zz,y,2"]), "node 'zz' of the node table is not in the network"),
           (_csv(tmp_path / "twice.csv", ["a,x,1", "a,y,2"]), "listed twice"),
           (_csv(tmp_path / "short.csv", ["a,x"]), "expected 3 fields")]
    for path, message in bad:
        with pytest.raises(InputError, match=message) as info:
            nodes.add_node_table(store, "p/n", path)
        assert str(path.name) in str(info.value.path)
    with pytest.raises(InputError, match="--coords column 'district' holds text"):
        nodes.add_node_table(store, "p/n", _csv(tmp_path / "ok.csv", ["a,x,1"]), coords=("district", "score"))
    with pytest.raises(InputError, match="not in the network"):
        networks.import_network(store, edges, project="p", network="n",
                                prepared=networks.prepare_import(edges, nodes=bad[0][0]))
    assert dump_store(store_target) == before
    with pytest.raises(NotFoundError, match="no node attribute table"):
        nodes.node_values(store, "p/n", "district")


def test_geographic_coordinates_by_name(store, tmp_path):
    import numpy as np

    edges = tmp_path / "e.csv"
    edges.write_text("source,target\na,b\nb,c\n", encoding="utf-8")
    networks.import_network(store, edges, project="p", network="n")
    table = _csv(tmp_path / "geo.csv", ["a,60.0,10.0", "b,60.0,11.0", "c,61.0,10.0"], header="node,lat,lon")
    res = nodes.add_node_table(store, "p/n", table, coords=("lat", "lon"))
    assert res["table"]["coords"] == {"x": "lon", "y": "lat", "kind": "geographic"}
    with store.read() as s:
        v = networks.resolve_version(s, networks.VersionRef.parse("p/n"))
        pos, spec = nodes.coordinates(s, v.id)
    # equidistant cylindrical projection (Snyder 1987): x = lon * cos(mean latitude), y = lat
    phi0 = np.deg2rad(np.mean([60.0, 60.0, 61.0]))
    np.testing.assert_allclose(pos, [[10 * np.cos(phi0), 60], [11 * np.cos(phi0), 60], [10 * np.cos(phi0), 61]])


def test_verify_names_node_table_blobs_and_delete_removes_them(store, tmp_path):
    from workspace.services.delete import delete_target
    from workspace.services.verify import verify_store
    from workspace.store.schema import Blob, NodeTable, NodeTableColumn

    edges = tmp_path / "e.csv"
    edges.write_text("source,target\na,b\nb,c\n", encoding="utf-8")
    networks.import_network(store, edges, project="p", network="n",
                            prepared=networks.prepare_import(edges, nodes=_csv(tmp_path / "t.csv", ["a,x,1", "c,y,3"])))
    networks.import_network(store, edges, project="q", network="m")  # another network's blobs stay
    assert verify_store(store)["ok"]
    with store.read() as s:
        owned = {h for c in s.scalars(select(NodeTableColumn)).all()
                 for h in (c.values_blob, c.present_blob, c.dictionary_offsets_blob, c.dictionary_bytes_blob) if h}
    assert owned
    delete_target(store, "p/n")
    with store.read() as s:
        assert s.scalar(select(func.count()).select_from(NodeTable)) == 0
        assert s.scalar(select(func.count()).select_from(NodeTableColumn)) == 0
        left = set(s.scalars(select(Blob.hash)).all())
    # the column arrays nothing else uses are gone (common practice: no orphan blobs after a delete)
    assert not (owned & left)
    assert verify_store(store)["ok"]


def test_numeric_ids_apply_to_the_network_files_own_node_data(store, tmp_path):
    from workspace.domain import ImportPolicy

    path = tmp_path / "z.graphml"
    G = nx.Graph()
    G.add_edge("007", "08")
    G.nodes["007"]["zone"] = "east"
    nx.write_graphml(G, path)
    out = networks.import_network(store, path, project="p", network="z",
                                  policy=ImportPolicy(numeric_ids=True))
    assert out.node_table is not None
    # ids read as integers by the import ("007" -> "7") are matched the same way in the node data
    assert _stored(store, "p/z", "zone") == {"7": "east", "8": None}
