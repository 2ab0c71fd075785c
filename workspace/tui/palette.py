"""The workspace's one colour palette ("fjord"): every colour the UI uses is defined here.

A deep sea-ink ground with a sky-blue lead colour and an orange accent. The
colours that carry meaning — run statuses, community colours, the heat ramp —
come from the Okabe–Ito set (Okabe & Ito 2008, "Color Universal Design"), chosen
so that they stay apart under the common colour-vision deficiencies; a few are
lightened for contrast on the dark ground. Meaning never rests on colour alone:
statuses are always written out and community colours sit beside their labels.

``app.tcss`` reads these through the theme's variables (``$primary``, ``$dim``,
``$rule`` …); widgets that draw by hand import the constants.
"""

from __future__ import annotations

# ground and text
GROUND = "#0d1a1e"      # deep sea-ink
SURFACE = "#132329"     # inputs, raised areas
PANEL = "#1a2e35"       # toasts, popups
RULE = "#2c4650"        # pane borders
TEXT = "#e3ebe7"        # body text
DIM = "#93a9ad"         # secondary text (labels, keys)
FAINT = "#647b80"       # hints, empty states
BAR_GROUND = "#0a1417"  # header and footer strip

# the lead colours
PRIMARY = "#56b4e9"     # sky blue (Okabe–Ito)
ACCENT = "#e69f00"      # orange (Okabe–Ito)

# run statuses (Okabe–Ito, lightened where needed for contrast on GROUND)
DONE = "#2dbf8f"         # bluish green
RUNNING = PRIMARY        # sky blue
FAILED = "#ee7733"       # vermillion
CANCELLED = "#f0e442"    # yellow
INTERRUPTED = "#d98cb8"  # reddish purple
STATUS = {"done": DONE, "running": RUNNING, "failed": FAILED, "cancelled": CANCELLED,
          "interrupted": INTERRUPTED}

# categorical colours for communities, in order (Okabe–Ito without black)
COMMUNITY = ("#e69f00", "#56b4e9", "#2dbf8f", "#f0e442", "#3b8fd9", "#ee7733", "#d98cb8")

# sequential single-hue ramp (ground -> sky blue) for shares in the contingency table
HEAT = ("#132329", "#15344a", "#18456b", "#1f5a8a", "#2e73a8", "#4291c8", "#56b4e9")
HEAT_TEXT_DARK = GROUND   # figures on the two lightest shades
HEAT_TEXT_LIGHT = TEXT

# chart roles
BEFORE_GAP = PRIMARY     # eigenvalue bars up to the largest gap
AFTER_GAP = FAINT        # the rest
GAP_MARK = ACCENT        # the gap marker
BARS = PRIMARY           # size histogram bars


def community_colour(label: int) -> str:
    """The colour of community ``label`` (cycles after seven)."""
    return COMMUNITY[int(label) % len(COMMUNITY)]


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
