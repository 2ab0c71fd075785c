"""Membership CSV laid out from packed id bytes, against Python's own ``csv`` writer.

Reference: the standard library's ``csv.writer(f, lineterminator="\\n")`` (minimal quoting,
RFC 4180, 2005) writing the rows ``(id, label)`` one by one, and ``str.encode("utf-8")``. The
bytes written by ``workspace.io.membership_csv`` (and through it ``write_membership`` /
``membership_text``) must be exactly those, for ids holding commas and quotes, non-ASCII ids,
ids of every length up to 4096 bytes, labels of any number of digits, nodes left out (-1), and
whatever the step sizes; the id bytes may be in memory or read through a reused buffer.
"""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from workspace.domain import PackedNodeIds, encode_node_ids
from workspace.errors import InputError
from workspace.io import membership_csv as mc
from workspace.io import membership_text, write_membership


def _python_csv(ids: list[str], labels) -> bytes:
    # the standard library's writer, one row at a time (Python csv module; RFC 4180)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["node", "community"])
    for node, label in zip(ids, np.asarray(labels).tolist()):
        if label >= 0:
            writer.writerow([node, label])
    return buf.getvalue().encode("utf-8")


class _ReusedBuffer:
    """A reader that hands out every step in the same buffer (as the store's reader does), so a
    step kept past the next read would show up as wrong bytes."""

    def __init__(self, data: np.ndarray) -> None:
        self.data = data
        self.at = 0
        self.buf = np.empty(1, dtype=np.uint8)

    def read(self, n: int) -> np.ndarray:
        if n > self.buf.size:
            self.buf = np.empty(n, dtype=np.uint8)
        self.buf[:n] = self.data[self.at:self.at + n]
        self.buf[n:] = 0xFF  # garbage beyond the step
        self.at += n
        return self.buf[:n]


def _packed(ids: list[str], streamed: bool) -> PackedNodeIds:
    offsets, data = encode_node_ids(np.array(ids, dtype=np.str_) if ids else np.array([], dtype=np.str_))
    if streamed:
        return PackedNodeIds(offsets, open_data=lambda: _ReusedBuffer(data))
    return PackedNodeIds(offsets, data)


def _tricky_ids() -> list[str]:
    rng = np.random.default_rng(11)
    alphabet = list('abz09-_. ,";\t\'') + ["é", "ß", "中", "😀", "𝔘"]
    out = {"", "with,comma", 'say "hi"', '"', '""', ",", '","', "Ärger", "日本", "x\x00y", " padded ",
           "a" * 4096, "é" * 2048, "😀" * 1024, '"' * 4096, "," * 4095}
    for length in list(range(1, 60)) + [127, 128, 255, 1000, 4000]:
        out.add("".join(rng.choice(alphabet, size=length)))
        out.add("".join(rng.choice(alphabet[:8], size=length)))  # no character to quote
    return sorted(out)


@pytest.mark.parametrize("check_first", [True, False])
@pytest.mark.parametrize("streamed", [False, True])
@pytest.mark.parametrize("step_bytes,step_rows,scan_bytes", [(1, 1, 997), (7, 3, 4096), (4096, 5, 1),
                                                              (1 << 20, 1 << 16, 1 << 20)])
def test_bytes_equal_python_csv_writer(monkeypatch, streamed, step_bytes, step_rows, scan_bytes, check_first):
    monkeypatch.setattr(mc, "STEP_BYTES", step_bytes)
    monkeypatch.setattr(mc, "STEP_ROWS", step_rows)
    monkeypatch.setattr(mc, "SCAN_BYTES", scan_bytes)
    ids = _tricky_ids()
    rng = np.random.default_rng(5)
    for top in (3, 12, 123_456_789):  # one digit, mixed widths, many digits
        labels = rng.integers(-1, top, len(ids))
        count, chunks = mc.membership_csv(_packed(ids, streamed), labels, check_first=check_first)
        pieces = [bytes(c) for c in chunks]
        assert b"".join(pieces) == _python_csv(ids, labels)
        assert count == int(np.count_nonzero(labels >= 0))
        for piece in pieces:  # each chunk ends at a line end and is valid UTF-8 alone
            assert piece.endswith(b"\n")
            piece.decode("utf-8")


@pytest.mark.parametrize("streamed", [False, True])
def test_fixed_width_ids_and_one_digit_labels(monkeypatch, streamed):
    # the (rows, width) table layout: one id length, one label width per step
    monkeypatch.setattr(mc, "STEP_ROWS", 64)
    ids = [f"station-{i:032d}" for i in range(1000)]
    labels = np.arange(1000) % 8
    count, chunks = mc.membership_csv(_packed(ids, streamed), labels)
    assert b"".join(bytes(c) for c in chunks) == _python_csv(ids, labels) and count == 1000
    labels[::7] = -1  # nodes left out break the table into a mask in those steps
    count, chunks = mc.membership_csv(_packed(ids, streamed), labels)
    assert b"".join(bytes(c) for c in chunks) == _python_csv(ids, labels)


def test_nothing_written_and_empty_network():
    count, chunks = mc.membership_csv(_packed(["a", "b"], False), np.array([-1, -1]))
    assert count == 0 and b"".join(bytes(c) for c in chunks) == b"node,community\n"
    count, chunks = mc.membership_csv(_packed([], True), np.zeros(0, dtype=np.int64))
    assert count == 0 and b"".join(bytes(c) for c in chunks) == b"node,community\n"


@pytest.mark.parametrize("streamed", [False, True])
def test_line_break_refused_before_any_output(streamed):
    ids = ["a", "b\nc", "d\re"]
    with pytest.raises(InputError, match=r"'b\\nc' holds a line break") as err:
        mc.membership_csv(_packed(ids, streamed), np.array([0, 1, 2]), path="out.csv")
    assert "out.csv" in str(err.value)
    # an id left out (-1) is not written, so its line break does not matter (as before)
    count, chunks = mc.membership_csv(_packed(ids[:2], streamed), np.array([0, -1]))
    assert b"".join(bytes(c) for c in chunks) == b"node,community\na,0\n"
    # checked step by step (a file written atomically): the error comes while iterating
    count, chunks = mc.membership_csv(_packed(ids, streamed), np.array([0, 1, 2]), path="out.csv",
                                      check_first=False)
    with pytest.raises(InputError, match=r"'b\\nc' holds a line break") as err:
        b"".join(bytes(c) for c in chunks)
    assert "out.csv" in str(err.value)
    count, chunks = mc.membership_csv(_packed(ids[:2], streamed), np.array([0, -1]), check_first=False)
    assert b"".join(bytes(c) for c in chunks) == b"node,community\na,0\n"


def test_write_membership_and_text_match_python_csv(tmp_path):
    ids = _tricky_ids()
    labels = np.random.default_rng(2).integers(-1, 40, len(ids))
    path = tmp_path / "m.csv"
    assert write_membership(path, np.array(ids), labels) == int(np.count_nonzero(labels >= 0))
    assert path.read_bytes() == _python_csv(ids, labels)
    text, count = membership_text(np.array(ids), labels)
    assert text.encode("utf-8") == _python_csv(ids, labels)
    with pytest.raises(InputError, match="line break"):
        write_membership(tmp_path / "bad.csv", np.array(["a\nb"]), np.array([0]))
