"""Use cases: one function per user action, one short transaction each.

Front ends (CLI, TUI) call these and nothing below them. Results are plain
dataclasses / dicts of JSON-ready values; ORM objects never leave this package.
"""
