"""Use cases: one function per user action, one short transaction each.

Front ends (CLI, TUI) call these and nothing below them. Results are plain
dataclasses / dicts of JSON-ready values; ORM objects never leave this package.
"""


def iso_time(t):
    """A stored time as every listing prints it: UTC as ``YYYY-MM-DDTHH:MM:SS`` without a zone suffix.

    SQLite hands stored times back without their zone (they are written in UTC); PostgreSQL hands
    them back in the session's zone, so they are converted to UTC first. None stays None.
    """
    if t is None:
        return None
    if t.tzinfo is not None:
        from datetime import timezone

        t = t.astimezone(timezone.utc).replace(tzinfo=None)
    return t.isoformat(timespec="seconds")
