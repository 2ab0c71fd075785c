"""Commands: demo, ui."""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

from workspace.cli.common import Out, emit_json


def _demo_store(args) -> tuple[str, bool]:
    """(store, is_default_demo_store). The demo never writes into your main store by default."""
    explicit = getattr(args, "store", None) or os.environ.get("CUTBOOK_STORE")
    if explicit:
        return explicit, False
    import platformdirs

    return str(Path(platformdirs.user_data_dir("cutbook", appauthor=False)) / "demo.sqlite"), True


def cmd_demo(args) -> int:
    from workspace.errors import ConflictError
    from workspace.services.demo import build_demo_store, demo_exists

    out = Out(args.json)
    store_arg, default = _demo_store(args)
    if default and args.rebuild:
        for suffix in ("", "-wal", "-shm"):
            Path(store_arg + suffix).unlink(missing_ok=True)
    t0 = time.monotonic()
    state = demo_exists(store_arg, create_dirs=default)
    if state == "demo":
        out.note(f"cutbook: the demo store is already built at {store_arg} (--rebuild to make it again)")
        summary = None
    elif state == "other":
        raise ConflictError(f"{store_arg} already holds projects; the demo needs an empty store "
                            "(give --store NEW_PATH, or leave --store out to use the default demo store)")
    else:
        summary = build_demo_store(store_arg, say=out.note)
        out.note(f"cutbook: demo built in {time.monotonic() - t0:.1f} s at {store_arg}")
    if default:
        out.note(f"cutbook: other commands use it with --store {store_arg} (or export CUTBOOK_STORE={store_arg})")
    if args.json:
        emit_json({"store": store_arg, "built": summary is not None, **(summary or {})})
    if not args.no_ui and not args.json:
        if not sys.stdout.isatty():
            out.note("cutbook: not a terminal; skipping the UI (open it later with: cutbook --store "
                     f"{store_arg} ui)")
            return 0
        from workspace.tui import run_app

        return run_app(store_arg)
    return 0


def cmd_ui(args) -> int:
    from workspace.tui import run_app

    return run_app(getattr(args, "store", None))
