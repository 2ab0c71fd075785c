"""The workspace's one colour palette ("fjord") for the terminal UI: the colours live in
``workspace.palette`` (shared with the reports; its docstring says how they were chosen) and
are re-exported here with the Textual theme.

``app.tcss`` reads these through the theme's variables (``$primary``, ``$dim``,
``$rule`` …); widgets that draw by hand import the constants.
"""

from __future__ import annotations

from workspace.palette import (  # noqa: F401  (re-exported: widgets import them from here)
    ACCENT,
    AFTER_GAP,
    BAR_GROUND,
    BARS,
    BEFORE_GAP,
    CANCELLED,
    COMMUNITY,
    DIM,
    DONE,
    FAILED,
    FAINT,
    GAP_MARK,
    GROUND,
    HEAT,
    HEAT_TEXT_DARK,
    HEAT_TEXT_LIGHT,
    INTERRUPTED,
    PANEL,
    PRIMARY,
    RULE,
    RUNNING,
    STATUS,
    SURFACE,
    TEXT,
    community_colour,
)


def status_style(status: str | None) -> str:
    """Rich style for a run status (bold for the two that need attention)."""
    colour = STATUS.get(status or "", DIM)
    return f"bold {colour}" if status in ("failed", "interrupted") else colour


def theme():
    """The Textual theme built from this palette (custom variables: dim, faint, rule, bar-ground)."""
    from textual.theme import Theme

    return Theme(name="cutbook-fjord", primary=PRIMARY, secondary=DONE, accent=ACCENT, warning=CANCELLED,
                 error=FAILED, success=DONE, foreground=TEXT, background=GROUND, surface=SURFACE, panel=PANEL,
                 dark=True, variables={"dim": DIM, "faint": FAINT, "rule": RULE, "bar-ground": BAR_GROUND,
                                       "footer-background": BAR_GROUND, "footer-key-foreground": PRIMARY,
                                       "footer-description-foreground": DIM})
