"""`cutbook verify [--json]`: a flipped byte in any stored array is found and named by owner.

The store holds Zachary's karate club (tests/data/karate.csv) and a run with repeats,
so every kind of array exists: a version's five arrays (node offsets, node bytes, edge
ends u and v, weights) and a run's membership, stability counts and eigenvalues. One
byte in the middle of one stored blob is flipped with plain sqlite3; verify must exit
non-zero and its JSON must say ``ok: false`` with a finding for that blob whose
``belongs_to`` names the version (``club/karate@1``) or the run (``run N``).
"""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"

VERSION_COLUMNS = ["node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob"]
RUN_COLUMNS = ["membership_blob", "stability_blob", "eigenvalues_blob"]


@pytest.fixture
def filled(cli):
    assert cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    r = cli("run", "club/karate", "--method", "njw", "--k", "2", "--repeats", "3", "--json")
    assert r.code == 0, r.err
    return r.json["run"]


def _flip_middle_byte(store: Path, blob_hash: str) -> None:
    con = sqlite3.connect(store)
    try:
        (data,) = con.execute("SELECT data FROM blobs WHERE hash = ?", (blob_hash,)).fetchone()
        data = bytearray(data)
        data[len(data) // 2] ^= 0xFF
        con.execute("UPDATE blobs SET data = ? WHERE hash = ?", (bytes(data), blob_hash))
        con.commit()
    finally:
        con.close()


def _blob_of(store: Path, table: str, column: str) -> str:
    con = sqlite3.connect(store)
    try:
        return con.execute(f"SELECT {column} FROM {table} ORDER BY id LIMIT 1").fetchone()[0]
    finally:
        con.close()


def test_clean_store_verifies(cli, filled):
    r = cli("verify", "--json")
    assert r.code == 0
    assert r.json["ok"] is True and r.json["findings"] == []
    assert r.json["blobs_checked"] == 8  # 5 version arrays + membership, stability, eigenvalues
    text = cli("verify")
    assert text.code == 0 and text.out.startswith("ok: 8 arrays checked")


@pytest.mark.parametrize("table, column", [("network_versions", c) for c in VERSION_COLUMNS]
                         + [("runs", c) for c in RUN_COLUMNS])
def test_flipped_byte_is_reported_with_its_owner(cli, filled, store_path, table, column):
    blob = _blob_of(store_path, table, column)
    assert blob is not None
    _flip_middle_byte(store_path, blob)
    r = cli("verify", "--json")
    assert r.code == 1
    doc = r.json
    assert doc["ok"] is False
    found = [f for f in doc["findings"] if f.get("blob") == blob]
    assert len(found) == 1 and found[0]["kind"] == "blob", doc["findings"]
    owner = "club/karate@1" if table == "network_versions" else f"run {filled}"
    assert any(owner in who for who in found[0]["belongs_to"]), found[0]
    assert [f for f in doc["findings"] if f.get("blob") != blob] == []  # nothing else is blamed


def test_flipped_byte_through_the_real_cli(cli, filled, store_path):
    """A fresh interpreter, text and JSON: exit 1 and the owner named on the finding's line."""
    blob = _blob_of(store_path, "runs", "membership_blob")
    _flip_middle_byte(store_path, blob)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    base = [sys.executable, "-m", "workspace.cli", "--store", str(store_path), "verify"]
    text = subprocess.run(base, capture_output=True, text=True, env=env, timeout=120)
    assert text.returncode == 1, text.stderr
    assert text.stdout.startswith("PROBLEMS FOUND")
    assert f"run {filled}" in text.stdout
    js = subprocess.run(base + ["--json"], capture_output=True, text=True, env=env, timeout=120)
    assert js.returncode == 1 and '"ok": false' in js.stdout


def test_missing_blob_is_reported_with_its_owner(cli, filled, store_path):
    blob = _blob_of(store_path, "runs", "membership_blob")
    con = sqlite3.connect(store_path)
    con.execute("PRAGMA foreign_keys = OFF")
    con.execute("DELETE FROM blobs WHERE hash = ?", (blob,))
    con.commit()
    con.close()
    r = cli("verify", "--json")
    assert r.code == 1 and r.json["ok"] is False
    kinds = {f["kind"] for f in r.json["findings"]}
    assert {"missing_blob", "foreign_key"} <= kinds
    missing = [f for f in r.json["findings"] if f["kind"] == "missing_blob"]
    assert missing[0]["blob"] == blob and any(f"run {filled}" in w for w in missing[0]["belongs_to"])
