"""Helpers shared by tests (imported as ``tests_support``; conftest puts this folder on sys.path)."""

from __future__ import annotations

import sqlite3
from pathlib import Path


def write_edges(path: Path, rows, header: str | None = "source,target,weight", sep: str = ",") -> Path:
    with open(path, "w", encoding="utf-8") as fh:
        if header:
            fh.write(header.replace(",", sep) + "\n")
        for row in rows:
            fh.write(sep.join(str(x) for x in row) + "\n")
    return path


def dump_store(path: Path) -> dict:
    """Every user table's rows, for before/after comparisons ("store exactly as it was")."""
    if not Path(path).exists():
        return {}
    con = sqlite3.connect(path)
    try:
        tables = [r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table' ORDER BY name")]
        return {t: sorted(map(repr, con.execute(f'SELECT * FROM "{t}"').fetchall())) for t in tables}
    finally:
        con.close()
