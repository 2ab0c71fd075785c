"""Terminal workspace (Textual). ``cutbook ui`` calls :func:`run_app`.

Textual is imported only when the app starts, so ``cutbook --help`` stays quick.
"""

from __future__ import annotations


def run_app(store: str | None) -> int:
    """Open the store (``--store`` value, ``$CUTBOOK_STORE`` or the default) and run the workspace.

    Parameters
    ----------
    store : str or None
        Path or SQLAlchemy URL of the store; None picks the default location.

    Returns
    -------
    int
        Exit code: 0 after a clean quit, otherwise the code of the error that
        stopped the store from opening (printed as one line on stderr).
    """
    import sys

    from workspace.errors import CutbookError
    from workspace.services.store import open_workspace

    try:
        # Never creates a store (a mistyped path says so); a read-only store opens for browsing.
        opened = open_workspace(store, notify=lambda line: print(line, file=sys.stderr), create=False)
    except CutbookError as exc:
        print(f"cutbook: error: {exc}", file=sys.stderr)
        return exc.exit_code
    try:
        from workspace.tui.app import CutbookApp

        app = CutbookApp(opened)
        result = app.run()
        return int(result) if isinstance(result, int) else (app.return_code or 0)
    finally:
        opened.dispose()


__all__ = ["run_app"]
