"""Line lookup kept after the file's bytes are released (``_common.BlankLines``).

Expected lines come from Python's ``bytes.split(b"\\n")`` (common practice: a line is what lies
between two line feeds; the non-blank ones are the records a parser reports).
"""

import random

import pytest

from workspace.io._common import BlankLines


def _expected(data: bytes) -> list[int]:
    return [i + 1 for i, text in enumerate(data.split(b"\n")) if text]


def _cases() -> list[bytes]:
    rng = random.Random(7)
    fixed = [b"", b"\n", b"\n\n", b"a", b"a\n", b"\na", b"a\n\nb\n", b"\n\na\nb", b"ab\ncd\nef"]
    return fixed + [bytes(rng.choice(b"ab\n\n") for _ in range(rng.randrange(0, 40)))
                    for _ in range(1500)]


@pytest.mark.parametrize("slice_bytes", [1, 2, 3, 7, 1 << 26])
def test_lines_match_split(monkeypatch, slice_bytes):
    # Python bytes.split: the k-th non-blank line's 1-based number, for every slice size
    monkeypatch.setattr(BlankLines, "_SLICE", slice_bytes)
    for data in _cases():
        expected = _expected(data)
        lines = BlankLines(data)
        assert lines.n_rows == len(expected), data
        assert [lines.line(k) for k in range(len(expected))] == expected, data
        assert lines.line(-1) is None and lines.line(len(expected)) is None


def test_lines_fed_in_pieces_match_split():
    # the same text given in pieces of random size (the file scan's way); reference bytes.split
    rng = random.Random(11)
    for data in _cases():
        lines = BlankLines(b"", feed=True)
        at = 0
        while at < len(data):
            step = rng.randint(1, 9)
            lines.feed(data[at:at + step])
            at += step
        lines.finish()
        expected = _expected(data)
        assert lines.n_rows == len(expected), data
        assert [lines.line(k) for k in range(len(expected))] == expected, data
