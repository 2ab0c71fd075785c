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
    """Every user table's rows, for before/after comparisons ("store exactly as it was").

    A SQLAlchemy URL (a PostgreSQL store) is read with :func:`dump_any`."""
    if "://" in str(path):
        return dump_any(str(path))
    if not Path(path).exists():
        return {}
    con = sqlite3.connect(path)
    try:
        tables = [r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table' ORDER BY name")]
        return {t: sorted(map(repr, con.execute(f'SELECT * FROM "{t}"').fetchall())) for t in tables}
    finally:
        con.close()


def dump_any(store: str) -> dict:
    """Like :func:`dump_store`, for a store on either back end (an SQLite path or a SQLAlchemy URL),
    read through SQLAlchemy's reflection; values are normalised to ``repr`` of Python values."""
    from sqlalchemy import MetaData, create_engine, select

    url = store if "://" in str(store) else f"sqlite:///{store}"
    if "://" not in str(store) and not Path(store).exists():
        return {}
    engine = create_engine(url)
    try:
        meta = MetaData()
        meta.reflect(engine)
        out = {}
        with engine.connect() as con:
            for name, table in sorted(meta.tables.items()):
                out[name] = sorted(repr(tuple(bytes(v) if isinstance(v, memoryview) else v for v in row))
                                   for row in con.execute(select(table)))
        return out
    finally:
        engine.dispose()
