"""The workspace's one colour palette ("fjord"), shared by the terminal UI and the reports.

A deep sea-ink ground with a sky-blue lead colour and an orange accent. The
colours that carry meaning — run statuses, community colours, the heat ramp —
come from the Okabe–Ito set (Okabe & Ito 2008, "Color Universal Design"), chosen
so that they stay apart under the common colour-vision deficiencies; a few are
lightened for contrast on the dark ground. Meaning never rests on colour alone:
statuses are always written out and community colours sit beside their labels.

This module imports nothing (no Textual): ``workspace.tui.palette`` re-exports it
with the Textual theme, and ``workspace.report`` draws its figures with the same
community colours.
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

# paper (the printable HTML report and its figures): light ground, the same community colours
PAPER = "#ffffff"        # page and figure ground
INK = "#1b2a2f"          # text and axes
INK_SOFT = "#5a6d72"     # secondary text, grid
PAPER_RULE = "#d5dee0"   # table rules, edge lines in the network drawing
PAPER_BAND = "#f1f5f6"   # striped table rows
# sequential single-hue ramp (paper -> deep sky blue) for counts in the contingency heat map
PAPER_HEAT = ("#ffffff", "#dcedf8", "#b3d9f1", "#7fbfe6", "#4f9fd3", "#2f7db6", "#1b5b8a")
