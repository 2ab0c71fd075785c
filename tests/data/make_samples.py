"""Write the small sample inputs of the io tests (deterministic).

Run: ``python tests/data/make_samples.py [OUTPUT_FOLDER]`` (default: this folder).

Good inputs: Zachary's karate club (as shipped in networkx:
``networkx.karate_club_graph``, 34 nodes, 78 weighted edges) with node ids
``"1".."34"`` in six formats - CSV with a header, TSV, whitespace text with
mixed blanks, GraphML, Matrix Market (symmetric) and node-link JSON - plus a
small directed GraphML file. Bad inputs go to ``bad/``; each one carries one
defect that a test in tests/io/test_io_bad_inputs.py names.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

BAD_FILES: dict[str, bytes] = {
    # weight text on line 5 (header line 1, blank line 3 counted)
    "nonnumeric_weight.csv": b"source,target,weight\na,b,1.5\n\nb,c,2\nc,d,heavy\n",
    "nan_weight.csv": b"a,b,1\nb,c,NaN\n",
    "infinite_weight.tsv": b"a\tb\t1\nb\tc\t2\n\n\nc\td\tinf\n",
    "negative_weight.txt": b"a  b   1\n\t\n b c -2\n",
    "wrong_columns.csv": b"a,b,1\nb,c,2\nc,d\nd,e,4\n",
    "invalid_utf8.csv": b"a,b,1\nb,c,2\nc,\xffd,3\n",
    "all_zero_weights.csv": b"a,b,0\nb,c,0.0\n",
    "empty.csv": b"",
    "header_only.csv": b"source,target,weight\n",
    "empty_id.csv": b"a,b\n,c\n",
    "entity_bomb.graphml": (
        b'<?xml version="1.0"?>\n'
        b'<!DOCTYPE graphml [\n'
        b' <!ENTITY lol "lol">\n'
        b' <!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">\n'
        b' <!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">\n'
        b']>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b' <graph edgedefault="undirected"><node id="&lol3;"/></graph>\n'
        b'</graphml>\n'),
    "external_entity.graphml": (
        b'<?xml version="1.0"?>\n'
        b'<!DOCTYPE graphml [<!ENTITY secret SYSTEM "file:///etc/hostname">]>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b' <graph edgedefault="undirected"><node id="&secret;"/></graph>\n'
        b'</graphml>\n'),
    "malformed.graphml": (
        b'<?xml version="1.0"?>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b' <graph edgedefault="undirected">\n'
        b'  <node id="a">\n'
        b' </graph>\n'
        b'</graphml>\n'),
    "asymmetric.graphml": (
        b'<?xml version="1.0" encoding="utf-8"?>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b'  <key id="w" for="edge" attr.name="weight" attr.type="double"/>\n'
        b'  <graph edgedefault="directed">\n'
        b'    <node id="a"/><node id="b"/><node id="c"/>\n'
        b'    <edge source="a" target="b"><data key="w">1</data></edge>\n'
        b'    <edge source="b" target="a"><data key="w">1</data></edge>\n'
        b'    <edge source="b" target="c"><data key="w">2</data></edge>\n'
        b'    <edge source="c" target="a"><data key="w">3</data></edge>\n'
        b'  </graph>\n'
        b'</graphml>\n'),
    "negative_weight.graphml": (
        b'<?xml version="1.0" encoding="utf-8"?>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b'  <key id="w" for="edge" attr.name="weight" attr.type="double"/>\n'
        b'  <graph edgedefault="undirected">\n'
        b'    <edge source="a" target="b"><data key="w">1</data></edge>\n'
        b'    <edge source="b" target="c">\n'
        b'      <data key="w">-4</data>\n'
        b'    </edge>\n'
        b'  </graph>\n'
        b'</graphml>\n'),
    "negative.mtx": (
        b"%%MatrixMarket matrix coordinate real general\n"
        b"% a comment line\n"
        b"3 3 3\n"
        b"1 2 1.0\n"
        b"2 3 -2.5\n"
        b"3 1 1.0\n"),
    "not_square.mtx": (
        b"%%MatrixMarket matrix coordinate real general\n"
        b"2 3 1\n"
        b"1 3 1.0\n"),
    "string_weight.json": json.dumps({
        "directed": False, "multigraph": False, "graph": {},
        "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],
        "links": [{"source": "a", "target": "b", "weight": 1},
                  {"source": "b", "target": "c", "weight": "2"}]}).encode(),
    "invalid.json": b'{\n  "nodes": [{"id": "a"}],\n  "links": [\n    {"source": "a" "target": "b"}\n  ]\n}\n',
    "self_loop.csv": b"a,b\nb,b\n",
    "duplicate.csv": b"a,b\nb,c\n\nb,a\n",
    "edges.unknown": b"a,b\n",
    "membership_unknown_node.csv": b"node,community\n1,red\n\n99,blue\n",
    "membership_duplicate_node.csv": b"node,community\n1,red\n2,red\n1,blue\n",
    "membership_no_header.csv": b"1,red\n2,blue\n",
}

DIRECTED_GRAPHML = (
    '<?xml version="1.0" encoding="utf-8"?>\n'
    '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
    '  <key id="w" for="edge" attr.name="weight" attr.type="double"/>\n'
    '  <graph edgedefault="directed">\n'
    '    <node id="a"/><node id="b"/><node id="c"/><node id="d"/><node id="lonely"/>\n'
    '    <edge source="a" target="b"><data key="w">2</data></edge>\n'
    '    <edge source="b" target="a"><data key="w">4</data></edge>\n'
    '    <edge source="b" target="c"><data key="w">3</data></edge>\n'
    '    <edge source="c" target="d"><data key="w">1</data></edge>\n'
    '    <edge source="d" target="c"><data key="w">1</data></edge>\n'
    '  </graph>\n'
    '</graphml>\n')


def karate_string_graph():
    """networkx's karate club graph relabelled to ids "1".."34"."""
    import networkx as nx

    G = nx.karate_club_graph()
    H = nx.Graph()
    H.add_nodes_from(str(i + 1) for i in sorted(G.nodes))
    H.add_weighted_edges_from((str(u + 1), str(v + 1), float(d["weight"]))
                              for u, v, d in G.edges(data=True))
    return H


def write_all(folder: Path) -> None:
    import networkx as nx
    import scipy.io
    import scipy.sparse as sp

    folder.mkdir(parents=True, exist_ok=True)
    (folder / "bad").mkdir(exist_ok=True)
    H = karate_string_graph()
    edges = [(u, v, d["weight"]) for u, v, d in H.edges(data=True)]

    def fmt(w: float) -> str:
        return str(int(w)) if float(w).is_integer() else repr(w)

    with open(folder / "karate.csv", "w", encoding="utf-8", newline="\n") as out:
        out.write("source,target,weight\n")
        out.writelines(f"{u},{v},{fmt(w)}\n" for u, v, w in edges)
    with open(folder / "karate.tsv", "w", encoding="utf-8", newline="\n") as out:
        out.writelines(f"{v}\t{u}\t{fmt(w)}\n" for u, v, w in reversed(edges))
    with open(folder / "karate.txt", "w", encoding="utf-8", newline="\n") as out:
        pads = ["  ", "\t", " \t ", " "]
        out.writelines(f"{' ' if k % 5 == 0 else ''}{u}{pads[k % 4]}{v}{pads[(k + 1) % 4]}"
                       f"{fmt(w)}{'  ' if k % 7 == 0 else ''}\n"
                       for k, (u, v, w) in enumerate(edges))
    nx.write_graphml(H, folder / "karate.graphml")
    n = H.number_of_nodes()
    rows = [int(u) - 1 for u, _, _ in edges]
    cols = [int(v) - 1 for _, v, _ in edges]
    vals = [w for _, _, w in edges]
    lower = sp.coo_array((vals, (cols, rows)), shape=(n, n))  # store the lower triangle
    scipy.io.mmwrite(folder / "karate.mtx", lower, symmetry="symmetric",
                     comment="Zachary karate club (networkx.karate_club_graph), ids 1..34")
    data = nx.node_link_data(H, edges="links")
    with open(folder / "karate.json", "w", encoding="utf-8") as out:
        json.dump(data, out, indent=1)
        out.write("\n")
    (folder / "directed.graphml").write_text(DIRECTED_GRAPHML, encoding="utf-8")
    for name, content in BAD_FILES.items():
        (folder / "bad" / name).write_bytes(content)


if __name__ == "__main__":
    write_all(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE)
