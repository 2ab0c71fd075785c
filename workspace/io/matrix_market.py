"""Matrix Market reader on ``scipy.io.mminfo`` / ``scipy.io.mmread``.

Row and column ``i`` (1-based, as the format counts) is node ``"i"``; every
index ``1..n`` is a node, so empty rows become isolated nodes.
"""

from __future__ import annotations

import io
import re

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.domain import ImportPolicy
from workspace.errors import InputError
from workspace.io._common import (
    EdgeRecords,
    LineMap,
    Progress,
    check_utf8,
    check_weights,
    normalise_newlines,
    report_progress,
    strip_bom,
)

_LINE = re.compile(r"[Ll]ine (\d+)")


def _ids(indices: np.ndarray) -> pa.Array:
    """1-based decimal id strings for 0-based indices."""
    return pc.cast(pa.array(indices.astype(np.int64) + 1), pa.string())


def read_matrix_market(path: str, data: bytes, policy: ImportPolicy,
                       progress: Progress = None) -> EdgeRecords:
    """Read a square Matrix Market matrix as a weighted adjacency matrix.

    Parameters
    ----------
    path : str
    data : bytes
    policy : ImportPolicy
        ``weight``: None reads each stored non-zero entry as an edge of
        weight 1; any other value uses the stored values as weights.
    progress : callable or None, default None

    Returns
    -------
    EdgeRecords
        Coordinate format: one record per stored entry, in file order.
        ``symmetric`` matrices are undirected (each stored entry is one
        edge); ``general`` ones are directed (entry ``(i, j)`` is the arc
        ``i -> j``; a general matrix that is symmetric passes the
        ``directed="error"`` rule).

    Raises
    ------
    InputError
        Not Matrix Market, a non-square or complex / skew-symmetric matrix,
        values that are NaN, infinite or negative (with the entry's line).

    Notes
    -----
    Explicitly stored zeros are not edges (they are counted as zero-weight
    records). Array (dense) format: every non-zero entry is a record; for
    ``symmetric`` the lower triangle as stored.

    References
    ----------
    R. F. Boisvert, R. Pozo, K. Remington, "The Matrix Market Exchange
    Formats: Initial Design", NIST IR 5935 (1996).
    """
    import scipy.io

    data = normalise_newlines(strip_bom(data))
    check_utf8(data, path)
    try:
        rows, cols, entries, layout, field, symmetry = scipy.io.mminfo(io.BytesIO(data))
        report_progress(progress, "parse", 0, int(entries))
        matrix = scipy.io.mmread(io.BytesIO(data))
    except (ValueError, OSError, IndexError, TypeError) as err:
        text = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        found = _LINE.search(text)
        raise InputError(f"not a readable Matrix Market file: {text}", path=path,
                         line=int(found.group(1)) if found else None) from None
    if rows != cols:
        raise InputError(f"the matrix is {rows} x {cols}; an adjacency matrix must be square",
                         path=path, line=None)
    if field == "complex" or symmetry == "hermitian":
        raise InputError("complex matrices are not supported as networks", path=path)
    if symmetry == "skew-symmetric":
        raise InputError("skew-symmetric matrices hold negative weights; not a network",
                         path=path)
    n = int(rows)
    directed = symmetry == "general"

    lines = LineMap(data)
    first_bytes = np.frombuffer(data, dtype=np.uint8)[lines.starts] if lines.n_rows else \
        np.zeros(0, dtype=np.uint8)
    content_rows = lines.rows[first_bytes != ord("%")]
    entry_lines = content_rows[1:] + 1  # after the size line; 1-based

    if layout == "coordinate":
        stored = int(entries)
        row = np.asarray(matrix.row[:stored], dtype=np.int64)
        col = np.asarray(matrix.col[:stored], dtype=np.int64)
        values = np.asarray(matrix.data[:stored])

        def locate(k: int):
            line = int(entry_lines[k]) if k < entry_lines.size else None
            return line, None
    else:
        dense = np.asarray(matrix)
        if symmetry == "general":
            col, row = np.nonzero(dense.T)  # column-major, as stored
            storage = col * n + row
        else:
            col, row = np.nonzero(np.tril(dense).T)
            storage = col * n - col * (col - 1) // 2 + (row - col)
        values = dense[row, col]

        def locate(k: int):
            index = int(storage[k])
            line = int(entry_lines[index]) if index < entry_lines.size else None
            return line, f"entry ({row[k] + 1}, {col[k] + 1})"

    values = values.astype(np.float64)

    def fail(k: int, message: str) -> InputError:
        line, label = locate(k)
        text = f"matrix entry {float(values[k])!r} {message}" + (f" ({label})" if label else "")
        return InputError(text, path=path, line=line)

    check_weights(values, fail)
    weighted = policy.weight is not None and field != "pattern"
    weight = values if weighted else np.where(values != 0, 1.0, 0.0)
    notes = [f"Matrix Market {layout} {field} {symmetry}"]
    if not weighted and field != "pattern":
        notes.append("stored values not used as weights (no weight chosen); edges weigh 1")
    return EdgeRecords(path=path, format="mtx", source=_ids(row), target=_ids(col),
                       weight=weight, weighted=weighted, directed=directed,
                       extra_nodes=_ids(np.arange(n)), locate=locate,
                       locate_node=lambda j: (None, f"row {j + 1}"), notes=notes)
