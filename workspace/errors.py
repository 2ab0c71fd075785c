"""One exception family for the whole package.

Every error carries a user-facing ``message`` and, where it applies, the
``path`` and 1-based ``line`` of the input it concerns. Front ends print
``str(error)`` (one line, no traceback) and exit with ``error.exit_code``.

Exit codes (the CLI contract; README "Exit codes and machine faults" says
what each means for the user's data):

===  =====================================================================
0    ok
1    failure (a bad input file, a failed computation, an unexpected error)
2    usage or invalid parameters
3    not found (project, network, version, parameter set, run)
4    conflict or lock: the store is busy beyond the wait (another process
     is writing), or the request conflicts with what the store holds
10   no store at that path: the file or its folder does not exist (read
     commands never create a store)
11   the store is read-only: read-only medium, read-only file or folder,
     or (server stores) a role or transaction without write permission;
     reading works, every write is refused
12   no space left: the device is full (or a file-size limit was reached)
     while writing the store or an output file
13   not a cutbook store, or a damaged one (truncated, malformed)
14   permission denied: a file or folder cannot be read (or an output
     file cannot be written)
130  cancelled by the user
===  =====================================================================

Codes 10-14 are machine faults: the command changed nothing in the store.
``workspace.store.faults`` is the one place that turns database and
operating-system errors into these classes.
"""

from __future__ import annotations

import os
import re

_URL_PASSWORD = re.compile(r"(?P<head>[a-zA-Z][a-zA-Z0-9+.\-]*://[^:/@\s]*):[^\s/]*@")
_KV_PASSWORD = re.compile(r"(?i)\b(?P<key>password|pwd)\s*=\s*(?:'[^']*'|\"[^\"]*\"|[^\s&;]+)")


def redact(text: str) -> str:
    """``text`` with every password of a connection URL (``scheme://user:password@``) or keyword
    string (``password=...``) replaced by ``***``. Every error message goes through it."""
    text = _URL_PASSWORD.sub(lambda m: f"{m.group('head')}:***@", text)
    return _KV_PASSWORD.sub(lambda m: f"{m.group('key')}=***", text)


class CutbookError(Exception):
    """Base class: a failure the user can act on."""

    exit_code = 1

    def __init__(self, message: str, *, path: str | os.PathLike | None = None,
                 line: int | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.path = None if path is None else os.fspath(path)
        self.line = line

    def __str__(self) -> str:
        where = ""
        if self.path is not None:
            where = f"{self.path}:{self.line}: " if self.line is not None else f"{self.path}: "
        return redact(f"{where}{self.message}")


class InputError(CutbookError):
    """A file that cannot be read as the network or membership it should hold."""


class UsageError(CutbookError):
    """A command or call used wrongly (bad reference syntax, conflicting options)."""

    exit_code = 2


class ParameterError(UsageError):
    """Method parameters that do not fit the method's declared schema."""


class NotFoundError(CutbookError):
    """A project, network, version, parameter set or run that does not exist."""

    exit_code = 3


class ConflictError(CutbookError):
    """The store is locked, or the request conflicts with what it holds."""

    exit_code = 4


class StoreBusy(ConflictError):
    """Another process held the store's write lock for longer than the wait."""


class StoreError(CutbookError):
    """The store cannot be opened or is in a state the code refuses to touch."""


class StoreMissing(StoreError):
    """No store at the given path (the file or its folder does not exist)."""

    exit_code = 10


class StoreReadOnly(StoreError):
    """The store can be read but not written (medium, file, folder or database role)."""

    exit_code = 11


class NoSpace(StoreError):
    """No space left on the device (or a file-size limit) while writing."""

    exit_code = 12


class StoreDamaged(StoreError):
    """The file is not a cutbook store, or the store is damaged."""

    exit_code = 13


class PermissionDenied(StoreError):
    """A file or folder cannot be read (or an output file written) for lack of permission."""

    exit_code = 14


class ComputeError(CutbookError):
    """A numerical method could not produce a result (solver failure, impossible k)."""


class Cancelled(CutbookError):
    """Work stopped on the user's request."""

    exit_code = 130
