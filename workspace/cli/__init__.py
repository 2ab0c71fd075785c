"""The ``cutbook`` command. Thin: parse -> one service call -> render.

Only argparse is imported at start-up; services, numpy and rich load inside the
command that needs them, so ``cutbook --help`` is quick.
"""

from __future__ import annotations

import os
import sys

from workspace.cli.parser import build_parser


def main(argv: list[str] | None = None) -> int:
    """Run one command; ``argv=None`` means this process's command line (the console script)."""
    code = _run(argv)
    if argv is None and "pyarrow" in sys.modules:
        # Arrow's CSV thread pool can abort interpreter teardown ("terminate called without an
        # active exception", exit 134) after the result is already out. Everything of ours is
        # closed by now (the store is disposed when the command returns), so leave at once.
        try:
            sys.stdout.flush()
            sys.stderr.flush()
        finally:
            os._exit(code)
    return code


def _run(argv: list[str] | None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "handler", None) is None:
        parser.print_help(sys.stderr)
        return 2
    from workspace.errors import CutbookError

    try:
        return int(args.handler(args) or 0)
    except CutbookError as exc:
        return _fail(exc)
    except KeyboardInterrupt:
        sys.stderr.write("cutbook: interrupted\n")
        return 130
    except BrokenPipeError:
        return 1
    except Exception as exc:  # a machine fault gets its own line and code; anything else is unexpected
        from workspace.services.store import translate_fault

        fault = translate_fault(exc, writing=None)
        if fault is not None:
            return _fail(fault, exc)
        if os.environ.get("CUTBOOK_DEBUG"):
            raise
        from workspace.errors import redact

        sys.stderr.write(f"cutbook: internal error: {type(exc).__name__}: {redact(str(exc))} "
                         "(set CUTBOOK_DEBUG=1 for the traceback)\n")
        return 1


def _fail(exc, cause: BaseException | None = None) -> int:
    """One line on stderr and the error's exit code; CUTBOOK_DEBUG=1 prints the traceback first
    (with the database or OS error behind it)."""
    if os.environ.get("CUTBOOK_DEBUG"):
        import traceback

        traceback.print_exception(cause if cause is not None else exc, file=sys.stderr)
    sys.stderr.write(f"cutbook: error: {exc}\n")  # CutbookError.__str__ masks any password
    return exc.exit_code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
