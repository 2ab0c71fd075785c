"""The ``cutbook`` command. Thin: parse -> one service call -> render.

Only argparse is imported at start-up; services, numpy and rich load inside the
command that needs them, so ``cutbook --help`` is quick.
"""

from __future__ import annotations

import os
import sys

from workspace.cli.parser import build_parser


#: True in the console script (``main()`` with the process's own command line): the process ends
#: once the command returns. False when commands run inside a longer-lived process (tests, tools).
PROCESS_ENDS_AFTER_COMMAND = False


def main(argv: list[str] | None = None) -> int:
    """Run one command; ``argv=None`` means this process's command line (the console script)."""
    global PROCESS_ENDS_AFTER_COMMAND
    if argv is None:
        PROCESS_ENDS_AFTER_COMMAND = True
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


def _command_word(argv: list[str]) -> int | None:
    """Position of the command in ``argv`` (after the global ``--store X``), or None."""
    i = 0
    while i < len(argv):
        word = argv[i]
        if word == "--store":
            i += 2
        elif word.startswith("-"):
            i += 1
        else:
            return i
    return None


def _unknown_command(parser, argv: list[str]) -> int | None:
    """``help [COMMAND]`` prints that help; a mistyped command gets the nearest ones. None: parse as usual."""
    import argparse
    import difflib

    pos = _command_word(argv)
    sub = next((a for a in parser._actions if isinstance(a, argparse._SubParsersAction)), None)
    if pos is None or sub is None or argv[pos] in sub.choices:
        return None
    word = argv[pos]
    if word == "help":
        target = argv[pos + 1] if pos + 1 < len(argv) else None
        if target in sub.choices:
            sub.choices[target].print_help()
            return 0
        parser.print_help()
        if target is None:
            return 0
        word = target
    near = difflib.get_close_matches(word, list(sub.choices), n=3, cutoff=0.6)
    hint = f"; did you mean {' or '.join(near)}?" if near else " (cutbook --help lists them)"
    sys.stderr.write(f"cutbook: error: no command {word!r}{hint}\n")
    return 2


def _run(argv: list[str] | None) -> int:
    parser = build_parser()
    early = _unknown_command(parser, sys.argv[1:] if argv is None else list(argv))
    if early is not None:
        return early
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
