"""Check: an import gives bit for bit the same stored content on this checkout and on another.

Run: ``python tests/benchmarks/import_equivalence.py --against DIR`` where ``DIR`` is another
checkout of the project (for example ``git worktree add /tmp/base main``). Every file of
``tests/data`` and ``tests/data/bad`` plus generated edge lists (blank, comment and CRLF lines,
quoted fields, ids of 1 to 300 bytes around the 8-byte word boundaries, non-ASCII ids, weights,
duplicates, self-loops, directed rows, errors on known lines) is read by
``services.networks.prepare_import`` under several policies, in a fresh interpreter on each
checkout. For each case the content hash, the report, the policy, the blob hash of each stored
array, or the error's type and message (with file and line), are compared. Exit status 1 and the
differing cases are printed when any differs.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

POLICIES = [
    {},
    {"duplicates": "sum", "self_loops": "keep"},
    {"duplicates": "error", "self_loops": "error"},
    {"duplicates": "first", "header": "no"},
    {"weight": 2},
    {"numeric_ids": True},
    {"directed": "keep", "comment": "#"},
    {"header": "yes", "delimiter": "whitespace"},
]


def _word(rng: random.Random, length: int, alphabet: str) -> str:
    return "".join(rng.choice(alphabet) for _ in range(length))


def generate(folder: Path) -> list[Path]:
    """Edge lists built from a seeded generator (the same files on every run)."""
    rng = random.Random(2026)
    files = []
    for length in (1, 7, 8, 9, 16, 17, 32, 33, 40, 64, 65, 129, 300):
        for variant in ("plain", "blank", "crlf", "comment", "unicode", "weights", "dup", "quoted",
                        "fixed"):
            n_nodes = rng.randint(5, 300)
            alphabet = "abcdefgXYZ0123456789-_." if variant != "unicode" else "aé漢字😀ßz"
            shortest = length if variant == "fixed" else max(1, length - 3)  # fixed: ids of one length
            ids = sorted({_word(rng, rng.randint(shortest, length), alphabet) for _ in range(n_nodes)})
            lines = ["source,target,weight"] if rng.random() < 0.5 else []
            for _ in range(rng.randint(3, 4 * len(ids))):
                a, b = rng.choice(ids), rng.choice(ids)
                w = f"{rng.choice([1, 2, 0.5, 0, 3.25]) if variant == 'weights' else rng.randint(1, 9)}"
                if variant == "quoted":
                    a = f'"{a},x"'
                lines.append(f"{a},{b},{w}")
                if variant == "dup" and rng.random() < 0.2:
                    lines.append(f"{b},{a},{w}")
                if variant == "blank" and rng.random() < 0.1:
                    lines.append("")
                if variant == "comment" and rng.random() < 0.1:
                    lines.append("# a comment line")
            end = "\r\n" if variant == "crlf" else "\n"
            path = folder / f"gen_{length}_{variant}.csv"
            path.write_bytes((end.join(lines) + end).encode("utf-8"))
            files.append(path)
    # larger than the 256 KiB header sample: header, weights, a blank line, quotes
    for variant in ("big", "big_blank", "big_quoted", "big_dup"):
        ids = [f"node-{i:05d}" for i in range(3000)]
        lines = ["from,to,w"]
        for i in range(40000):
            a, b = rng.choice(ids), rng.choice(ids)
            if variant == "big_quoted" and i % 7 == 0:
                a = f'"{a}"'
            lines.append(f"{a},{b},{rng.randint(1, 5)}")
            if variant == "big_blank" and i in (5, 39000):
                lines.append("")
        if variant == "big_dup":
            lines.append(lines[1])
        path = folder / f"gen_{variant}.csv"
        path.write_text("\n".join(lines) + "\n")
        files.append(path)
    # the same edges as whitespace text, and a numeric-id file
    path = folder / "gen_ws.txt"
    path.write_text("\n".join(f"  n{rng.randint(0, 50)}\t n{rng.randint(0, 50)}  {rng.randint(1, 5)} "
                              for _ in range(400)) + "\n")
    files.append(path)
    path = folder / "gen_numeric.csv"
    path.write_text("\n".join(f"{rng.choice(['', '+', '0'])}{rng.randint(0, 99)},{rng.randint(0, 99)}"
                              for _ in range(500)) + "\n\n\n")
    files.append(path)
    return files


def run_cases(files: list[str]) -> dict:
    """In this interpreter: the outcome of every (file, policy) case."""
    from workspace.domain import ImportPolicy
    from workspace.services.networks import prepare_import

    if os.environ.get("EQUIVALENCE_FILE_MODE"):
        # every delimited file through the file-mode reader, where this checkout has one
        from workspace.io import delimited

        if hasattr(delimited, "STREAM_FROM_BYTES"):
            delimited.STREAM_FROM_BYTES = 0
    if os.environ.get("EQUIVALENCE_ENCODE_THREADS"):
        # every id encoding through the two-thread path, where this checkout has one
        from workspace.io import canonical

        if hasattr(canonical, "PARALLEL_ENCODE_MIN_RECORDS"):
            canonical.PARALLEL_ENCODE_MIN_RECORDS = 1
        if hasattr(canonical, "COMPONENTS_BESIDE_MERGE_MIN"):
            canonical.COMPONENTS_BESIDE_MERGE_MIN = 1
        from workspace.io import _common

        if hasattr(_common, "PARALLEL_CAST_MIN_VALUES"):
            _common.PARALLEL_CAST_MIN_VALUES = 1

    out = {}
    for f in files:
        for i, pol in enumerate(POLICIES):
            key = f"{os.path.basename(f)} #{i}"
            try:
                p = prepare_import(f, policy=ImportPolicy(**pol))
            except Exception as err:  # noqa: BLE001 - the outcome compared is the error itself
                out[key] = {"error": type(err).__name__, "message": str(err)}
                continue
            out[key] = {"hash": p.content_hash, "report": p.report, "policy": p.policy,
                        "format": p.format,
                        "blobs": {name: [a.hash, a.dtype, a.length, a.raw_size]
                                  for name, a in p.arrays.items()}}
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--against", required=True, help="another checkout of the project")
    ap.add_argument("--file-mode", action="store_true",
                    help="here, read every delimited file the way large ones are read (from the file "
                         "itself, io.delimited.read_delimited_file); there, as that checkout does")
    ap.add_argument("--encode-threads", action="store_true",
                    help="here, take the two-thread paths of large files for every file (id encoding, "
                         "weight cast, components beside the merge: io.canonical."
                         "PARALLEL_ENCODE_MIN_RECORDS, COMPONENTS_BESIDE_MERGE_MIN, io._common."
                         "PARALLEL_CAST_MIN_VALUES); there, as that checkout does")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        files = json.loads(Path(args.child).read_text())
        print(json.dumps(run_cases(files), sort_keys=True))
        return
    with tempfile.TemporaryDirectory() as tmp:
        files = sorted(str(p) for p in (ROOT / "tests" / "data").rglob("*") if p.is_file()
                       and p.suffix != ".py")
        files += [str(p) for p in generate(Path(tmp))]
        listing = Path(tmp) / "files.json"
        listing.write_text(json.dumps(files))
        results = []
        for tree in (ROOT, Path(args.against).resolve()):
            env = {**os.environ, "PYTHONPATH": str(tree)}
            env.pop("EQUIVALENCE_FILE_MODE", None)
            env.pop("EQUIVALENCE_ENCODE_THREADS", None)
            if args.file_mode and tree == ROOT:
                env["EQUIVALENCE_FILE_MODE"] = "1"
            if args.encode_threads and tree == ROOT:
                env["EQUIVALENCE_ENCODE_THREADS"] = "1"
            done = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--against", ".",
                                   "--child", str(listing)], env=env, cwd=tree, capture_output=True,
                                  text=True, check=True)
            results.append(json.loads(done.stdout))
    mine, theirs = results
    differ = [k for k in sorted(set(mine) | set(theirs)) if mine.get(k) != theirs.get(k)]
    errors = sum("error" in v for v in mine.values())
    print(f"{len(mine)} cases ({len(files)} files x {len(POLICIES)} policies), {errors} refused; "
          f"{len(differ)} differ")
    for k in differ[:20]:
        print(f"  {k}\n    here:  {json.dumps(mine.get(k))[:600]}\n    there: {json.dumps(theirs.get(k))[:600]}")
    sys.exit(1 if differ else 0)


if __name__ == "__main__":
    main()
