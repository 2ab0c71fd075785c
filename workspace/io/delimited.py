"""Delimited edge lists: CSV, TSV and whitespace-separated text.

Parsing is done by ``pyarrow.csv`` (multi-threaded C++ reader) with every
column typed as a string, so ids such as ``"007"`` stay verbatim. Whitespace
files are first normalised with ``bytes.translate`` and ``re`` (runs of blanks
become one space; blanks at line ends go) and then read by the same reader
with a single-space delimiter and quoting off.
"""

from __future__ import annotations

import os
import re

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

from workspace.domain import ImportPolicy
from workspace.errors import InputError, ParameterError
from workspace.io._common import (
    BlankLines,
    EdgeRecords,
    LineMap,
    Progress,
    check_utf8,
    count_nonblank_lines,
    normalise_newlines,
    report_progress,
    strip_bom,
    to_float64,
    weights_from_strings,
)

WHITESPACE = "whitespace"
DEFAULT_DELIMITER = {"csv": ",", "tsv": "\t", "edgelist": WHITESPACE}
DELIMITER_ALIASES = {
    "comma": ",", "tab": "\t", "\\t": "\t", "semicolon": ";", "pipe": "|",
    "whitespace": WHITESPACE, "space": WHITESPACE, " ": WHITESPACE,
}
#: First-line field pairs read as column names by ``header="auto"``: compared after
#: :func:`_name_key` (case, blanks, ``_`` and ``-`` ignored), so ``Source_ID`` matches ``sourceid``.
ENDPOINT_HEADER_NAMES = frozenset({
    ("source", "target"), ("from", "to"), ("src", "dst"), ("src", "dest"), ("node1", "node2"),
    ("tail", "head"), ("head", "tail"), ("id1", "id2"), ("sourceid", "targetid"),
    ("fromid", "toid"), ("fromnode", "tonode"), ("sourcenode", "targetnode"), ("start", "end"),
    ("origin", "destination"), ("orig", "dest"), ("sender", "receiver"), ("ego", "alter"),
    ("node", "neighbor"), ("node", "neighbour"), ("vertex1", "vertex2"),
    # one-letter endpoint names of textbooks and papers; read as names only when data follows
    ("a", "b"), ("u", "v"), ("i", "j"), ("x", "y"), ("s", "t"), ("p", "q"), ("m", "n"),
})
#: Words that name the first / second endpoint of an edge inside a longer column name
#: (``from_station``/``to_station``, ``station_src``/``station_dst``).
_FIRST_ROLE = frozenset({"source", "src", "from", "start", "origin", "orig", "tail", "sender"})
_SECOND_ROLE = frozenset({"target", "tgt", "dst", "dest", "to", "end", "destination", "head",
                          "receiver"})
_SAMPLE_BYTES = 1 << 18
_THREADS_FROM_BYTES = 8 << 20  # below this a single thread is as fast
_WHITESPACE_TABLE = bytes.maketrans(b"\t\v\f", b"   ")
_EXPECTED = re.compile(r"Expected (\d+) columns, got (\d+)")


def resolve_delimiter(fmt: str, delimiter: str | None) -> str:
    """The delimiter for ``fmt``: the policy's (aliases resolved) or the format's default.

    Raises ParameterError for a delimiter that is not one character, a
    quote, or a line break.
    """
    if delimiter is None:
        return DEFAULT_DELIMITER[fmt]
    value = DELIMITER_ALIASES.get(delimiter.lower() if len(delimiter) > 1 else delimiter, delimiter)
    if value == WHITESPACE:
        return value
    if len(value) != 1 or value in "\"\r\n":
        raise ParameterError(
            f"delimiter must be one character, 'tab' or 'whitespace', not {delimiter!r}")
    return value


def _delimiter_hint(line: bytes, current: str) -> str:
    """A hint naming the separator a one-field first line seems to use (``""`` when none fits)."""
    for sep, name in ((b";", "';'"), (b"\t", "tab"), (b"|", "'|'"), (b",", "','")):
        if sep in line and sep.decode() != current:
            return f"; the line looks separated by {name}: give --delimiter {name}"
    if len(line.split()) >= 2:
        return "; the line looks separated by blanks: give --delimiter whitespace (or --format edgelist)"
    return ""


def _refuse_foreign_separator(sample: pa.Table, shown: str, path: str, line: int) -> None:
    """Refuse a file whose every first-column value holds another separator (default delimiter only).

    ``a;b;1,5`` read with ``,`` gives two fields, ``a;b;1`` and ``5``: ids that
    exist in no network. When the first field of every sampled line holds the
    same ``;``, tab or ``|`` the file is almost surely separated by it (with
    decimal commas); an explicit ``--delimiter`` reads it as it is.
    """
    import pyarrow.compute as pc

    col = sample.column(0)
    if len(col) == 0:
        return
    for sep, name in ((";", "';'"), ("\t", "tab"), ("|", "'|'")):
        if pc.all(pc.match_substring(col, sep)).as_py():
            raise InputError(f"every line's first field holds {name}: the file looks separated by {name}, "
                             f"not {shown}; give --delimiter {name}, or --delimiter {shown} to read it as it is",
                             path=path, line=line)


def _remove_comments(data: bytes, comment: str) -> bytes:
    """Cut every line at the comment marker, together with blanks before it."""
    marker = comment.encode("utf-8")
    if marker not in data:
        return data
    return re.sub(rb"[ \t]*" + re.escape(marker) + rb"[^\n]*", b"", data)


def _normalise_whitespace(data: bytes) -> bytes:
    """Blank runs -> one space, no blank at line start or end (line count kept)."""
    data = data.translate(_WHITESPACE_TABLE)
    if b"  " in data:
        data = re.sub(rb" {2,}", b" ", data)
    if data.startswith(b" ") or data.endswith(b" ") or b"\n " in data or b" \n" in data:
        data = re.sub(rb"(?m)^ | $", b"", data)
    return data


class _Csv:
    """pyarrow.csv with one set of parse options; everything read as strings."""

    def __init__(self, path: str, data: bytes | None, delimiter: str, quoting: bool, *,
                 scan: _FileScan | None = None) -> None:
        self.path = path
        self.data = data
        # file mode (``scan``): the whole text is read by Arrow from the file itself; any parse
        # failure hands over to the in-memory path (:class:`_ReadFromBytes`), which explains it
        self.scan = scan
        self.parse_kwargs = dict(delimiter=delimiter, quote_char='"' if quoting else False,
                                 double_quote=quoting, escape_char=False,
                                 newlines_in_values=False, ignore_empty_lines=True)
        self._lines: LineMap | BlankLines | None = None
        # Arrow cannot parse a row longer than its block ("straddling object"): 4 MiB blocks hold
        # any ordinary line; only when one does not are blocks sized to the longest line
        self.block_size = 1 << 22

    @property
    def lines(self) -> LineMap | BlankLines:
        if self.scan is not None:
            return self.scan.lines
        if self._lines is None:
            self._lines = LineMap(self.data)
        return self._lines

    def release(self) -> None:
        """Done parsing: keep only where the lines are (:class:`BlankLines`), not the file's
        bytes, so that record lookups made later (errors found while canonicalising) do not
        hold the whole file in memory."""
        if self.scan is None:
            self._lines = BlankLines(self.data)
        self.data = None

    def read(self, data: bytes | None, n_columns: int | None, include: list[int] | None,
             threads: bool) -> pa.Table:
        """Parse ``data`` (None: the whole text, from the file itself in file mode)."""
        from_file = data is None and self.scan is not None
        if data is None and not from_file:
            data = self.data
        size = self.scan.size if from_file else len(data)
        names = None if n_columns is None else [f"f{i}" for i in range(n_columns)]
        # threads only pay off on large inputs (and Arrow's pool is best left idle for small ones)
        read_options = pa_csv.ReadOptions(use_threads=threads and size > _THREADS_FROM_BYTES,
                                          autogenerate_column_names=True, block_size=self.block_size)
        convert = dict(strings_can_be_null=False, quoted_strings_can_be_null=False,
                       check_utf8=False)
        if names is not None:
            convert["column_types"] = {name: pa.string() for name in names}
            if include is not None:
                convert["include_columns"] = [names[i] for i in include]
        try:
            if from_file:
                with pa.OSFile(self.path, "rb") as source:
                    return pa_csv.read_csv(source, read_options=read_options,
                                           parse_options=pa_csv.ParseOptions(**self.parse_kwargs),
                                           convert_options=pa_csv.ConvertOptions(**convert))
            return pa_csv.read_csv(pa.BufferReader(data), read_options=read_options,
                                   parse_options=pa_csv.ParseOptions(**self.parse_kwargs),
                                   convert_options=pa_csv.ConvertOptions(**convert))
        except (pa.ArrowInvalid, OSError) as err:
            if self.scan is not None:
                raise _ReadFromBytes() from err
            # a line longer than the block shows as "straddling object" or as an empty file
            if len(data) > self.block_size and self._fit_block_to_longest_line():
                return self.read(data, n_columns, include, threads)
            raise self._explain(data, n_columns, include, err) from None

    def _fit_block_to_longest_line(self) -> bool:
        """Grow the block size to hold the longest line; False when it already does."""
        data = self.data
        newlines = np.flatnonzero(np.frombuffer(data, dtype=np.uint8) == 10) if data else np.zeros(0, int)
        bounds = np.concatenate([[-1], newlines, [len(data)]])
        longest = int(np.diff(bounds).max()) if bounds.size > 1 else len(data)
        size = max(1 << 22, 1 << int(longest + 1024).bit_length())
        if size <= self.block_size:
            return False
        self.block_size = size
        return True

    def _explain(self, data: bytes, n_columns, include, err: Exception) -> InputError:
        text = str(err)
        if "Empty CSV file" in text:
            return InputError("the file holds no records", path=self.path)
        if _EXPECTED.search(text):
            bad: list = []

            def handler(row):
                if not bad:
                    bad.append(row)
                return "skip"

            options = dict(self.parse_kwargs, invalid_row_handler=handler)
            try:
                pa_csv.read_csv(pa.BufferReader(data),
                                read_options=pa_csv.ReadOptions(use_threads=False,
                                                                autogenerate_column_names=True,
                                                                block_size=self.block_size),
                                parse_options=pa_csv.ParseOptions(**options),
                                convert_options=pa_csv.ConvertOptions(
                                    column_types={f"f{i}": pa.string()
                                                  for i in range(n_columns or 0)},
                                    check_utf8=False))
            except pa.ArrowInvalid:
                pass
            if bad:
                row = bad[0]
                first = self.lines.line(0)
                line = self.lines.line(row.number - 1) if row.number is not None else None
                return InputError(
                    f"expected {row.expected_columns} fields (as on line {first}), "
                    f"found {row.actual_columns}", path=self.path, line=line)
        return InputError(f"cannot be read as delimited text: {text}", path=self.path)


def _is_numeric(values: pa.Array | pa.ChunkedArray) -> bool:
    return len(values) > 0 and to_float64(values) is not None


#: delimited files of at least this many bytes are parsed from the file itself when they need
#: no rewriting (:func:`read_delimited_file`); smaller ones are read into memory
STREAM_FROM_BYTES = 32 << 20
_SCAN_BYTES = 1 << 24


class _ReadFromBytes(Exception):
    """File mode cannot read this file as it is: read it into memory (the usual path)."""


class _FileScan:
    """One pass over a file in slices of bounded size: can Arrow parse it as it is, and where
    are its lines.

    ``usable`` is False when the text would need any of the in-memory path's rewriting or
    checks: gzip data, a byte-order mark, a non-ASCII byte (UTF-8 validation and stray marks),
    a carriage return (line ends), or a file that changed size while read. Otherwise
    ``has_quote`` and the first ``_SAMPLE_BYTES`` (``head``) are known, and :attr:`lines`
    (:class:`BlankLines`, the same line numbers as the in-memory text) is found by a second
    pass when first asked for: only an error's line or a quoted file's line count needs it.
    """

    def __init__(self, path: str) -> None:
        self.usable = False
        self.path = path
        self.size = os.path.getsize(path)
        self.has_quote = False
        self._lines: BlankLines | None = None
        # one buffer read into again and again: a fresh bytes object per slice cost the kernel's
        # page clearing of every slice (the scan of a 73 MiB file took 25 ms instead of 12-17 ms)
        chunk = bytearray(min(_SCAN_BYTES, self.size + 1))
        with open(path, "rb", buffering=0) as fh:
            seen = 0
            head = b""
            for _ in range(self.size // _SCAN_BYTES + 2):  # a file that grows is refused below
                got = fh.readinto(chunk)
                if not got:
                    break
                if got < len(chunk):
                    del chunk[got:]  # the file's last slice
                if not seen and (chunk[:2] == b"\x1f\x8b" or chunk.startswith(b"\xef\xbb\xbf")):
                    return
                if not chunk.isascii() or b"\r" in chunk:
                    return
                self.has_quote = self.has_quote or b'"' in chunk
                if len(head) < _SAMPLE_BYTES:
                    head += bytes(chunk[:_SAMPLE_BYTES - len(head)])
                seen += got
        if seen != self.size:
            return
        self.head = head
        self.usable = True

    @property
    def lines(self) -> BlankLines:
        if self._lines is None:
            lines = BlankLines(b"", feed=True)
            with open(self.path, "rb", buffering=0) as fh:
                for _ in range(self.size // _SCAN_BYTES + 1):
                    chunk = fh.read(_SCAN_BYTES)
                    if not chunk:
                        break
                    lines.feed(chunk)
            lines.finish()
            self._lines = lines
        return self._lines


def read_delimited_file(path: str, fmt: str, policy: ImportPolicy,
                        progress: Progress = None) -> EdgeRecords | None:
    """:func:`read_delimited` on a large file without holding its bytes: Arrow parses the file
    itself, so the peak memory is that of the parsed columns alone; or None when the file is
    smaller than :data:`STREAM_FROM_BYTES`, uses comments or blank-run separators, or needs
    rewriting (:class:`_FileScan`), or Arrow cannot parse it (the caller then reads it into
    memory, which gives the same records or the same error).
    """
    try:
        if policy.comment or not os.path.isfile(path) or os.path.getsize(path) < STREAM_FROM_BYTES:
            return None
        delimiter = resolve_delimiter(fmt, policy.delimiter)
    except (OSError, ParameterError):
        return None
    if delimiter == WHITESPACE:
        return None
    try:
        scan = _FileScan(path)
    except OSError:
        return None
    if not scan.usable:
        return None
    reader = _Csv(path, None, delimiter, quoting=delimiter != "\t", scan=scan)
    try:
        return _read_records(path, fmt, policy, progress, reader, delimiter, scan.head,
                             whole=scan.size <= _SAMPLE_BYTES)
    except _ReadFromBytes:
        return None


def read_delimited(path: str, data: bytes, fmt: str, policy: ImportPolicy,
                   progress: Progress = None) -> EdgeRecords:
    """Read a delimited edge list into :class:`EdgeRecords`.

    Parameters
    ----------
    path : str
        File name, for messages.
    data : bytes
        File content.
    fmt : {"csv", "tsv", "edgelist"}
        Default delimiter ``","``, tab, or runs of blanks.
    policy : ImportPolicy
        ``delimiter``, ``comment``, ``header`` and ``weight`` are used here.
    progress : callable or None, default None

    Returns
    -------
    EdgeRecords
        One record per data line; columns 0 and 1 are the endpoints.

    Raises
    ------
    InputError
        Invalid UTF-8, wrong field count, empty id, bad weight, unknown weight
        column, no records; each with file and 1-based line.
    ParameterError
        A weight column that is an endpoint column, a weight name with
        ``header="no"``.

    Notes
    -----
    Line numbers count every physical line (header, blank and comment lines
    included). Quoting: CSV and other one-character delimiters follow
    RFC 4180 (``"`` quotes, ``""`` inside); TSV (IANA text/tab-separated-values)
    and whitespace files have no quoting. Line breaks inside quoted values are
    refused. See :func:`workspace.io.read_network` for the header rule.

    References
    ----------
    Y. Shafranovich, RFC 4180 (2005); IANA media type text/tab-separated-values
    (1993); Apache Arrow ``pyarrow.csv.read_csv`` (Arrow 15, 2024).
    """
    delimiter = resolve_delimiter(fmt, policy.delimiter)
    data = normalise_newlines(strip_bom(data))
    ascii_only = data.isascii()
    if not ascii_only:
        check_utf8(data, path)
    stray_bom = -1 if ascii_only else data.find(b"\xef\xbb\xbf")
    if stray_bom >= 0:
        raise InputError("a byte-order mark (U+FEFF) inside the file, not at its start: were two files "
                         "joined together? Remove it and import again", path=path,
                         line=data.count(b"\n", 0, stray_bom) + 1)
    if policy.comment:
        data = _remove_comments(data, policy.comment)
    if delimiter == WHITESPACE:
        data = _normalise_whitespace(data)
        reader = _Csv(path, data, " ", quoting=False)
    else:
        reader = _Csv(path, data, delimiter, quoting=delimiter != "\t")
    return _read_records(path, fmt, policy, progress, reader, delimiter, data, whole=True)


def _read_records(path: str, fmt: str, policy: ImportPolicy, progress: Progress, reader: _Csv,
                  delimiter: str, head: bytes, *, whole: bool) -> EdgeRecords:
    """The records of a delimited text: ``head`` is the whole text (``whole``) or, in file
    mode, its first ``_SAMPLE_BYTES`` (raises :class:`_ReadFromBytes` when that is not enough).
    In file mode (``reader.scan``) the text is the file's bytes as they are, which the scan
    checked need none of :func:`read_delimited`'s rewriting."""
    data = head
    size = len(data) if whole else reader.scan.size
    notes: list[str] = []
    shown = {"\t": "tab", " ": "blank runs", WHITESPACE: "blank runs"}.get(delimiter, repr(delimiter))

    # --- first non-blank line (column count) and a sample of up to 256 KiB of whole lines
    lead = re.match(rb"\n*", data).end()
    if lead == len(data):
        if not whole:
            raise _ReadFromBytes()
        raise InputError("the file holds no records", path=path)
    header_line = data.count(b"\n", 0, lead) + 1
    first_end = data.find(b"\n", lead)
    if first_end < 0 and not whole:
        raise _ReadFromBytes()
    first_table = reader.read(data[lead:] if first_end < 0 else data[lead:first_end + 1],
                              None, None, threads=False)
    n_columns = first_table.num_columns
    if n_columns < 2:
        raise InputError(f"expected at least 2 fields (two endpoint ids) separated by {shown}, "
                         f"found 1{_delimiter_hint(data[lead:] if first_end < 0 else data[lead:first_end], delimiter)}",
                         path=path, line=header_line)
    sample_bytes = data
    if size > _SAMPLE_BYTES:
        cut = data.rfind(b"\n", 0, _SAMPLE_BYTES)
        if cut < 0 and not whole:
            raise _ReadFromBytes()
        sample_bytes = data[:cut + 1] if cut >= 0 else data
    sample = reader.read(sample_bytes, n_columns, None, threads=False)
    first_row = [sample.column(i)[0].as_py() for i in range(n_columns)]
    if policy.delimiter is None and delimiter == ",":
        _refuse_foreign_separator(sample, shown, path, header_line)

    # --- header decision (rules documented in read_network)
    header, candidate_reason = _header_decision(policy, sample, first_row)
    weight_index = _weight_column(policy, path, header, first_row, n_columns, header_line)

    report_progress(progress, "parse", 0, None)
    include = [0, 1] + ([weight_index] if weight_index is not None else [])
    del data, head  # file mode: only the head; the in-memory path: the reader keeps the text
    table = reader.read(None, n_columns, include, threads=True)
    expected_rows = table.num_rows
    if reader.parse_kwargs["quote_char"]:
        if reader.scan is not None:
            if reader.scan.has_quote:
                expected_rows = reader.scan.lines.n_rows
        elif b'"' in reader.data:
            expected_rows = count_nonblank_lines(reader.data)
    if table.num_rows != expected_rows:
        raise InputError(f"{table.num_rows} records parsed from {expected_rows} non-blank lines: "
                         "a quoted value spans a line break, which is not supported",
                         path=path)
    report_progress(progress, "parse", table.num_rows, table.num_rows)
    source = table.column(0)
    target = table.column(1)

    if header and candidate_reason is not None:
        # guard: column names never double as node ids further down
        rest = [source.slice(1), target.slice(1)]
        names = [first_row[0], first_row[1]]
        if any(pc.any(pc.equal(col, name)).as_py() for col in rest for name in names):
            header = False
            notes.append(f"header=auto: line {header_line} read as data: its fields "
                         f"{names[0]!r}/{names[1]!r} also occur as node ids below")
        else:
            notes.append(f"header=auto: line {header_line} read as column names "
                         f"({candidate_reason}): {', '.join(map(str, first_row))} "
                         "(--header no reads it as data)")
    elif policy.header == "auto" and not header:
        if not any(_is_numeric(pa.array([v], pa.string())) for v in first_row) \
                and _isolated_first_pair(source, target, sample):
            notes.append(
                f"warning: header=auto read line {header_line} ({first_row[0]!r}, "
                f"{first_row[1]!r}) as an edge, but neither id occurs on any other line: they "
                "form a 2-node component of their own. If that line names the columns, import "
                "again with --header yes (or --header no to keep it as data and silence this)")
        else:
            notes.append(f"header=auto: line {header_line} read as data "
                         "(--header yes reads it as column names)")
    elif header:
        reason = "header=yes" if policy.header == "yes" else "a weight column is named"
        notes.append(f"line {header_line} read as column names ({reason}): "
                     f"{', '.join(map(str, first_row))}")
    start = 1 if header else 0
    if table.num_rows - start == 0:
        raise InputError("the file holds a header but no edge records", path=path,
                         line=header_line)
    if weight_index is None and n_columns > 2:
        extra = first_row[2:] if header else [f"column {i}" for i in range(2, n_columns)]
        notes.append(f"no weight column chosen: {', '.join(map(str, extra))} ignored; "
                     "edges weigh 1")

    def locate(i: int) -> tuple[int | None, str | None]:
        return reader.lines.line(i + start), None

    source = source.slice(start)
    target = target.slice(start)
    if weight_index is not None:
        column = table.column(2).slice(start)

        def fail(i: int, message: str) -> InputError:
            return InputError(message, path=path, line=locate(i)[0])

        weight = weights_from_strings(column, fail)
        label = f"column {first_row[weight_index]!r}" if header else f"column {weight_index}"
        notes.append(f"weights from {label}")
    else:
        weight = None  # every record weighs 1 (made by canonicalise when needed)
    notes.insert(0, f"fields separated by {shown}")
    reader.release()
    return EdgeRecords(path=path, format=fmt, source=source, target=target, weight=weight,
                       weighted=weight_index is not None, directed=False, locate=locate,
                       notes=notes)


def _name_key(value: str) -> str:
    """Lower case without blanks, ``_`` and ``-``: the form in which column names are compared."""
    return re.sub(r"[\s_\-]+", "", value.strip().lower())


def _names_endpoints(first: str, second: str) -> str | None:
    """``"listed"``, ``"pattern"`` or None: do two fields read as the endpoint column names?

    ``"listed"``: the pair is in :data:`ENDPOINT_HEADER_NAMES` with names longer than one
    letter. ``"pattern"`` (weaker evidence: such fields can also be ids): a listed one-letter
    pair (``u,v``), fields made of the same words except one first-endpoint word against one
    second-endpoint word (``from_station``/``to_station``), or one name numbered 1 and 2
    (``user1``/``user2``).
    """
    a, b = _name_key(first), _name_key(second)
    if (a, b) in ENDPOINT_HEADER_NAMES:
        return "pattern" if len(a) == 1 and len(b) == 1 else "listed"
    words_a = [w for w in re.split(r"[\s_\-]+", first.strip().lower()) if w]
    words_b = [w for w in re.split(r"[\s_\-]+", second.strip().lower()) if w]
    if len(words_a) == len(words_b) and len(words_a) > 1:
        differ = [(x, y) for x, y in zip(words_a, words_b) if x != y]
        if len(differ) == 1 and differ[0][0] in _FIRST_ROLE and differ[0][1] in _SECOND_ROLE:
            return "pattern"
    if len(a) > 1 and a[:-1] == b[:-1] and a[-1] == "1" and b[-1] == "2" and a[:-1].isalpha():
        return "pattern"
    return None


def _rows_are_separate_pairs(rows: pa.Table) -> bool:
    """True when no id repeats in the first two columns of ``rows`` (every line its own pair)."""
    if rows.num_rows == 0:
        return True
    ids = pa.chunked_array(list(rows.column(0).chunks) + list(rows.column(1).chunks))
    return pc.count_distinct(ids).as_py() == 2 * rows.num_rows


def _header_decision(policy: ImportPolicy, sample: pa.Table,
                     first_row: list[str]) -> tuple[bool, str | None]:
    """(header?, reason when auto found a candidate that still needs the id guard)."""
    if policy.header == "yes":
        return True, None
    if policy.header == "no":
        return False, None
    if isinstance(policy.weight, str) and not policy.weight.isdigit():
        return True, None  # a weight column named by the user means there is a header
    if any(_is_numeric(pa.array([value], pa.string())) for value in first_row):
        return False, None
    below = sample.slice(1)
    names = _names_endpoints(first_row[0], first_row[1])
    if names == "listed":
        return True, "it names the endpoint columns"
    if below.num_rows == 0:
        return False, None  # a lone "a,b" line is an edge, not names over nothing
    for i, value in enumerate(first_row):
        if _is_numeric(below.column(i)):
            return True, (f"field {value!r} is not a number while the column below it is "
                          "numeric")
    # names that could also be ids (u,v; user1,user2) count only where line 1 stands out: in a
    # file whose every line is a separate pair, line 1 is like the others
    if names == "pattern" and not _rows_are_separate_pairs(below):
        return True, "it names the endpoint columns"
    return False, None


def _isolated_first_pair(source: pa.ChunkedArray, target: pa.ChunkedArray,
                         sample: pa.Table) -> bool:
    """Line 1 read as data but its two ids occur on no other line, while other lines share ids.

    Such a line adds a component of exactly two nodes that nothing else touches - what a header
    line read as data looks like. Files in which every line is such a pair (a matching) are
    not flagged: there line 1 is like all the others (judged on the 256 KiB sample).
    """
    first = (source[0].as_py(), target[0].as_py())
    if first[0] == first[1]:
        return False
    names = pa.array(list(first), pa.string())
    for column in (source, target):
        if pc.any(pc.is_in(column.slice(1), value_set=names)).as_py():
            return False
    rest = sample.slice(1)
    return rest.num_rows >= 2 and not _rows_are_separate_pairs(rest)


def _weight_column(policy: ImportPolicy, path: str, header: bool, first_row: list[str],
                   n_columns: int, header_line: int | None) -> int | None:
    """0-based index of the weight column or None (unweighted)."""
    weight = policy.weight
    if weight is None:
        return None
    index: int | None = None
    if isinstance(weight, str) and not weight.isdigit():
        if not header:
            raise ParameterError(f"weight column {weight!r} is named, but header='no'; "
                                 "use a 0-based column index or header='yes'")
        matches = [i for i, name in enumerate(first_row) if name == weight]
        if not matches:
            matches = [i for i, name in enumerate(first_row)
                       if name.strip().lower() == weight.strip().lower()]
        if len(matches) != 1:
            raise InputError(f"no single column named {weight!r} in the header "
                             f"(columns: {', '.join(map(str, first_row))})",
                             path=path, line=header_line)
        index = matches[0]
    else:
        if isinstance(weight, str) and header and weight in first_row:
            index = first_row.index(weight)
        else:
            index = int(weight)
    if index in (0, 1):
        raise ParameterError(f"weight column {weight!r} is an endpoint column; endpoint ids "
                             "are columns 0 and 1")
    if not 0 <= index < n_columns:
        raise InputError(f"weight column {index} (0-based) does not exist: the file has "
                         f"{n_columns} columns", path=path, line=header_line)
    return index
