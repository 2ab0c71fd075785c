"""The ``cutbook`` command. Thin: parse -> one service call -> render.

Only argparse is imported at start-up; services, numpy and rich load inside the
command that needs them, so ``cutbook --help`` is quick.
"""

from __future__ import annotations

import os
import sys

from workspace.cli.parser import build_parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "handler", None) is None:
        parser.print_help(sys.stderr)
        return 2
    from workspace.errors import CutbookError

    try:
        return int(args.handler(args) or 0)
    except CutbookError as exc:
        sys.stderr.write(f"cutbook: error: {exc}\n")
        return exc.exit_code
    except KeyboardInterrupt:
        sys.stderr.write("cutbook: interrupted\n")
        return 130
    except BrokenPipeError:
        return 1
    except Exception as exc:  # an unexpected failure: one line, traceback only on request
        if os.environ.get("CUTBOOK_DEBUG"):
            raise
        sys.stderr.write(f"cutbook: internal error: {type(exc).__name__}: {exc} "
                         "(set CUTBOOK_DEBUG=1 for the traceback)\n")
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
