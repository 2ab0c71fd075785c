"""Shared pieces of the readers: raw bytes, line numbers, edge records, weights.

Nothing here parses characters by hand: bytes are scanned with ``bytes``
methods, ``re`` and numpy, strings are converted with pyarrow.compute kernels.
"""

from __future__ import annotations

import codecs
import gzip
import os
import re
import zlib
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.domain import available_cpus
from workspace.errors import InputError, ParameterError

Progress = Callable[[str, int, "int | None"], None] | None

UTF8_BOM = b"\xef\xbb\xbf"
_CHUNK = 1 << 24  # 16 MiB per read call, so progress moves on big files


def report_progress(progress: Progress, stage: str, done: int, total: int | None) -> None:
    """Call ``progress(stage, done, total)`` when a callback was given."""
    if progress is not None:
        progress(stage, done, total)


#: bytes per call into the XML parser, so progress moves on big files
_XML_FEED = 1 << 22


def feed_xml(path: str, data: bytes, target, progress: Progress = None) -> None:
    """Parse XML ``data`` into a parser ``target`` (ElementTree's target interface) with
    defusedxml's expat parser; ``target.expat`` is set to the expat parser first, for line numbers.

    Errors name ``path`` and the line: not well-formed XML, and the refusals of defusedxml (entity
    declarations, which can expand without bound or read other files; external references and
    document type declarations that point outside the file).

    References
    ----------
    W3C, "Extensible Markup Language (XML) 1.0", 5th ed. (2008), section 4 (entities);
    defusedxml documentation ("XML bomb" and external entity attacks).
    """
    from xml.etree.ElementTree import ParseError

    import defusedxml
    import defusedxml.ElementTree as safe_etree

    parser = safe_etree.DefusedXMLParser(target=target)
    target.expat = parser.parser
    try:
        for offset in range(0, len(data), _XML_FEED):
            parser.feed(data[offset:offset + _XML_FEED])
            report_progress(progress, "parse", min(offset + _XML_FEED, len(data)), len(data))
        parser.close()
    except ParseError as err:
        line = err.position[0] if getattr(err, "position", None) else None
        raise InputError(f"not well-formed XML: {err.msg if hasattr(err, 'msg') else err}",
                         path=path, line=line) from None
    except defusedxml.EntitiesForbidden as err:
        kind = f"external entity {err.name!r} ({err.sysid})" if err.sysid else \
            f"entity {err.name!r}"
        raise InputError(f"refused: the file declares the XML {kind}; entity declarations "
                         "can expand without bound or read other files, so they are not "
                         "accepted", path=path,
                         line=target.expat.CurrentLineNumber) from None
    except (defusedxml.ExternalReferenceForbidden, defusedxml.DTDForbidden) as err:
        raise InputError(f"refused: the file refers to an external resource ({err})",
                         path=path, line=target.expat.CurrentLineNumber) from None


def read_bytes(path: str, progress: Progress = None) -> bytes:
    """Whole file as bytes; gzip data (magic ``1f 8b``) is decompressed.

    Raises
    ------
    InputError
        Missing file, a directory, no permission, an OS read error or damaged
        gzip data; the message names the file.
    """
    if not os.path.exists(path):
        raise InputError("no such file", path=path)
    if os.path.isdir(path):
        raise InputError("is a directory, not a network file", path=path)
    try:
        # unbuffered: ``read()`` then sizes one bytes object from the file size and fills it in
        # place (a buffered reader would join its buffered head to the rest: a second copy of
        # the whole file at the peak)
        with open(path, "rb", buffering=0) as raw:
            total = os.fstat(raw.fileno()).st_size
            if raw.read(2) == b"\x1f\x8b":
                raw.seek(0)
                with gzip.GzipFile(fileobj=raw) as unzipped:
                    parts = []
                    while True:
                        block = unzipped.read(_CHUNK)
                        if not block:
                            break
                        parts.append(block)
                        report_progress(progress, "read", raw.tell(), total)
                    return b"".join(parts)
            raw.seek(0)
            # one read call: the bytes object is filled in place (reading in parts and joining
            # them would copy the whole file once more); a local file reads in well under a second
            report_progress(progress, "read", 0, total)
            data = raw.read()
            report_progress(progress, "read", len(data), total)
            return data
    except PermissionError:
        raise InputError("permission denied", path=path) from None
    except (gzip.BadGzipFile, EOFError, zlib.error) as err:
        raise InputError(f"damaged gzip data ({err})", path=path) from None
    except OSError as err:
        raise InputError(f"cannot read file: {err.strerror or err}", path=path) from None


def strip_bom(data: bytes) -> bytes:
    """Drop a leading UTF-8 byte-order mark (it must not become part of an id)."""
    return data[3:] if data.startswith(UTF8_BOM) else data


def normalise_newlines(data: bytes) -> bytes:
    r"""Turn ``\r\n`` and lone ``\r`` line ends into ``\n``; line count is unchanged."""
    if b"\r" not in data:
        return data
    return re.sub(rb"\r\n?", b"\n", data)


def check_utf8(data: bytes, path: str) -> None:
    """Raise InputError with the 1-based line of the first invalid UTF-8 byte."""
    if data.isascii():
        return
    try:
        codecs.utf_8_decode(data, "strict", True)
    except UnicodeDecodeError as err:
        line = data.count(b"\n", 0, err.start) + 1
        column = err.start - (data.rfind(b"\n", 0, err.start) + 1) + 1
        raise InputError(
            f"invalid UTF-8 byte 0x{data[err.start]:02x} at byte column {column}; "
            "save the file as UTF-8", path=path, line=line) from None


class LineMap:
    r"""Where each non-blank line of a buffer sits.

    Lines end at ``\n`` (after :func:`normalise_newlines`). ``rows[k]`` is the
    0-based line index of the k-th non-blank line, so a record that a parser
    reports as row ``k`` (0-based, blank lines skipped) is on file line
    ``rows[k] + 1``; ``starts[k]`` is its byte offset.
    """

    def __init__(self, data: bytes) -> None:
        codes = np.frombuffer(data, dtype=np.uint8)
        newline = np.flatnonzero(codes == 10)
        starts = np.empty(newline.size + 1, dtype=np.int64)
        starts[0] = 0
        starts[1:] = newline + 1
        ends = np.empty_like(starts)
        ends[:-1] = newline
        ends[-1] = codes.size
        self.rows = np.flatnonzero(ends > starts)
        self.starts = starts[self.rows]

    @property
    def n_rows(self) -> int:
        return int(self.rows.size)

    def line(self, row: int) -> int | None:
        """1-based file line of non-blank row ``row`` (None if out of range)."""
        if 0 <= row < self.rows.size:
            return int(self.rows[row]) + 1
        return None


class BlankLines:
    r"""The file line of each non-blank line of a buffer, kept as the blank lines alone.

    Gives what :meth:`LineMap.line` gives without keeping the buffer or an entry per line:
    with ``b`` the sorted 0-based indices of the blank lines (lines end at ``\n``, after
    :func:`normalise_newlines`; a buffer ending in ``\n`` ends with a blank line), the k-th
    non-blank line is line ``k + #{j : b[j] - j <= k}`` (``b[j] - j`` non-blank lines come
    before blank line ``j``). Most edge lists have no blank line inside, and then nothing is
    stored at all. The newline positions are found in slices of bounded size, so building it
    costs memory in proportion to a slice, not to the file.
    """

    _SLICE = 1 << 23

    def __init__(self, data: bytes, *, feed: bool = False) -> None:
        """The lines of ``data``; with ``feed``, of ``data`` and the pieces given to :meth:`feed`
        after it, complete once :meth:`finish` is called."""
        self._blanks: list[np.ndarray] = [np.zeros(0, dtype=np.int64)]
        self._newlines = 0
        self._size = 0
        self._previous = -1  # position of the last newline so far (-1: start of data)
        self.feed(data)
        if not feed:
            self.finish()

    def feed(self, data: bytes) -> None:
        """The next piece of the text."""
        codes = np.frombuffer(data, dtype=np.uint8)
        step = self._SLICE
        for at in range(0, codes.size, step):
            is_newline = codes[at:at + step] == 10
            count = int(np.count_nonzero(is_newline))
            base = self._size + at
            adjacent = bool(np.any(is_newline[1:] & is_newline[:-1])) or (
                count and bool(is_newline[0]) and self._previous == base - 1)
            if adjacent:
                # line newlines + i ends at newline[i] and starts after before[i]: blank if
                # the two are adjacent
                newline = np.flatnonzero(is_newline) + base
                before = np.empty(newline.size, dtype=np.int64)
                before[0] = self._previous
                before[1:] = newline[:-1]
                self._blanks.append(np.flatnonzero(newline == before + 1) + self._newlines)
            if count:
                self._previous = base + is_newline.size - 1 - int(np.argmax(is_newline[::-1]))
            self._newlines += count
        self._size += codes.size

    def finish(self) -> None:
        """No more pieces: the last line (empty after a final newline) is counted."""
        self.n_lines = self._newlines + 1
        if self._size == 0 or self._previous == self._size - 1:
            self._blanks.append(np.array([self._newlines], dtype=np.int64))
        blank = np.concatenate(self._blanks).astype(np.int64)
        self.n_rows = self.n_lines - int(blank.size)
        self._before = blank - np.arange(blank.size, dtype=np.int64)
        del self._blanks

    def line(self, row: int) -> int | None:
        """1-based file line of non-blank row ``row`` (None if out of range)."""
        if 0 <= row < self.n_rows:
            return int(row + np.searchsorted(self._before, row, side="right")) + 1
        return None


def count_nonblank_lines(data: bytes) -> int:
    """Number of non-blank ``\\n``-separated lines, cheaply when there are no blank lines."""
    if not data:
        return 0
    if b"\n\n" not in data and not data.startswith(b"\n"):
        return data.count(b"\n") + (0 if data.endswith(b"\n") else 1)
    return LineMap(data).n_rows


@dataclass
class EdgeRecords:
    """Edge records as read from a file, before any policy is applied.

    Attributes
    ----------
    path, format : str
        Source file and reader format name.
    source, target : pyarrow string Array or ChunkedArray, length m
        Endpoint ids per record, verbatim.
    weight : ndarray of float64, shape (m,), or None
        Finite, non-negative weights; None when unweighted (every record weighs 1.0: the
        array of ones is made only once the id columns are encoded and released).
    weighted : bool
        Whether a weight column / attribute was used.
    directed : bool
        The input declares itself directed (arcs ``source -> target``).
    extra_nodes : pyarrow string Array or None
        Declared node ids (GraphML ``<node>``, JSON ``nodes``, Matrix Market
        ``1..n``); nodes without edges stay in the graph as isolated nodes.
    locate : callable(int) -> (line or None, label or None)
        Where record ``i`` sits in the file.
    locate_node : callable(int) -> (line or None, label or None)
        Where declared node ``j`` sits in the file.
    """

    path: str
    format: str
    source: pa.Array | pa.ChunkedArray
    target: pa.Array | pa.ChunkedArray
    weight: np.ndarray | None
    weighted: bool
    directed: bool = False
    extra_nodes: pa.Array | None = None
    locate: Callable[[int], tuple[int | None, str | None]] = lambda i: (None, f"record {i + 1}")
    locate_node: Callable[[int], tuple[int | None, str | None]] = lambda j: (None, f"node {j + 1}")
    notes: list[str] = field(default_factory=list)

    @property
    def n_records(self) -> int:
        return int(len(self.source)) if self.source is not None else self._released_count

    def release_columns(self) -> None:
        """Drop the id columns (the largest part of the records) once they are encoded; the
        record count, weights and line lookup stay."""
        self._released_count = self.n_records
        self.source = self.target = self.extra_nodes = None

    def error(self, index: int, message: str, *, node: bool = False) -> InputError:
        """InputError for record ``index`` (or declared node ``index``), with its line."""
        line, label = (self.locate_node if node else self.locate)(int(index))
        if label:
            message = f"{message} ({label})"
        return InputError(message, path=self.path, line=line)


def first_cast_failure(values: pa.Array | pa.ChunkedArray, target_type: pa.DataType) -> int:
    """Index of the first element of ``values`` that ``pc.cast`` refuses.

    Bisection over slices, each cast done by the Arrow kernel: O(m log m) work
    in C, only run on the error path. Assumes at least one element fails.
    """
    lo, hi = 0, len(values)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        try:
            pc.cast(values.slice(lo, mid - lo), target_type)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            hi = mid
        else:
            lo = mid
    return lo


def to_float64(values: pa.Array | pa.ChunkedArray) -> pa.Array | pa.ChunkedArray | None:
    """``pc.cast`` to float64, retrying with ASCII/Unicode blanks trimmed; None on failure."""
    try:
        return pc.cast(values, pa.float64())
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    try:
        return pc.cast(pc.utf8_trim_whitespace(values), pa.float64())
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None


def weights_from_strings(values: pa.Array | pa.ChunkedArray,
                         fail: Callable[[int, str], InputError]) -> np.ndarray:
    """Parse weight strings into float64 and validate them.

    Accepted: what Arrow's string-to-double cast accepts (decimal and
    exponent notation, surrounding blanks trimmed). Refused, at the first
    offending record in file order: non-numeric text, NaN, +-inf, negatives.
    ``fail(i, message)`` builds the error for record ``i``.
    """
    weight = _cast_chunks_in_threads(values)
    if weight is not None:
        check_weights(weight, lambda i, msg: fail(i, f"weight {values[i].as_py()!r} {msg}"))
        return weight
    parsed = to_float64(values)
    if parsed is None:
        trimmed = pc.utf8_trim_whitespace(values)
        i = first_cast_failure(trimmed, pa.float64())
        raise fail(i, f"weight {values[i].as_py()!r} is not a number")
    if isinstance(parsed, pa.ChunkedArray):
        parsed = parsed.combine_chunks() if parsed.num_chunks != 1 else parsed.chunk(0)
    weight = parsed.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)
    check_weights(weight, lambda i, msg: fail(i, f"weight {values[i].as_py()!r} {msg}"))
    return weight


#: From this many weights in several chunks (a large file's parse) the chunks are cast in two
#: threads (Arrow's cast runs without the interpreter lock): the same cast, chunk by chunk.
PARALLEL_CAST_MIN_VALUES = 1 << 19


def _cast_chunks_in_threads(values: pa.Array | pa.ChunkedArray) -> np.ndarray | None:
    """The chunks of ``values`` cast to float64 by two threads straight into one array, or None
    (few values or chunks, one CPU, or a chunk the plain cast refuses: the caller then takes
    :func:`to_float64`'s path, which also retries with blanks trimmed)."""
    chunks = values.chunks if isinstance(values, pa.ChunkedArray) else [values]
    if len(values) < PARALLEL_CAST_MIN_VALUES or len(chunks) < 2 or available_cpus() < 2:
        return None
    from concurrent.futures import ThreadPoolExecutor

    out = np.empty(len(values), dtype=np.float64)
    starts = np.cumsum([0] + [len(c) for c in chunks[:-1]]).tolist()

    def cast(part: tuple[int, pa.Array]) -> bool:
        at, chunk = part
        try:
            done = pc.cast(chunk, pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return False
        out[at:at + len(done)] = done.to_numpy(zero_copy_only=False)
        return True

    with ThreadPoolExecutor(2, thread_name_prefix="cutbook-weights") as pool:
        if not all(pool.map(cast, zip(starts, chunks))):
            return None
    return out


def check_weights(weight: np.ndarray, fail: Callable[[int, str], InputError]) -> None:
    """Refuse NaN, infinite or negative weights at the first offending index."""
    bad = ~np.isfinite(weight)
    bad |= weight < 0
    if bad.any():
        i = int(np.argmax(bad))
        value = weight[i]
        if np.isnan(value):
            raise fail(i, "is NaN; weights must be finite numbers >= 0")
        if np.isinf(value):
            raise fail(i, "is infinite; weights must be finite numbers >= 0")
        raise fail(i, "is negative; weights must be finite numbers >= 0")


def string_array(values: list[str]) -> pa.Array:
    """A pyarrow string array from a list of Python strings."""
    return pa.array(values, type=pa.string())


def id_strings(node_ids) -> pa.Array:
    """A network's ids as an Arrow string array: for packed ids (``domain.PackedNodeIds``: UTF-8
    bytes and offsets into them, as ``PackedNodeIds.decode`` reads them) a view of their bytes, with
    no ``str`` per id (a numpy ``str`` array of 10M 40-character ids is 1.6 GB); else converted from
    the numpy strings."""
    from workspace.domain import PackedNodeIds

    if isinstance(node_ids, PackedNodeIds):
        return node_ids.strings()
    return pa.array(np.asarray(node_ids, dtype=str), type=pa.string())


def format_by_name(path: str, format: str | None, suffixes: tuple[tuple[str, str], ...], what: str,
                   option: str) -> str:
    """The format of a side file (a membership, a node table): ``format`` when given (checked against
    the formats named in ``suffixes``), else the first ``(suffix, format)`` whose suffix ends the file
    name (``.gz`` ignored). ``what`` and ``option`` word the errors."""
    known = tuple(dict.fromkeys(fmt for _, fmt in suffixes))
    if format is not None:
        if format not in known:
            raise ParameterError(f"{what} format must be one of {', '.join(known)}, not {format!r}")
        return format
    name = path.lower().removesuffix(".gz")
    for suffix, fmt in suffixes:
        if name.endswith(suffix):
            return fmt
    names = ", ".join(dict.fromkeys(suffix for suffix, _ in suffixes))
    raise InputError(f"cannot tell the {what} format from the file name; use {names}, or give {option}",
                     path=path)
