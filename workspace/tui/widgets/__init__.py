"""Widgets of the terminal workspace (virtual table, block-character charts, detail panes, parameter form)."""
