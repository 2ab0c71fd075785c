"""Every bad input through the real ``cutbook`` command, in a fresh interpreter.

For each file of tests/data/bad/ (the directory listing, so a new file cannot be
skipped), plus a missing file, a directory and very long lines built at test time:
``cutbook import FILE --project P --network N`` (membership files: ``cutbook attach``)
must exit != 0, print exactly one stderr line ``cutbook: error: FILE[:LINE]: …`` and
nothing on stdout, show no traceback, and leave the store exactly as it was: every
table's rows, the ``projects --json`` / ``networks --json`` listings and
``verify --json`` compared before and after. The store already holds one good
network (Zachary's karate club, tests/data/karate.csv); odd-numbered cases import
into that existing network (no version may be added), even-numbered ones into a
new project (no project or network may be created).

Expected lines and message fragments were read off each file by hand (the line of
the defect, 1-based, header and blank lines counted), not taken from the product.
"""

from __future__ import annotations

import contextlib
import importlib.util
import io
import json
import os
import sqlite3
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from tests_support import dump_store

REPO = Path(__file__).resolve().parents[2]
BAD = REPO / "tests" / "data" / "bad"
KARATE = REPO / "tests" / "data" / "karate.csv"

_spec = importlib.util.spec_from_file_location("make_reliability_bad_inputs",
                                               Path(__file__).with_name("make_reliability_bad_inputs.py"))
make_bad = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(make_bad)


@dataclass(frozen=True)
class Case:
    fragment: str  # part of the message
    line: int | None  # 1-based line named in the message; None: no line applies
    flags: tuple[str, ...] = ()  # import policy flags the case needs to reach its defect
    attach: bool = False  # a membership file: `cutbook attach FILE --to club/karate`
    bug: str | None = None  # a product bug this case shows (kept as a strict xfail)
    extra: dict = field(default_factory=dict)


W2 = ("--weight", "2")
WNAME = ("--weight", "weight")
CASES: dict[str, Case] = {
    # --- files written by tests/data/make_samples.py ---------------------------------------------
    "all_zero_weights.csv": Case("no edge left to import (2 record(s) read, 2 zero-weight dropped", None, W2),
    "asymmetric.graphml": Case("directed input has 2 asymmetric pair(s)", 9),
    "duplicate.csv": Case("duplicate edge 'a' - 'b' (first at line 1)", 4, ("--duplicates", "error")),
    "edges.unknown": Case("cannot tell the format from the extension '.unknown'", None),
    "empty.csv": Case("the file holds no records", None),
    "empty_id.csv": Case("empty node id", 2),
    "entity_bomb.graphml": Case("refused: the file declares the XML entity 'lol'", 3),
    "external_entity.graphml": Case("refused: the file declares the XML external entity 'secret'", 2),
    "header_only.csv": Case("a header but no edge records", 1, WNAME),
    "infinite_weight.tsv": Case("weight 'inf' is infinite", 5, W2),
    "invalid.json": Case("not valid JSON: Expecting ',' delimiter", 4),
    "invalid_utf8.csv": Case("invalid UTF-8 byte 0xff", 3),
    "malformed.graphml": Case("not well-formed XML: mismatched tag", 5),
    "membership_duplicate_node.csv": Case("node '1' is listed twice (first at line 2)", 4, attach=True),
    "membership_no_header.csv": Case("needs the header line node,community", 1, attach=True),
    "membership_unknown_node.csv": Case("node '99' is not in the network", 4, attach=True),
    "nan_weight.csv": Case("weight 'NaN' is NaN", 2, W2),
    "negative.mtx": Case("matrix entry -2.5 is negative", 5),
    "negative_weight.graphml": Case("weight '-4' is negative", 6, WNAME),
    "negative_weight.txt": Case("weight '-2' is negative", 3, W2),
    "nonnumeric_weight.csv": Case("weight 'heavy' is not a number", 5, WNAME),
    "not_square.mtx": Case("the matrix is 2 x 3; an adjacency matrix must be square", None),
    "self_loop.csv": Case("self-loop on node 'b'", 2, ("--self-loops", "error")),
    "string_weight.json": Case("weight '2' (attribute 'weight') is not a number (links[1])", None, WNAME),
    "wrong_columns.csv": Case("expected 3 fields (as on line 1), found 2", 3),
    # --- files written by tests/reliability/make_reliability_bad_inputs.py ------------------------
    "utf16_with_bom.csv": Case("invalid UTF-8 byte 0xff", 1),
    "bom_bad_weight.csv": Case("weight 'x' is not a number", 3, WNAME),
    "bom_concatenated.csv": Case("byte-order mark (U+FEFF) inside the file", 3),
    "hash_in_id.csv": Case("expected 2 fields (as on line 1), found 1", 2, ("--comment", "#")),
    "space_in_id.txt": Case("expected 2 fields (as on line 1), found 3", 2),
    "tab_in_id.tsv": Case("expected 2 fields (as on line 1), found 3", 3),
    "self_loops_only.csv": Case("no edge left to import (3 record(s) read, 0 zero-weight dropped, "
                                "3 self-loop(s) dropped)", None),
    "self_loops_only.graphml": Case("no edge left to import (1 record(s) read", None),
    "garbage.csv": Case("invalid UTF-8 byte 0xf5", 1),
    "garbage.graphml": Case("not well-formed XML", 1),
    "garbage.mtx": Case("invalid UTF-8 byte 0x89", 1),
    "garbage.json": Case("invalid UTF-8 byte 0xfc", 1),
    "damaged.csv.gz": Case("damaged gzip data", None),
    "nul_in_id.csv": Case("NUL character", None),
    "truncated.graphml": Case("not well-formed XML: unclosed token", 6),
    "nan_weight.graphml": Case("weight 'NaN' is NaN", 6, WNAME),
    "parameter_entity.graphml": Case("refused: the file declares the XML external entity 'remote'", 3),
    "empty.graphml": Case("not well-formed XML: no element found", 1),
    "truncated.mtx": Case("not a readable Matrix Market file", None),
    "truncated_banner.mtx": Case("not a readable Matrix Market file", 1),
    "not_square_array.mtx": Case("the matrix is 2 x 3; an adjacency matrix must be square", None),
    "index_out_of_range.mtx": Case("index out of bounds", 4),
    "infinite_weight.mtx": Case("matrix entry inf is infinite", 4),
    "all_zero_weights.mtx": Case("no edge left to import (2 record(s) read, 2 zero-weight dropped", None),
    "wrong_shape_list.json": Case("expected a node-link JSON object", None),
    "wrong_shape_nodes.json": Case('"nodes" and "links" must be JSON arrays', None),
    "links_not_objects.json": Case("each link must be an object", None),
    "truncated.json": Case("not valid JSON: Unterminated string", 24),
    "negative_weight.json": Case("weight -1 is negative", None, WNAME),
    "asymmetric.json": Case("directed input has 2 asymmetric pair(s)", None),
    "header_only.tsv": Case("a header but no edge records", 1, WNAME),
    "nonnumeric_weight.txt": Case("weight 'two' is not a number", 2, W2),
    "wrong_columns.tsv": Case("expected 3 fields (as on line 1), found 2", 2),
}

# Inputs built at test time (path relative to the case folder; see _special_inputs).
SPECIAL: dict[str, Case] = {
    "missing file": Case("no such file", None),
    "a directory": Case("is a directory", None),
    "no extension": Case("cannot tell the format from the extension '(none)'", None),
    "long_record.csv": Case("expected 2 fields (as on line 1), found 1000000", 2),
    "long_first_line.csv": Case("node id longer than 4096 bytes", 1),
    "long_second_line.csv": Case("node id longer than 4096 bytes", 2),
}

ALL_NAMES = sorted(p.name for p in BAD.iterdir()) + list(SPECIAL)


def _case(name: str) -> Case:
    return CASES.get(name) or SPECIAL[name]


def _in_process(store: Path, *argv: str) -> tuple[int, str, str]:
    from workspace.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["--store", str(store), *argv])
    return code, out.getvalue(), err.getvalue()


def snapshot(store: Path) -> dict:
    """Every table's rows, the project and network listings and the verify document."""
    doc = {"tables": dump_store(store)}
    for name, argv in (("projects", ["projects"]), ("networks", ["networks"]), ("verify", ["verify"])):
        code, out, err = _in_process(store, *argv, "--json")
        assert code == 0, (name, err)
        doc[name] = json.loads(out)
    doc["verify"].pop("store")  # the URL: same file, named the same way both times
    return doc


def _special_inputs(folder: Path) -> dict[str, Path]:
    paths = make_bad.large_bad_inputs(folder / "large")
    (folder / "network.csv").mkdir()
    (folder / "edges").write_text("a,b\n", encoding="utf-8")
    return {"missing file": folder / "absent.csv", "a directory": folder / "network.csv",
            "no extension": folder / "edges", **paths}


@dataclass
class Outcome:
    code: int
    out: str
    err: str


def _env() -> dict:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    env.pop("CUTBOOK_DEBUG", None)
    return env


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory):
    """Every case's command in a fresh ``python -m workspace.cli`` (as many at a time as there are
    cores), each on its own copy of a store that holds one good network."""
    root = tmp_path_factory.mktemp("bad_inputs")
    template = root / "template.sqlite"
    code, _, err = _in_process(template, "import", str(KARATE), "--project", "club", "--network", "karate",
                               "--weight", "weight")
    assert code == 0, err
    special = _special_inputs(root / "special")
    cases = {}
    for index, name in enumerate(ALL_NAMES):
        case = _case(name)
        folder = root / f"case{index:02d}"
        folder.mkdir()
        path = special.get(name, BAD / name)
        if case.attach:
            argv = ["attach", str(path), "--to", "club/karate", "--label", "survey"]
        else:
            project, network = ("club", "karate") if index % 2 else ("incoming", "edges")
            argv = ["import", str(path), "--project", project, "--network", network, *case.flags]
        store = _copy_store(template, folder / "store.sqlite")
        cases[name] = {"path": path, "argv": argv, "store": store, "before": snapshot(store)}

    def run(name):
        c = cases[name]
        proc = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(c["store"]), *c["argv"]],
                              capture_output=True, text=True, timeout=300, env=_env())
        return name, Outcome(proc.returncode, proc.stdout, proc.stderr)

    with ThreadPoolExecutor(max_workers=max(2, min(4, os.cpu_count() or 2))) as pool:
        for name, outcome in pool.map(run, ALL_NAMES):
            cases[name]["outcome"] = outcome
    return cases


def _copy_store(src: Path, dst: Path) -> Path:
    a, b = sqlite3.connect(src), sqlite3.connect(dst)
    try:
        a.backup(b)
    finally:
        b.close()
        a.close()
    return dst


def test_every_bad_file_has_an_expectation():
    listed = {p.name for p in BAD.iterdir()}
    assert listed - set(CASES) == set(), "add the new bad files to CASES"
    assert set(CASES) - listed == set(), "CASES names files that are not in tests/data/bad"
    assert len(listed) >= 25


def test_generated_bad_files_match_their_generator():
    for name, content in make_bad.BAD_FILES.items():
        assert (BAD / name).read_bytes() == content, f"re-run make_reliability_bad_inputs.py ({name})"


def _params():
    for name in ALL_NAMES:
        case = _case(name)
        marks = [pytest.mark.xfail(strict=True, reason=case.bug)] if case.bug else []
        yield pytest.param(name, marks=marks, id=name)


@pytest.mark.parametrize("name", list(_params()))
def test_bad_input_through_the_cli(outcomes, name):
    case = _case(name)
    c = outcomes[name]
    path, got = c["path"], c["outcome"]
    report_line = f"{name}: exit {got.code}: {got.err.strip()[:300]}"
    print(report_line)  # shown with -s; collected in the reliability report
    assert "Traceback" not in got.err and "Traceback" not in got.out, report_line
    assert got.code != 0, report_line
    assert got.out == "", f"nothing may be printed on stdout: {got.out!r}"
    lines = got.err.splitlines()
    assert len(lines) == 1 and got.err.endswith("\n"), f"exactly one stderr line expected: {got.err!r}"
    assert got.code == 1, report_line
    prefix = f"cutbook: error: {path}:{case.line}: " if case.line is not None else f"cutbook: error: {path}: "
    assert lines[0].startswith(prefix), f"expected {prefix!r}…, got {lines[0]!r}"
    assert case.fragment in lines[0], f"expected {case.fragment!r} in {lines[0]!r}"
    assert "internal error" not in lines[0]
    after = snapshot(c["store"])
    assert after == c["before"], "the store changed"
    assert after["verify"]["ok"] is True


def test_json_mode_also_prints_one_error_line_and_no_document(tmp_path):
    """With --json a failed import prints no (half) JSON document, only the error line."""
    store = tmp_path / "s.sqlite"
    _in_process(store, "import", str(KARATE), "--project", "club", "--network", "karate", "--weight", "weight")
    before = snapshot(store)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    proc = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), "import",
                           str(BAD / "invalid_utf8.csv"), "--project", "club", "--network", "karate", "--json"],
                          capture_output=True, text=True, timeout=120, env=env)
    assert proc.stdout == ""
    expected = (f"cutbook: error: {BAD / 'invalid_utf8.csv'}:3: invalid UTF-8 byte 0xff at byte column 3; "
                "save the file as UTF-8\n")
    assert snapshot(store) == before
    assert proc.returncode == 1 and proc.stderr == expected


def test_ids_with_hash_tab_and_space_are_kept_verbatim_where_the_format_allows(tmp_path):
    """Not errors: CSV fields (RFC 4180, 2005) may hold '#', tabs and blanks; without --comment
    a '#' is an ordinary character. The node ids must come back exactly, found by `where`."""
    store = tmp_path / "s.sqlite"
    f = tmp_path / "odd_ids.csv"
    f.write_bytes(b'source,target\nroom #1,"tab\there"\n"tab\there", plain\nplain,room #1\n')
    code, out, err = _in_process(store, "import", str(f), "--project", "p", "--network", "odd", "--json")
    assert code == 0, err
    assert json.loads(out)["nodes"] == 4  # ' plain' and 'plain' are different ids: blanks are kept
    for node in ("room #1", "tab\there", " plain", "plain"):
        code, out, err = _in_process(store, "where", node, "--network", "p/odd", "--json")
        assert code == 0, (node, err)
        assert json.loads(out)["versions_with_node"] == [1]
    code, _, err = _in_process(store, "where", "room", "--network", "p/odd")
    assert code == 3 and "is in no version" in err


def test_leading_utf8_bom_is_dropped(tmp_path):
    """A leading UTF-8 byte-order mark is not part of the first id (common practice: RFC 3629 §6)."""
    store = tmp_path / "s.sqlite"
    f = tmp_path / "bom.csv"
    f.write_bytes(b"\xef\xbb\xbfa,b\nb,c\n")
    assert _in_process(store, "import", str(f), "--project", "p", "--network", "bom")[0] == 0
    assert _in_process(store, "where", "a", "--network", "p/bom")[0] == 0
    assert _in_process(store, "where", "\ufeffa", "--network", "p/bom")[0] == 3
