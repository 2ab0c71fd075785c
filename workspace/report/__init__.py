"""Reports people look at: figures (matplotlib, SVG/PNG) and self-contained HTML pages.

Public interface
----------------
``figures``: one function per figure, each taking plain arrays and returning a
``matplotlib.figure.Figure`` (``spectrum``, ``community_sizes``,
``stability_histogram``, ``network_drawing``, ``contingency_heatmap``).
``render.figure_bytes(fig, format)``: SVG text (bytes) or PNG bytes.
``render.inline_svg(fig, prefix)``: an ``<svg>`` element ready to sit inside HTML.
``html.run_page(data)`` / ``html.diff_page(data)``: the whole HTML document.

This package takes plain dicts and arrays; it imports nothing from the store,
services, CLI or UI (a test enforces the layering). matplotlib is used through
``matplotlib.figure.Figure`` and the Agg / SVG canvases only: no window, no
pyplot state, no fonts or scripts fetched from anywhere (SVG text is written as
text with a generic sans-serif family, ``svg.fonttype = "none"``).
"""
