"""Membership CSV (``node,community``) built from packed node ids with numpy byte operations.

The bytes are those of Python's ``csv.writer(f, lineterminator="\\n")`` over the rows
``(id, label)`` (minimal quoting, RFC 4180): an id holding the delimiter ``,`` or the quote
``"`` is written inside quotes with each quote doubled; other ids as they are. No Python
``str`` is made per id: the UTF-8 bytes of the ids (the stored form, see
:class:`workspace.domain.PackedNodeIds`) are laid out with the ``,label\\n`` tails between
them in steps of bounded size, so the work per id is a few byte copies whatever the id
length, and the memory a few times one step.
"""

from __future__ import annotations

from typing import Iterator

import numpy as np

from workspace.domain import PackedNodeIds
from workspace.errors import InputError

#: Id bytes per output step (the step's output is that plus the tails, about 4 bytes a row).
STEP_BYTES = 1 << 20
#: Rows per output step at most.
STEP_ROWS = 1 << 16
#: Bytes per step of the check for line breaks and characters to quote.
SCAN_BYTES = 1 << 20

HEADER = b"node,community\n"
_COMMA, _QUOTE, _LF, _CR = 0x2C, 0x22, 0x0A, 0x0D


#: Byte values looked for in the ids: line breaks (refused), then the characters that need quotes.
_SPECIAL = (bytes([_LF, _CR]), bytes([_COMMA, _QUOTE]))


def _piece_rows(piece: np.ndarray, start: int, offsets: np.ndarray,
                groups: tuple[bytes, ...]) -> list[np.ndarray]:
    """For each group of byte values, the ascending rows with one of them in ``piece`` (the bytes
    from byte ``start`` on): a piece whose smallest byte is above every value asked (ids of
    letters, digits, ``-``, ``.``, ``_``) is passed after one numpy minimum; otherwise a C-speed
    ``bytes.find`` per value, and numpy positions only for a value that is found."""
    values = sorted({v for group in groups for v in group})
    empty = np.zeros(0, dtype=np.int64)
    if piece.size == 0 or int(piece.min()) > values[-1]:
        return [empty for _ in groups]
    raw = piece.tobytes()
    found = {}
    for v in values:
        if raw.find(bytes([v])) >= 0:
            found[v] = np.searchsorted(offsets, np.flatnonzero(piece == v) + start, side="right") - 1
    return [np.unique(np.concatenate([found[v] for v in group if v in found]))
            if any(v in found for v in group) else empty for group in groups]


def _rows_holding(node_ids: PackedNodeIds, groups: tuple[bytes, ...]) -> list[np.ndarray]:
    """For each group of byte values, the ascending rows whose bytes hold any of them: one read
    through the bytes in steps of :data:`SCAN_BYTES` (see :func:`_piece_rows`)."""
    offsets = node_ids.offsets
    found: list[list[np.ndarray]] = [[] for _ in groups]
    lo, hi = int(offsets[0]), int(offsets[-1])
    reader = node_ids.open_bytes()
    for a in range(lo, hi, SCAN_BYTES):
        for into, rows in zip(found, _piece_rows(reader.read(min(hi, a + SCAN_BYTES) - a), a, offsets, groups)):
            if rows.size:
                into.append(rows)
    return [np.unique(np.concatenate(rows)) if rows else np.zeros(0, dtype=np.int64) for rows in found]


def _line_break_error(node_ids: PackedNodeIds, row: int, path: str | None) -> InputError:
    bad = str(node_ids.take([row])[0])
    return InputError(f"node id {bad!r} holds a line break, which a membership CSV cannot carry; "
                      "write json or graphml", path=path)


def _label_tails(labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``b",<label>\\n"`` for each of ``labels`` (int >= 0), left-aligned in a (len, width) table,
    and their lengths. Label ``c`` has ``d = 1 + floor(log10 c)`` decimal digits (counted by
    comparison with powers of ten); digit ``j`` from the left is ``floor(c / 10^(d-1-j)) mod 10``."""
    labels = np.asarray(labels, dtype=np.int64)
    digits = np.ones(labels.shape[0], dtype=np.int64)
    top = int(labels.max()) if labels.size else 0
    power = 10
    while power <= top:  # bounded: at most 19 decimal digits in an int64
        digits += labels >= power
        power *= 10
    most = int(digits.max()) if labels.size else 1
    rows = np.arange(labels.shape[0])
    table = np.zeros((labels.shape[0], most + 2), dtype=np.uint8)
    table[:, 0] = _COMMA
    powers = 10 ** np.arange(most, dtype=np.int64)
    for j in range(most):
        inside = j < digits
        table[inside, 1 + j] = 48 + (labels[inside] // powers[digits[inside] - 1 - j]) % 10
    table[rows, digits + 1] = _LF
    return table, digits + 2


def _interleave(body: np.ndarray, body_lengths: np.ndarray, tails: np.ndarray,
                tail_lengths: np.ndarray) -> np.ndarray:
    """``body_0 tail_0 body_1 tail_1 …`` for ragged byte strings given flat with their lengths.

    Rows of one body length and one tail length (fixed-width ids, fewer than ten communities)
    are laid out as the columns of a (rows, width) table; others by a mask of the tail bytes."""
    rows = body_lengths.shape[0]
    if rows and body_lengths.min() == body_lengths.max() and tail_lengths.min() == tail_lengths.max():
        width_b, width_t = int(body_lengths[0]), int(tail_lengths[0])
        table = np.empty((rows, width_b + width_t), dtype=np.uint8)
        table[:, :width_b] = body.reshape(rows, width_b)
        table[:, width_b:] = tails.reshape(rows, width_t)
        return table.reshape(-1)
    line_end = np.cumsum(body_lengths + tail_lengths)
    total = int(line_end[-1]) if line_end.size else 0
    tail_start = line_end - tail_lengths
    before = np.cumsum(tail_lengths) - tail_lengths
    at = np.repeat(tail_start - before, tail_lengths) + np.arange(tails.shape[0])
    out = np.empty(total, dtype=np.uint8)
    is_body = np.ones(total, dtype=bool)
    is_body[at] = False
    out[at] = tails
    out[is_body] = body
    return out


def _ragged(table: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Rows of a left-aligned byte table cut to their lengths, concatenated."""
    if lengths.size and int(lengths.min()) == table.shape[1]:
        return table.reshape(-1)
    return table[np.arange(table.shape[1])[None, :] < lengths[:, None]]


def membership_csv(node_ids: PackedNodeIds, labels: np.ndarray, *, path: str | None = None,
                   check_first: bool = True) -> tuple[int, Iterator[memoryview]]:
    """The bytes of a membership CSV from packed ids, in steps; nodes labelled -1 are left out.

    Parameters
    ----------
    node_ids : PackedNodeIds, length n
        Id ``i`` is bytes ``offsets[i]:offsets[i + 1]`` (UTF-8), in memory or read through
        from the store a step at a time (twice: once to check for line breaks and find the
        ids to quote, once to lay out the rows).
    labels : ndarray of int, shape (n,)
        Community of each node, -1 for none.
    path : str or None
        Named in errors.
    check_first : bool, default True
        Read the bytes through once before the rows to refuse a line break before any chunk is
        made (what a stream needs). False: each step is checked as it is laid out, so the error
        comes from the iterator after earlier chunks (for a file written atomically, which is then
        removed), and the bytes are read through once instead of twice.

    Returns
    -------
    count : int
        Nodes written with a community.
    chunks : iterator of memoryview
        The header ``node,community\\n``, then the rows in node order, each step at most
        :data:`STEP_ROWS` rows and about :data:`STEP_BYTES` id bytes. Every chunk ends at a
        line end, so each is valid UTF-8 on its own.

    Raises
    ------
    InputError
        A written id holding a line break (``\\n`` or ``\\r``), which a membership CSV cannot
        carry; raised before any chunk is made (``check_first``), else while iterating.

    Notes
    -----
    Row ``i`` is ``q(id_i) "," decimal(label_i) "\\n"`` where ``q(s) = s`` unless ``s`` holds
    ``,`` or ``"``, then ``q(s) = '"' + s.replace('"', '""') + '"'`` (minimal quoting as
    Python's ``csv.QUOTE_MINIMAL`` with ``lineterminator="\\n"``).

    References
    ----------
    Y. Shafranovich, "Common Format and MIME Type for Comma-Separated Values (CSV) Files",
    RFC 4180 (2005).
    """
    labels = np.asarray(labels)
    n = len(node_ids)
    if labels.shape != (n,):
        from workspace.errors import ParameterError

        raise ParameterError("node_ids and labels must be 1-D arrays of the same length")
    labels = labels.astype(np.int64, copy=False)
    kept = labels >= 0
    count = int(np.count_nonzero(kept))
    quoted_rows = None  # found step by step
    if check_first:
        broken, quoted_rows = _rows_holding(node_ids, _SPECIAL)
        broken = broken[kept[broken]]
        if broken.size:
            raise _line_break_error(node_ids, int(broken[0]), path)
    return count, _chunks(node_ids, labels, kept, count, quoted_rows, path)


def _chunks(node_ids, labels, kept, count, quoted_rows, path) -> Iterator[memoryview]:
    yield memoryview(HEADER)
    if count == 0:
        return
    # the tail of every label 0..top at once (a run's labels are 0..k-1, k <= n); labels spread
    # wider than that get the tails of their distinct values, found by binary search
    top = int(labels.max())
    distinct = None
    if top >= max(1 << 16, 2 * count):
        distinct = np.unique(labels[kept])
        tails_of, tail_length_of = _label_tails(distinct)
    else:
        tails_of, tail_length_of = _label_tails(np.arange(top + 1))
    offsets = node_ids.offsets
    n = len(node_ids)
    reader = node_ids.open_bytes()
    a = 0
    while a < n:  # bounded: each step takes at least one row
        b = int(np.searchsorted(offsets, offsets[a] + STEP_BYTES, side="right")) - 1
        b = min(n, a + STEP_ROWS, max(b, a + 1))
        piece = reader.read(int(offsets[b] - offsets[a]))
        if quoted_rows is None:
            broken, step_quoted = _piece_rows(piece, int(offsets[a]), offsets, _SPECIAL)
            broken = broken[kept[broken]]
            if broken.size:
                raise _line_break_error(node_ids, int(broken[0]), path)
        else:
            q_lo, q_hi = np.searchsorted(quoted_rows, [a, b])
            step_quoted = quoted_rows[q_lo:q_hi]
        lengths = np.diff(offsets[a:b + 1])
        keep = kept[a:b]
        if keep.all():
            rows = None
            body = piece
        else:
            rows = np.flatnonzero(keep)
            body = piece[np.repeat(keep, lengths)]
            lengths = lengths[rows]
        label = labels[a:b] if rows is None else labels[a:b][rows]
        if distinct is not None:
            label = np.searchsorted(distinct, label)
        if label.size == 0:
            a = b
            continue
        quoted = None
        if step_quoted.size:
            quoted = np.zeros(b - a, dtype=bool)
            quoted[step_quoted - a] = True
            quoted = quoted if rows is None else quoted[rows]
        if quoted is None or not quoted.any():
            tail_lengths = tail_length_of[label]
            tails = _ragged(tails_of[label], tail_lengths)
            yield memoryview(_interleave(body, lengths, tails, tail_lengths))
        else:
            # quotes inside quoted ids are doubled (an id with a quote is always quoted);
            # row i's tail is its closing quote, ",label\n" and the next row's opening quote
            doubled = body == _QUOTE
            if doubled.any():
                before = np.zeros(body.shape[0] + 1, dtype=np.int64)
                np.cumsum(doubled, out=before[1:])
                ends = np.cumsum(lengths)
                lengths = lengths + np.diff(before[np.concatenate([[0], ends])])
                body = np.repeat(body, 1 + doubled)
            q = quoted.astype(np.int64)
            opens_next = np.zeros_like(q)
            opens_next[:-1] = q[1:]
            width = tails_of.shape[1] + 2
            table = np.zeros((label.shape[0], width), dtype=np.uint8)
            table[quoted, 0] = _QUOTE
            table[~quoted, :width - 2] = tails_of[label[~quoted]]
            table[quoted, 1:width - 1] = tails_of[label[quoted]]
            tail_lengths = q + tail_length_of[label]
            table[opens_next.astype(bool), tail_lengths[opens_next.astype(bool)]] = _QUOTE
            tail_lengths = tail_lengths + opens_next
            out = _interleave(body, lengths, _ragged(table, tail_lengths), tail_lengths)
            if quoted[0]:  # the step's first id opens its own quote
                out = np.concatenate([np.array([_QUOTE], dtype=np.uint8), out])
            yield memoryview(out)
        a = b
