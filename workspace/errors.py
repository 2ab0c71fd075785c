"""One exception family for the whole package.

Every error carries a user-facing ``message`` and, where it applies, the
``path`` and 1-based ``line`` of the input it concerns. Front ends print
``str(error)`` (one line, no traceback) and exit with ``error.exit_code``.

Exit codes (the CLI contract): 0 ok, 1 failure, 2 usage, 3 not found,
4 conflict or lock, 130 cancelled by the user.
"""

from __future__ import annotations

import os


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
        return f"{where}{self.message}"


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


class StoreError(CutbookError):
    """The store cannot be opened or is in a state the code refuses to touch."""


class ComputeError(CutbookError):
    """A numerical method could not produce a result (solver failure, impossible k)."""


class Cancelled(CutbookError):
    """Work stopped on the user's request."""

    exit_code = 130
